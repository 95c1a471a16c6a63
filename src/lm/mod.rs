//! n-gram language models with interpolated modified Kneser-Ney smoothing (Chen & Goodman
//! 1998), stored in a memory-mapped file ([`crate::format::lm`]) and exportable as ARPA text.
//!
//! ```
//! # fn main() -> baler::Result<()> {
//! let dir = tempfile::tempdir().unwrap();
//! let path = dir.path().join("harbour.balm");
//! let text = "the ferry leaves at noon\nthe ferry is late\nthe pier is closed\n";
//! let model = baler::lm::build(text.as_bytes(), "harbour.txt", &baler::lm::BuildOptions::default())?;
//! model.write(&path)?;
//! let lm = baler::lm::LanguageModel::open(&path)?;
//! let s = lm.score_sentence(&["the", "ferry", "is", "closed"]);
//! assert!(s.log10_prob < 0.0 && s.oov == 0);
//! assert!(lm.score_sentence(&["the", "dock"]).oov == 1);
//! # Ok(()) }
//! ```

use std::io::{BufRead, Write};
use std::path::{Path, PathBuf};
use std::sync::Arc;

use rustc_hash::FxHashMap;

use crate::error::{Error, Result};
use crate::files::Output;
use crate::format::lm::{self as layout, LmLayout, OrderArrays};
use crate::mmap::{self, Storage};

mod estimate;

/// Id of the unknown word.
pub const UNK: u32 = 0;
/// Id of the sentence start.
pub const BOS: u32 = 1;
/// Id of the sentence end.
pub const EOS: u32 = 2;
/// Spellings of the three reserved words.
pub const RESERVED: [&str; 3] = ["<unk>", "<s>", "</s>"];

/// Bits per word id in a packed n-gram key, so that orders up to 6 fit in a `u128`.
const ID_BITS: u32 = 21;
const MAX_WORDS: usize = (1 << ID_BITS) - 1;
/// The highest order `build` accepts.
pub const MAX_ORDER: usize = 6;

/// Settings of [`build`].
#[derive(Clone, Debug)]
pub struct BuildOptions {
    /// n-gram order (default 4).
    pub order: usize,
    /// Memory budget in bytes; see [`build`] for what it bounds.
    pub memory: u64,
    /// Parent of the temporary directory for spilled counts (the system's when `None`).
    pub temp_dir: Option<PathBuf>,
}

impl Default for BuildOptions {
    fn default() -> Self {
        BuildOptions {
            order: 4,
            memory: crate::settings::DEFAULT_MEMORY,
            temp_dir: None,
        }
    }
}

/// A freshly estimated model, ready to be written.
#[derive(Clone, Debug)]
pub struct Estimated {
    vocab: Vec<String>,
    orders: Vec<OrderArrays>,
    /// Modified Kneser-Ney discounts `[D1, D2, D3+]` per order.
    pub discounts: Vec<[f64; 3]>,
    /// Sentences read.
    pub sentences: u64,
    /// Tokens read (without sentence boundaries).
    pub tokens: u64,
    /// How many times the counts outgrew their share of the budget and went to the sorter.
    pub flushes: u64,
}

fn pack(gram: &[u32]) -> u128 {
    gram.iter()
        .fold(0u128, |k, &w| (k << ID_BITS) | u128::from(w))
}

/// Modified Kneser-Ney discounts from the count-of-counts n1..n4 (Chen & Goodman 1998,
/// eq. 26): Y = n1/(n1 + 2 n2), D1 = 1 − 2Y n2/n1, D2 = 2 − 3Y n3/n2, D3+ = 3 − 4Y n4/n3.
/// When a count-of-counts is zero (tiny corpora) the formula is undefined; then each discount
/// falls back to Y (the single absolute discount of Ney et al. 1994), or 0.5 if Y is undefined.
pub fn discounts(n: [u64; 4]) -> [f64; 3] {
    let [n1, n2, n3, n4] = n.map(|x| x as f64);
    let y = if n1 + 2.0 * n2 > 0.0 {
        n1 / (n1 + 2.0 * n2)
    } else {
        0.5
    };
    let full = [
        1.0 - 2.0 * y * n2 / n1,
        2.0 - 3.0 * y * n3 / n2,
        3.0 - 4.0 * y * n4 / n3,
    ];
    let fallback = if y > 0.0 && y < 1.0 { y } else { 0.5 };
    let mut d = [0.0; 3];
    for k in 0..3 {
        d[k] = if full[k].is_finite() && full[k] > 0.0 && full[k] <= (k + 1) as f64 {
            full[k]
        } else {
            fallback
        };
    }
    d
}

