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
use crate::files::{self, Output};
use crate::format::lm::{self as layout, LmLayout, OrderArrays};
use crate::mmap::{self, Storage};

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
    /// Memory budget in bytes for the counts; exceeding it is an error naming the budget.
    pub memory: u64,
}

impl Default for BuildOptions {
    fn default() -> Self {
        BuildOptions {
            order: 4,
            memory: 1 << 30,
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
}

fn pack(gram: &[u32]) -> u128 {
    gram.iter()
        .fold(0u128, |k, &w| (k << ID_BITS) | u128::from(w))
}

fn unpack(key: u128, n: usize, out: &mut [u32]) {
    for (i, slot) in out.iter_mut().enumerate().take(n) {
        *slot = ((key >> (ID_BITS as usize * (n - 1 - i))) & ((1 << ID_BITS) - 1)) as u32;
    }
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

/// Trains a model on tokenized text, one sentence per line.
pub fn build(input: impl BufRead, name: &str, options: &BuildOptions) -> Result<Estimated> {
    let order = options.order;
    if order == 0 || order > MAX_ORDER {
        return Err(Error::invalid(
            "--order",
            format!("must be between 1 and {MAX_ORDER}, got {order}"),
        ));
    }
    let mut ids: FxHashMap<String, u32> = FxHashMap::default();
    let mut vocab: Vec<String> = RESERVED.iter().map(|s| s.to_string()).collect();
    for (i, w) in RESERVED.iter().enumerate() {
        ids.insert(w.to_string(), i as u32);
    }
    // raw[n-1]: counts of every n-gram of the padded sentences.
    let mut raw: Vec<FxHashMap<u128, u32>> = vec![FxHashMap::default(); order];
    let (mut sentences, mut tokens) = (0u64, 0u64);
    let mut sentence: Vec<u32> = Vec::new();
    let mut input = input;
    let mut line = String::new();
    let mut used: u64 = 0;
    while files::read_line(&mut input, &mut line, name, sentences + 1)? {
        sentences += 1;
        sentence.clear();
        sentence.push(BOS);
        for t in crate::evaluate::tokens(&line) {
            if RESERVED.contains(&t) {
                return Err(Error::input(
                    name,
                    sentences,
                    format!("the token {t:?} is reserved for the model's own use"),
                ));
            }
            let id = match ids.get(t) {
                Some(&id) => id,
                None => {
                    if vocab.len() >= MAX_WORDS {
                        return Err(Error::input(
                            name,
                            sentences,
                            format!("more than {MAX_WORDS} distinct words"),
                        ));
                    }
                    let id = vocab.len() as u32;
                    ids.insert(t.to_string(), id);
                    vocab.push(t.to_string());
                    used += t.len() as u64 + 48;
                    id
                }
            };
            sentence.push(id);
            tokens += 1;
        }
        sentence.push(EOS);
        for n in 1..=order {
            for g in sentence.windows(n) {
                let slot = raw[n - 1].entry(pack(g)).or_insert_with(|| {
                    used += 40;
                    0
                });
                *slot += 1;
            }
        }
        if used > options.memory {
            return Err(Error::invalid(
                "--memory",
                format!(
                    "the n-gram counts of {name} outgrow the budget of {} bytes at line \
                     {sentences}; raise it or lower --order",
                    options.memory
                ),
            ));
        }
    }
    estimate(vocab, raw, sentences, tokens)
}

/// Adjusted counts (continuation counts below the highest order, raw counts for the highest
/// order and for n-grams that start with `<s>`), then interpolated probabilities.
fn estimate(
    vocab: Vec<String>,
    raw: Vec<FxHashMap<u128, u32>>,
    sentences: u64,
    tokens: u64,
) -> Result<Estimated> {
    let order = raw.len();
    let mut adjusted: Vec<FxHashMap<u128, u32>> = vec![FxHashMap::default(); order];
    let mut buf = [0u32; MAX_ORDER];
    adjusted[order - 1] = raw[order - 1].clone();
    for n in (1..order).rev() {
        // Each distinct (n+1)-gram v·g adds one left extension to its suffix g.
        let mut adj: FxHashMap<u128, u32> = FxHashMap::default();
        for &key in raw[n].keys() {
            unpack(key, n + 1, &mut buf);
            *adj.entry(pack(&buf[1..n + 1])).or_default() += 1;
        }
        for (&key, &c) in &raw[n - 1] {
            unpack(key, n, &mut buf);
            if buf[0] == BOS {
                adj.insert(key, c);
            }
        }
        adjusted[n - 1] = adj;
    }
    // The unigram <s> is never predicted.
    adjusted[0].remove(&pack(&[BOS]));

    // Discounts per order from the count-of-counts of the adjusted counts.
    let mut disc = Vec::with_capacity(order);
    for adj in &adjusted {
        let mut n = [0u64; 4];
        for &c in adj.values() {
            if (1..=4).contains(&c) {
                n[c as usize - 1] += 1;
            }
        }
        disc.push(discounts(n));
    }
    let d_of = |n: usize, c: u32| -> f64 {
        match c {
            0 => 0.0,
            1 => disc[n - 1][0],
            2 => disc[n - 1][1],
            _ => disc[n - 1][2],
        }
    };

    // Sorted entries per order and, per context, the totals that make up gamma.
    let v = vocab.len();
    let mut sorted: Vec<Vec<(u128, u32)>> = Vec::with_capacity(order);
    for adj in &adjusted {
        let mut e: Vec<(u128, u32)> = adj.iter().map(|(&k, &c)| (k, c)).collect();
        e.sort_unstable_by_key(|&(k, _)| k);
        sorted.push(e);
    }
    // probs[n-1]: interpolated probability (linear) per key.
    let mut probs: Vec<FxHashMap<u128, f64>> = vec![FxHashMap::default(); order];
    // gamma[n-1]: back-off mass per context key of order n (context of order n+1 entries).
    let mut gammas: Vec<FxHashMap<u128, f64>> = vec![FxHashMap::default(); order];
    // Unigrams, interpolated with the uniform distribution over every word but <s>.
    {
        let total: f64 = sorted[0].iter().map(|&(_, c)| f64::from(c)).sum();
        let mut kinds = [0u64; 3];
        for &(_, c) in &sorted[0] {
            kinds[(c.min(3) - 1) as usize] += 1;
        }
        let mass: f64 = (0..3).map(|k| disc[0][k] * kinds[k] as f64).sum();
        let gamma = if total > 0.0 { mass / total } else { 1.0 };
        let uniform = 1.0 / (v - 1) as f64;
        for id in 0..v as u32 {
            if id == BOS {
                continue;
            }
            let c = adjusted[0].get(&pack(&[id])).copied().unwrap_or(0);
            let p = if total > 0.0 {
                (f64::from(c) - d_of(1, c)).max(0.0) / total + gamma * uniform
            } else {
                uniform
            };
            probs[0].insert(pack(&[id]), p);
        }
    }
    for n in 2..=order {
        // Group entries by context (the first n-1 words), in sorted order.
        let entries = &sorted[n - 1];
        let mut i = 0;
        while i < entries.len() {
            let ctx = entries[i].0 >> ID_BITS;
            let mut j = i;
            let (mut total, mut kinds) = (0.0, [0u64; 3]);
            while j < entries.len() && entries[j].0 >> ID_BITS == ctx {
                total += f64::from(entries[j].1);
                kinds[(entries[j].1.min(3) - 1) as usize] += 1;
                j += 1;
            }
            let mass: f64 = (0..3).map(|k| disc[n - 1][k] * kinds[k] as f64).sum();
            let gamma = mass / total;
            gammas[n - 2].insert(ctx, gamma);
            for &(key, c) in &entries[i..j] {
                unpack(key, n, &mut buf);
                let lower = probs[n - 2]
                    .get(&pack(&buf[1..n]))
                    .copied()
                    .ok_or_else(|| {
                        Error::Unsupported(format!(
                            "internal: the suffix of an order-{n} n-gram is missing"
                        ))
                    })?;
                let p = (f64::from(c) - d_of(n, c)) / total + gamma * lower;
                probs[n - 1].insert(key, p);
            }
            i = j;
        }
    }

    // Lay out the trie: order 1 by word id, higher orders in key order (= parent order, then
    // word), so each parent's children are contiguous.
    let mut orders: Vec<OrderArrays> = Vec::with_capacity(order);
    let mut index_of: Vec<FxHashMap<u128, u32>> = vec![FxHashMap::default(); order];
    for n in 1..=order {
        let mut arr = OrderArrays::default();
        let keys: Vec<u128> = if n == 1 {
            (0..v as u32).map(|id| pack(&[id])).collect()
        } else {
            sorted[n - 1].iter().map(|&(k, _)| k).collect()
        };
        for (i, &key) in keys.iter().enumerate() {
            unpack(key, n, &mut buf);
            arr.words.push(buf[n - 1]);
            let p = probs[n - 1].get(&key).copied();
            arr.probs.push(match p {
                Some(p) => p.log10() as f32,
                None => -99.0, // <s>: never predicted
            });
            if n < order {
                let g = gammas[n - 1].get(&key).copied();
                arr.backoffs.push(g.map_or(0.0, |g| g.log10() as f32));
            }
            index_of[n - 1].insert(key, i as u32);
        }
        orders.push(arr);
    }
    for n in 1..order {
        let parents = orders[n - 1].probs.len();
        let mut children = vec![0u32; parents + 1];
        for &(key, _) in &sorted[n] {
            let parent = index_of[n - 1]
                .get(&(key >> ID_BITS))
                .copied()
                .ok_or_else(|| {
                    Error::Unsupported("internal: an n-gram's context is missing".into())
                })?;
            children[parent as usize + 1] += 1;
        }
        for i in 0..parents {
            children[i + 1] += children[i];
        }
        orders[n - 1].children = children;
    }
    Ok(Estimated {
        vocab,
        orders,
        discounts: disc,
        sentences,
        tokens,
    })
}

impl Estimated {
    /// Entries per order.
    pub fn entries(&self) -> Vec<usize> {
        self.orders.iter().map(|o| o.probs.len()).collect()
    }

    /// Writes the model file (temporary file renamed into place).
    pub fn write(&self, path: &Path) -> Result<()> {
        let bytes = layout::encode(&self.vocab, &self.orders);
        let mut out = Output::create(path)?;
        out.write_all(&bytes)
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