/// Trains a model on tokenized text, one sentence per line, within `options.memory`.
///
/// What the budget bounds: the n-gram counts, which wait in a hash table of at most half the
/// budget (the vocabulary included) and otherwise in sorted runs on disk that are merged, summing
/// equal n-grams (through [`crate::sort::ExternalSorter`], a quarter of the budget per sort); and
/// the estimation, which works on the model's final arrays plus the probabilities and suffix
/// links of two neighbouring orders. The vocabulary and the final arrays (about 16 bytes per
/// n-gram below the highest order, 8 at it) must fit in memory: once the counts are merged and
/// the number of entries is known, and before those arrays exist, a model that would not fit is
/// an [`Error::InvalidArgument`] naming the budget and the size needed. Outside the budget:
/// the sorter's read buffers of each run while merging, and the writing of the file.
///
/// The model is the same, byte for byte, whatever the budget.
///
/// # Examples
/// ```
/// # fn main() -> baler::Result<()> {
/// use baler::lm::{build, BuildOptions};
/// let text: String = (0..300)
///     .map(|i| format!("berth {} opens at {} and closes at {}\n", i % 40, i % 24, i * 7 % 24))
///     .collect();
/// let roomy = build(text.as_bytes(), "berths.txt", &BuildOptions::default())?;
/// let tight = BuildOptions { memory: 64 << 10, ..BuildOptions::default() };
/// let spilled = build(text.as_bytes(), "berths.txt", &tight)?;
/// assert!(roomy.flushes == 0 && spilled.flushes > 10);
/// assert_eq!(roomy.to_bytes(), spilled.to_bytes());
/// // Far too small a budget is an error that names it.
/// let tiny = BuildOptions { memory: 1 << 10, ..BuildOptions::default() };
/// let err = build(text.as_bytes(), "berths.txt", &tiny).unwrap_err();
/// assert!(err.to_string().contains("budget"));
/// # Ok(()) }
/// ```
pub fn build(input: impl BufRead, name: &str, options: &BuildOptions) -> Result<Estimated> {
    let order = options.order;
    if order == 0 || order > MAX_ORDER {
        return Err(Error::invalid(
            "--order",
            format!("must be between 1 and {MAX_ORDER}, got {order}"),
        ));
    }
    estimate::build(input, name, options)
}

impl Estimated {
    /// Entries per order.
    pub fn entries(&self) -> Vec<usize> {
        self.orders.iter().map(|o| o.probs.len()).collect()
    }

    /// The model file's bytes.
    pub fn to_bytes(&self) -> Vec<u8> {
        layout::encode(&self.vocab, &self.orders)
    }

    /// Writes the model file (temporary file renamed into place), streaming it rather than
    /// building a copy in memory.
    pub fn write(&self, path: &Path) -> Result<()> {
        let mut out = Output::create(path)?;
        layout::write(&mut out, &self.vocab, &self.orders)
            .map_err(|e| Error::io(path, "writing", e))?;
        out.commit()
    }
}

/// An open model: a validated memory map of a `.balm` file.
#[derive(Clone)]
pub struct LanguageModel {
    storage: Arc<Storage>,
    layout: LmLayout,
    ids: Arc<FxHashMap<String, u32>>,
    path: PathBuf,
}

/// The score of one sentence.
#[derive(Clone, Debug, PartialEq)]
pub struct SentenceScore {
    /// log10 probability of the words and the sentence end given the sentence start.
    pub log10_prob: f64,
    /// Words not in the vocabulary (scored as `<unk>`).
    pub oov: usize,
    /// Predicted tokens: words plus the sentence end.
    pub predicted: usize,
}

impl LanguageModel {
    /// Maps and validates a model file.
    pub fn open(path: &Path) -> Result<LanguageModel> {
        let storage = mmap::map_file(path)?;
        let layout = LmLayout::parse(storage.bytes(), path)?;
        let bytes = storage.bytes();
        let mut ids = FxHashMap::default();
        for id in 0..layout.vocab_len() as u32 {
            ids.insert(layout.word(bytes, id).to_string(), id);
        }
        if layout.vocab_len() < 3 || (0..3).any(|i| layout.word(bytes, i as u32) != RESERVED[i]) {
            return Err(Error::corrupt(path, "the reserved words are missing"));
        }
        Ok(LanguageModel {
            storage: Arc::new(storage),
            layout,
            ids: Arc::new(ids),
            path: path.to_path_buf(),
        })
    }

    /// The file the model was opened from.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// The model's order.
    pub fn order(&self) -> usize {
        self.layout.order()
    }

    /// Vocabulary size, reserved words included.
    pub fn vocab_len(&self) -> usize {
        self.layout.vocab_len()
    }

    /// Entries of order `n` (1-based).
    pub fn entries(&self, n: usize) -> usize {
        self.layout.entries(n)
    }

    /// The id of `word` ([`UNK`] when unknown).
    pub fn id(&self, word: &str) -> u32 {
        self.ids.get(word).copied().unwrap_or(UNK)
    }

    /// The spelling of word `id`.
    pub fn word(&self, id: u32) -> &str {
        self.layout.word(self.storage.bytes(), id)
    }

    /// log10 p(word | context), where `context` holds the preceding word ids, oldest first
    /// (only the last `order − 1` are used). Back-off form: the longest stored n-gram's
    /// probability plus the back-off weights of the longer contexts that are stored.
    pub fn log10_prob(&self, context: &[u32], word: u32) -> f32 {
        let bytes = self.storage.bytes();
        let l = &self.layout;
        let keep = context.len().min(l.order() - 1);
        let ctx = &context[context.len() - keep..];
        let mut backoff = 0.0f32;
        for k in (1..=keep).rev() {
            // Walk the trie along the last k context words.
            let h = &ctx[keep - k..];
            let mut node = h[0] as usize;
            if node >= l.vocab_len() {
                continue;
            }
            let mut found = true;
            for (depth, &w) in h.iter().enumerate().skip(1) {
                match l.child(bytes, depth, node, w) {
                    Some(c) => node = c,
                    None => {
                        found = false;
                        break;
                    }
                }
            }
            if !found {
                continue;
            }
            if let Some(c) = l.child(bytes, k, node, word) {
                return backoff + l.prob(bytes, k + 1, c);
            }
            backoff += l.backoff(bytes, k, node);
        }
        backoff + l.prob(bytes, 1, word as usize)
    }

    /// Scores a sentence of words (sentence start and end added).
    pub fn score_sentence(&self, words: &[&str]) -> SentenceScore {
        let mut context = vec![BOS];
        let (mut total, mut oov) = (0.0f64, 0);
        for w in words.iter().map(|w| self.id(w)).chain(std::iter::once(EOS)) {
            if w == UNK {
                oov += 1;
            }
            total += f64::from(self.log10_prob(&context, w));
            context.push(w);
        }
        SentenceScore {
            log10_prob: total,
            oov,
            predicted: words.len() + 1,
        }
    }

    /// Writes the model in the ARPA back-off text format.
    pub fn write_arpa(&self, out: &mut dyn Write) -> std::io::Result<()> {
        let bytes = self.storage.bytes();
        let l = &self.layout;
        writeln!(out, "\n\\data\\")?;
        for n in 1..=l.order() {
            writeln!(out, "ngram {n}={}", l.entries(n))?;
        }
        // Depth-first over the trie keeps each order's entries with their history.
        let mut history: Vec<u32> = Vec::new();
        for n in 1..=l.order() {
            writeln!(out, "\n\\{n}-grams:")?;
            self.arpa_level(out, bytes, 1, n, &mut history)?;
        }
        writeln!(out, "\n\\end\\")
    }

    fn arpa_level(
        &self,
        out: &mut dyn Write,
        bytes: &[u8],
        depth: usize,
        target: usize,
        history: &mut Vec<u32>,
    ) -> std::io::Result<()> {
        let l = &self.layout;
        // Entries at `depth` under the current history.
        let range = if depth == 1 {
            0..l.vocab_len()
        } else {
            let parent = self.node(bytes, history).expect("history is in the trie");
            l.children(bytes, depth - 1, parent)
        };
        for i in range {
            let w = l.entry_word(bytes, depth, i);
            if depth == target {
                write!(out, "{}\t", l.prob(bytes, depth, i))?;
                for &h in history.iter() {
                    write!(out, "{} ", l.word(bytes, h))?;
                }
                write!(out, "{}", l.word(bytes, w))?;
                if depth < l.order() {
                    write!(out, "\t{}", l.backoff(bytes, depth, i))?;
                }
                writeln!(out)?;
            } else {
                history.push(w);
                self.arpa_level(out, bytes, depth + 1, target, history)?;
                history.pop();
            }
        }
        Ok(())
    }

    fn node(&self, bytes: &[u8], words: &[u32]) -> Option<usize> {
        let mut node = *words.first()? as usize;
        for (depth, &w) in words.iter().enumerate().skip(1) {
            node = self.layout.child(bytes, depth, node, w)?;
        }
        Some(node)
    }
}

/// Writes the ARPA form of the model at `model` to `path`.
pub fn export_arpa(model: &LanguageModel, path: &Path) -> Result<()> {
    let mut out = Output::create(path)?;
    model
        .write_arpa(&mut out)
        .map_err(|e| Error::io(path, "writing", e))?;
    out.commit()
}
