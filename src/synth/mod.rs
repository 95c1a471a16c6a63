//! Synthetic phrase tables of realistic shape, for benchmarks at 10^6–10^8 pairs.
//!
//! The generator streams a table in the interchange format (see [`crate::table`]), sorted by
//! source then target in byte order, in memory that depends on the vocabulary sizes and not on
//! the number of pairs (about 30 MiB with the default vocabularies, at 10^5 or 10^7 pairs), and
//! byte-identical for identical [`SynthOptions`] on a given platform (choices go through the
//! platform's `exp`, `ln` and `pow`, which may differ in the last bit elsewhere). Its shape
//! follows what extraction from real parallel text produces:
//!
//! * **Vocabularies.** Two invented languages of syllable-built pseudo-words (the target side
//!   with a few non-ASCII letters), Zipfian word frequencies (`p(r) ∝ (r+1)^-s`), frequent
//!   words shorter than rare ones, punctuation among the most frequent tokens.
//! * **Sources.** Phrases of 1 to `max_length` tokens (7 by default), short ones more frequent,
//!   generated as a prefix tree walked depth first in byte order: the pair budget is split over
//!   first words by their frequency, and each phrase keeps some of its budget as its own options
//!   and hands the rest to continuations. Options per source are long-tailed: most sources have
//!   one or two, a frequent word hundreds.
//! * **Targets.** Built from the source by a word-level lexicon (each source word has a few
//!   likely translations of similar frequency rank), with dropped words, words translated into
//!   two, inserted function words and adjacent swaps, increasingly so for a source's later
//!   (rarer) options. Related sources share targets, so target deduplication matters. The
//!   word alignment of every pair follows from the same construction.
//! * **Scores and counts.** Phrase counts from the word frequencies, joint counts Zipf-split
//!   over a source's options and capped by the target's count, so `p_t_given_s = count /
//!   count_source` sums to at most 1 per source and `p_s_given_t = count / count_target` is at
//!   most 1. Lexical weights are products over the alignment of word translation probabilities
//!   (fixed per word pair), with a NULL probability for unaligned words. Sentence-level counts
//!   use the occupancy expectation `df = N (1 - (1 - 1/N)^count)` for `count` occurrences
//!   scattered over `N` sentence pairs, so `cooc ≤ min(df_source, df_target) ≤ N` and
//!   `df ≤ count`.
//!
//! ```
//! use baler::synth::{Generator, SynthOptions};
//! let options = SynthOptions { pairs: 2000, counts: true, alignment: true, source_words: 2000,
//!                              target_words: 3000, ..SynthOptions::default() };
//! let pairs: Vec<_> = Generator::new(&options)?.collect();
//! assert_eq!(pairs.len(), 2000);
//! assert!(pairs.windows(2).all(|w| (&w[0].source, &w[0].target) < (&w[1].source, &w[1].target)));
//! let header = Generator::new(&options)?.header();
//! assert_eq!(header.schema.header_line(), "source\ttarget\talignment\tp_t_given_s\tp_s_given_t\t\
//!     lex_t_given_s\tlex_s_given_t\tcount\tcount_source\tcount_target\tcooc\tdf_source\tdf_target");
//! # Ok::<(), baler::Error>(())
//! ```

mod shape;
mod vocab;

pub use shape::ShapeStats;
pub use vocab::{zipf_probabilities, AliasTable, MIN_WORDS};

use std::collections::HashSet;
use std::hash::{BuildHasherDefault, Hasher};
use std::io::Write;
use std::path::Path;
use std::sync::mpsc;

use rand_xoshiro::rand_core::{RngCore, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;

use crate::error::{Error, Result};
use crate::files::Output;
use crate::table::{CountColumn, Header, PhrasePair, TsvWriter};
use vocab::{mix, unit, Side, Vocabulary, PUNCTUATION};

/// The score columns every synthetic table has, in order.
pub const SCORE_NAMES: [&str; 4] = [
    "p_t_given_s",
    "p_s_given_t",
    "lex_t_given_s",
    "lex_s_given_t",
];

/// The longest phrases the generator makes.
pub const MAX_LENGTH: usize = 10;

/// What to generate.
#[derive(Clone, Debug, PartialEq)]
pub struct SynthOptions {
    /// Number of phrase pairs, exactly.
    pub pairs: u64,
    /// Seed of every random choice; equal options give byte-identical tables.
    pub seed: u64,
    /// Add the count columns and the `# sentence_pairs=N` metadata line.
    pub counts: bool,
    /// Add the `alignment` column.
    pub alignment: bool,
    /// Size of the source vocabulary (at least [`MIN_WORDS`]).
    pub source_words: u32,
    /// Size of the target vocabulary (at least [`MIN_WORDS`]).
    pub target_words: u32,
    /// Longest phrase in tokens, on either side (1 to [`MAX_LENGTH`]).
    pub max_length: usize,
    /// Exponent `s` of the Zipf law of both vocabularies (0.5 to 2).
    pub zipf_exponent: f64,
    /// Number of sentence pairs of the imagined corpus; `None` picks one pair of sentences per
    /// 25 phrase pairs (at least 1000), a ratio typical of unpruned extraction.
    pub sentence_pairs: Option<u64>,
}

impl Default for SynthOptions {
    fn default() -> SynthOptions {
        SynthOptions {
            pairs: 1_000_000,
            seed: 1,
            counts: false,
            alignment: false,
            source_words: 100_000,
            target_words: 150_000,
            max_length: 7,
            zipf_exponent: 1.0,
            sentence_pairs: None,
        }
    }
}

impl SynthOptions {
    /// Checks the options; errors name the command-line flag.
    pub fn validate(&self) -> Result<()> {
        for (flag, words) in [
            ("--source-words", self.source_words),
            ("--target-words", self.target_words),
        ] {
            if words < MIN_WORDS {
                return Err(Error::invalid(
                    flag,
                    format!("{words} words is too few; use at least {MIN_WORDS}"),
                ));
            }
        }
        if !(1..=MAX_LENGTH).contains(&self.max_length) {
            return Err(Error::invalid(
                "--max-length",
                format!("{} is not between 1 and {MAX_LENGTH}", self.max_length),
            ));
        }
        if !(0.5..=2.0).contains(&self.zipf_exponent) {
            return Err(Error::invalid(
                "--zipf-exponent",
                format!("{} is not between 0.5 and 2", self.zipf_exponent),
            ));
        }
        if self.sentence_pairs == Some(0) {
            return Err(Error::invalid("--sentence-pairs", "must be at least 1"));
        }
        Ok(())
    }

    /// The number of sentence pairs the counts are drawn for.
    pub fn sentence_pairs(&self) -> u64 {
        self.sentence_pairs
            .unwrap_or_else(|| (self.pairs / 25).max(1000))
    }

    /// The metadata and columns of the table these options generate.
    pub fn header(&self) -> Header {
        let mut header = Header::default();
        if self.counts {
            header
                .metadata
                .set("sentence_pairs", self.sentence_pairs().to_string());
        }
        header.metadata.set(
            "generator",
            format!("baler synth {}", env!("CARGO_PKG_VERSION")),
        );
        header.metadata.set("seed", self.seed.to_string());
        header.schema.scores = SCORE_NAMES.iter().map(|s| s.to_string()).collect();
        header.schema.alignment = self.alignment;
        if self.counts {
            header.schema.counts = CountColumn::ALL.to_vec();
        }
        header
    }
}

/// Writes the table of `options` to `path` (compressed by a `.gz` or `.zst` ending, `-` for
/// standard output) through [`Output`], calling `each` on every pair written. Returns the number
/// of pairs.
///
/// # Examples
/// ```
/// use baler::synth::{write_to, SynthOptions};
/// let dir = tempfile::tempdir().unwrap();
/// let path = dir.path().join("synthetic.tsv.zst");
/// let options = SynthOptions { pairs: 500, source_words: 1000, target_words: 1000,
///                              ..SynthOptions::default() };
/// let mut sources = baler::synth::ShapeStats::new();
/// assert_eq!(write_to(&options, &path, |pair| sources.add(pair))?, 500);
/// let input = baler::files::open_input(&path)?;
/// let reader = baler::table::TsvReader::new(input, "synthetic.tsv.zst")?;
/// assert_eq!(reader.count(), 500);
/// assert!(sources.sources() <= 500);
/// # Ok::<(), baler::Error>(())
/// ```
pub fn write_to(
    options: &SynthOptions,
    path: &Path,
    mut each: impl FnMut(&PhrasePair),
) -> Result<u64> {
    let mut generator = Generator::new(options)?;
    let header = generator.header();
    let mut output = Output::create(path)?;
    let err = |e| Error::io(path, "writing", e);
    let mut writer = TsvWriter::new(&mut output, &header).map_err(err)?;
    // Generation and formatting take similar time: the generator fills batches on a second
    // thread while this one writes. Output is the same as from one thread, batch by batch.
    let (full_sender, full) = mpsc::sync_channel::<Vec<PhrasePair>>(BATCHES);
    let (empty_sender, empty) = mpsc::channel::<Vec<PhrasePair>>();
    for _ in 0..BATCHES + 1 {
        empty_sender.send(Vec::new()).expect("receiver alive");
    }
    let written = std::thread::scope(|scope| -> Result<u64> {
        scope.spawn(move || {
            while let Ok(mut batch) = empty.recv() {
                let mut n = 0;
                while n < BATCH {
                    if n == batch.len() {
                        batch.push(PhrasePair::default());
                    }
                    if !generator.next_into(&mut batch[n]) {
                        break;
                    }
                    n += 1;
                }
                batch.truncate(n);
                let last = n < BATCH;
                if (n > 0 && full_sender.send(batch).is_err()) || last {
                    return;
                }
            }
        });
        // Owned here so that an early return drops both ends and frees the generator thread.
        let (full, recycle) = (full, empty_sender);
        let mut written = 0;
        for batch in full {
            for pair in &batch {
                writer.write_pair(pair).map_err(err)?;
                each(pair);
            }
            written += batch.len() as u64;
            let _ = recycle.send(batch);
        }
        Ok(written)
    })?;
    drop(writer);
    output.commit()?;
    Ok(written)
}

/// Pairs per batch handed from the generator thread to the writer.
const BATCH: usize = 4096;
/// Batches in flight.
const BATCHES: usize = 2;

/// Streams the pairs of a synthetic table in sorted order.
///
/// Memory holds the two vocabularies, one source's options, and one frame per phrase length of
/// the prefix-tree walk; it does not grow with the number of pairs.
///
/// # Examples
/// ```
/// use baler::synth::{Generator, SynthOptions};
/// let options = SynthOptions { pairs: 100, seed: 7, source_words: 1000, target_words: 1000,
///                              ..SynthOptions::default() };
/// let mut generator = Generator::new(&options)?;
/// let mut pair = baler::table::PhrasePair::default();
/// let mut n = 0;
/// while generator.next_into(&mut pair) {
///     assert!(pair.scores.iter().all(|&p| p > 0.0 && p <= 1.0));
///     n += 1;
/// }
/// assert_eq!(n, 100);
/// # Ok::<(), baler::Error>(())
/// ```
pub struct Generator {
    options: SynthOptions,
    source: Vocabulary,
    target: Vocabulary,
    /// Over the most frequent target ranks: words inserted without a link.
    function_words: AliasTable,
    rng: Xoshiro256PlusPlus,
    salt: u64,
    /// `keep[d]`: share of a length-`d` phrase's budget that stays with the phrase.
    keep: Vec<f64>,
    stack: Vec<Frame>,
    prefix: Vec<u32>,
    debt: u64,
    emitted: u64,
    sentences: u64,
    corpus_tokens: f64,
    // The options of the current source.
    source_text: String,
    count_source: u64,
    df_source: u64,
    choices: Vec<Choice>,
    next_choice: usize,
    target_ids: Vec<u32>,
    link_store: Vec<(u16, u16)>,
    items: Vec<Item>,
    seen: HashSet<u64, BuildHasherDefault<IdentityHasher>>,
    scratch_words: Vec<u32>,
    /// Whether the source vocabulary holds every word's first translation.
    translations_ready: bool,
    /// First translation of each prefix word.
    prefix_core: Vec<u32>,
    /// `(i + 1)^-1.1` for option `i`: how a source's count is split over its options.
    option_weights: Vec<f64>,
    /// Continuation words of the current prefix (its children in the walk).
    neighbours: Vec<u32>,
}

struct Frame {
    children: Vec<(u32, u64)>,
    next: usize,
}

#[derive(Clone, Copy)]
struct Item {
    word: u32,
    /// Source token the word is linked to, or [`UNLINKED`].
    link: u16,
    /// Translation option the word came from, or [`FUNCTION`] for an added function word.
    option: u8,
}

const UNLINKED: u16 = u16::MAX;
const FUNCTION: u8 = u8::MAX;
/// Function words are drawn from this many most frequent target words.
const FUNCTION_RANKS: usize = 150;

struct Choice {
    tokens: (u32, u32),
    links: (u32, u32),
    lex_t_given_s: f64,
    lex_s_given_t: f64,
    count: u64,
    count_target: u64,
}

/// Share of pairs by source length 1, 2, …: shorter phrases are more frequent.
const LENGTH_SHARE: [f64; MAX_LENGTH] = [0.26, 0.22, 0.17, 0.13, 0.1, 0.07, 0.05, 0.04, 0.03, 0.02];
/// A phrase with at most this budget may end its branch, keeping the whole budget.
const SMALL_BUDGET: u64 = 8;
/// Chance that a prefix is a phrase with options of its own.
const PHRASE_PROBABILITY: f64 = 0.8;
/// Budget above which a phrase keeps only a square-root share as its own options.
const KEEP_LINEAR_UP_TO: f64 = 24.0;
const KEEP_EXPONENT: f64 = 0.5;
/// Continuations of a phrase with `b` budget left: about `b^CONTINUATION_EXPONENT`.
const CONTINUATION_EXPONENT: f64 = 0.5;
/// Tokens per sentence of the imagined corpus.
const SENTENCE_TOKENS: f64 = 20.0;
/// How much more likely a word is after a given phrase than on its own, for phrase counts.
const COLLOCATION: f64 = 8.0;

impl Generator {
    /// Builds the vocabularies and the first level of the walk.
    pub fn new(options: &SynthOptions) -> Result<Generator> {
        options.validate()?;
        let seed = options.seed;
        let source = Vocabulary::new(
            Side::Source,
            options.source_words as usize,
            options.zipf_exponent,
            mix(seed ^ 0x5eed_0001),
        );
        let target = Vocabulary::new(
            Side::Target,
            options.target_words as usize,
            options.zipf_exponent,
            mix(seed ^ 0x5eed_0002),
        );
        let function_weights: Vec<f64> = (0..FUNCTION_RANKS)
            .map(|r| {
                if PUNCTUATION.iter().any(|&(p, _)| p == r) {
                    0.0
                } else {
                    ((r + 1) as f64).powf(-options.zipf_exponent)
                }
            })
            .collect();
        let share = &LENGTH_SHARE[..options.max_length];
        let keep = (0..options.max_length)
            .map(|d| share[d] / share[d..].iter().sum::<f64>())
            .collect();
        let sentences = options.sentence_pairs();
        let mut generator = Generator {
            options: options.clone(),
            source,
            target,
            function_words: AliasTable::new(&function_weights),
            rng: Xoshiro256PlusPlus::seed_from_u64(mix(seed ^ 0x5eed_0003)),
            salt: mix(seed ^ 0x5eed_0004),
            keep,
            stack: Vec::new(),
            prefix: Vec::new(),
            debt: 0,
            emitted: 0,
            sentences,
            corpus_tokens: sentences as f64 * SENTENCE_TOKENS,
            source_text: String::new(),
            count_source: 0,
            df_source: 0,
            choices: Vec::new(),
            next_choice: 0,
            target_ids: Vec::new(),
            link_store: Vec::new(),
            items: Vec::new(),
            seen: HashSet::default(),
            scratch_words: Vec::new(),
            prefix_core: Vec::new(),
            translations_ready: false,
            option_weights: Vec::new(),
            neighbours: Vec::new(),
        };
        for s in 0..options.source_words {
            let t = generator.compute_translation(s, 0);
            generator.source.set_translation(s, t);
        }
        generator.translations_ready = true;
        generator.stack.push(generator.first_words());
        Ok(generator)
    }

    /// The metadata and columns of the table (see [`SynthOptions::header`]).
    pub fn header(&self) -> Header {
        self.options.header()
    }

    /// The number of pairs produced so far.
    pub fn emitted(&self) -> u64 {
        self.emitted
    }

    /// Fills `pair` with the next phrase pair, reusing its buffers; false at the end.
    pub fn next_into(&mut self, pair: &mut PhrasePair) -> bool {
        while self.next_choice == self.choices.len() {
            if self.emitted == self.options.pairs || !self.next_source() {
                return false;
            }
        }
        let choice = &self.choices[self.next_choice];
        self.next_choice += 1;
        self.emitted += 1;
        pair.source.clear();
        pair.source.push_str(&self.source_text);
        pair.target.clear();
        let (a, b) = choice.tokens;
        self.target
            .render(&self.target_ids[a as usize..b as usize], &mut pair.target);
        pair.alignment.clear();
        if self.options.alignment {
            let (a, b) = choice.links;
            pair.alignment
                .extend_from_slice(&self.link_store[a as usize..b as usize]);
        }
        pair.scores.clear();
        pair.scores.extend_from_slice(&[
            choice.count as f64 / self.count_source as f64,
            choice.count as f64 / choice.count_target as f64,
            choice.lex_t_given_s,
            choice.lex_s_given_t,
        ]);
        pair.counts.clear();
        if self.options.counts {
            let n = self.sentences;
            let df_target = occupancy(choice.count_target, n);
            let chance = (self.df_source as f64 * df_target as f64 / n as f64).round() as u64;
            let cooc = (occupancy(choice.count, n) + chance)
                .min(self.df_source.min(df_target))
                .max(1);
            pair.counts.extend_from_slice(&[
                choice.count,
                self.count_source,
                choice.count_target,
                cooc,
                self.df_source,
                df_target,
            ]);
        }
        true
    }

    /// The first level of the walk: the whole budget split over first words by frequency.
    fn first_words(&self) -> Frame {
        let n = self.source.len() as u32;
        let total = self.options.pairs as f64;
        let weight = |id: u32| self.source.probability(id).powf(0.9);
        let sum: f64 = (0..n).map(weight).sum();
        let mut children = Vec::new();
        let (mut acc, mut given) = (0.0, 0u64);
        for id in 0..n {
            acc += weight(id);
            let upto = if id + 1 == n {
                self.options.pairs
            } else {
                ((acc / sum) * total).round() as u64
            };
            if upto > given {
                children.push((id, upto - given));
                given = upto;
            }
        }
        Frame { children, next: 0 }
    }

    /// Walks to the next source phrase that has options and generates them; false at the end.
    fn next_source(&mut self) -> bool {
        loop {
            let Some(frame) = self.stack.last_mut() else {
                return false;
            };
            if frame.next == frame.children.len() {
                self.stack.pop();
                self.pop_word();
                continue;
            }
            let (word, budget) = frame.children[frame.next];
            frame.next += 1;
            self.push_word(word);
            let budget = budget + std::mem::take(&mut self.debt);
            let depth = self.prefix.len();
            let wanted = if depth == self.options.max_length
                || (budget <= SMALL_BUDGET && unit(self.rng.next_u64()) < self.keep[depth - 1])
            {
                budget // a leaf: the phrase takes its whole budget as options
            } else if unit(self.rng.next_u64()) >= PHRASE_PROBABILITY {
                0 // a prefix that is no phrase of its own: its budget goes to continuations
            } else {
                let share = self.keep[depth - 1] / PHRASE_PROBABILITY
                    * (0.25 + 1.5 * unit(self.rng.next_u64()));
                let keep = share.min(1.0) * budget as f64;
                let mean = if keep <= KEEP_LINEAR_UP_TO {
                    keep
                } else {
                    KEEP_LINEAR_UP_TO * (keep / KEEP_LINEAR_UP_TO).powf(KEEP_EXPONENT)
                };
                self.round_randomly(mean).clamp(1, budget)
            };
            let wanted = wanted.min(self.options.pairs - self.emitted);
            let rest = budget - wanted;
            let mut children = if depth < self.options.max_length && rest > 0 {
                self.continuations(rest)
            } else {
                Vec::new()
            };
            self.neighbours.clear();
            self.neighbours
                .extend(children.iter().map(|&(word, _)| word));
            let made = self.make_options(wanted);
            let short = wanted - made;
            if let Some(last) = children.last_mut() {
                last.1 += short;
                self.stack.push(Frame { children, next: 0 });
            } else {
                self.debt += rest + short;
                self.pop_word();
            }
            if made > 0 {
                return true;
            }
        }
    }

    fn push_word(&mut self, word: u32) {
        self.prefix.push(word);
        self.prefix_core.push(self.translation(word, 0));
    }

    fn pop_word(&mut self) {
        self.prefix.pop();
        self.prefix_core.pop();
    }

    /// Splits `budget` over continuation words of the current prefix, sorted by id.
    fn continuations(&mut self, budget: u64) -> Vec<(u32, u64)> {
        let limit = (self.source.len() / 4) as u64;
        let mean = (budget as f64).powf(CONTINUATION_EXPONENT);
        let wanted = self.round_randomly(mean).clamp(1, budget.min(limit)) as usize;
        let words = &mut self.scratch_words;
        words.clear();
        for _round in 0..4 {
            while words.len() < wanted {
                let word = self.source.sample(&mut self.rng);
                if Some(&word) != self.prefix.last() {
                    words.push(word); // no word continues with itself ("the the")
                }
            }
            words.sort_unstable();
            words.dedup();
            if words.len() == wanted {
                break;
            }
        }
        let m = words.len() as u64;
        let weights: Vec<f64> = words
            .iter()
            .map(|&w| {
                let noise = -unit(self.rng.next_u64()).max(1e-12).ln();
                self.source.probability(w).powf(0.8) * noise
            })
            .collect();
        let sum: f64 = weights.iter().sum();
        let spare = (budget - m) as f64;
        let (mut acc, mut given) = (0.0, 0u64);
        let mut children = Vec::with_capacity(words.len());
        for (k, (&w, &weight)) in words.iter().zip(&weights).enumerate() {
            acc += weight;
            let upto = if k + 1 == words.len() {
                budget - m
            } else {
                ((acc / sum) * spare).round() as u64
            };
            let upto = upto.max(given);
            children.push((w, 1 + upto - given));
            given = upto;
        }
        children
    }

    fn round_randomly(&mut self, x: f64) -> u64 {
        let floor = x.floor();
        floor as u64 + u64::from(unit(self.rng.next_u64()) < x - floor)
    }

    /// Generates up to `wanted` distinct targets for the current prefix, with their counts and
    /// scores, sorted by target; returns how many.
    fn make_options(&mut self, wanted: u64) -> u64 {
        self.choices.clear();
        self.next_choice = 0;
        self.target_ids.clear();
        self.link_store.clear();
        self.seen.clear();
        if wanted == 0 {
            return 0;
        }
        let wanted = wanted as usize;
        let mut attempts = 0usize;
        let max_attempts = 64 + 40 * wanted;
        while self.choices.len() < wanted && attempts < max_attempts {
            let variation = 0.5 * (1.0 + attempts as f64).ln();
            attempts += 1;
            if !self.candidate(variation, attempts - 1) {
                continue;
            }
            let mut h = self.salt;
            for item in &self.items {
                h = mix(h ^ u64::from(item.word));
            }
            if !self.seen.insert(h) {
                continue;
            }
            self.push_choice();
        }
        self.finish_source();
        self.choices.len() as u64
    }

    /// Builds one target for the prefix into `items`; false if it is unusable.
    ///
    /// After the first attempt, some targets are the plain translation of a sub-span (the
    /// prefix or suffix that remains after dropping edge words) or of the phrase with the
    /// translation of a neighbouring word added, as extraction yields next to a phrase's own
    /// translation; these coincide with targets of neighbouring sources.
    fn candidate(&mut self, variation: f64, attempt: usize) -> bool {
        let n = self.prefix.len();
        let u = unit(self.rng.next_u64());
        if attempt == 0 && u < 0.75 {
            self.plain(0, n);
            return true;
        }
        if attempt > 0 {
            if u < 0.45 && n > 1 {
                let mut dropped = 1;
                while dropped + 1 < n && unit(self.rng.next_u64()) < 0.3 {
                    dropped += 1;
                }
                let (from, to) = if self.rng.next_u64() & 1 == 0 {
                    (dropped, n)
                } else {
                    (0, n - dropped)
                };
                self.plain(from, to);
                return true;
            }
            if u < 0.9 {
                self.plain(0, n);
                // Mostly a word that continues this phrase in the table, so that the target
                // is also the plain translation of that longer source.
                let x = self.rng.next_u64();
                let (neighbour, before) = if !self.neighbours.is_empty() && x & 3 != 0 {
                    let k = ((x >> 32) * self.neighbours.len() as u64) >> 32;
                    (self.neighbours[k as usize], false)
                } else {
                    (self.source.sample(&mut self.rng), x & 4 == 0)
                };
                let item = Item {
                    word: self.translation(neighbour, 0),
                    link: UNLINKED,
                    option: FUNCTION,
                };
                if before {
                    self.items.insert(0, item);
                } else {
                    self.items.push(item);
                }
                return self.items.len() <= self.options.max_length;
            }
        }
        self.varied(variation)
    }

    /// The first translation of each source token in `from..to`, in order.
    fn plain(&mut self, from: usize, to: usize) {
        self.items.clear();
        for i in from..to {
            let word = self.prefix_core[i];
            self.items.push(Item {
                word,
                link: i as u16,
                option: 0,
            });
        }
    }

    /// A target with dropped, split, added and swapped words, more of them as `variation`
    /// grows.
    fn varied(&mut self, variation: f64) -> bool {
        self.items.clear();
        let n = self.prefix.len();
        let split = (0.06 + 0.05 * variation).min(0.5);
        let spread = 0.1 + 0.25 * variation;
        for i in 0..n {
            let s = self.prefix[i];
            // Frequent (function) words go unaligned more often than content words.
            let drop = if n == 1 {
                0.0
            } else if self.source.rank(s) < FUNCTION_RANKS {
                (0.25 + 0.06 * variation).min(0.6)
            } else {
                (0.03 + 0.1 * variation).min(0.6)
            };
            if unit(self.rng.next_u64()) < drop {
                continue;
            }
            let drawn = (-unit(self.rng.next_u64()).max(1e-12).ln() * spread).min(15.0) as u8;
            let (word, option) = if drawn == 0 {
                (self.prefix_core[i], 0)
            } else {
                let word = self.translation(s, drawn);
                (word, self.option_of(s, word, drawn))
            };
            let item = Item {
                word,
                link: i as u16,
                option,
            };
            let x = self.rng.next_u64();
            if unit(x) < split {
                let extra = Item {
                    word: self.function_word(),
                    link: i as u16,
                    option: FUNCTION,
                };
                if x & 1 == 0 {
                    self.items.extend([extra, item]);
                } else {
                    self.items.extend([item, extra]);
                }
            } else {
                self.items.push(item);
            }
        }
        // Unlinked function words, Poisson-distributed in number.
        let lambda = 0.05 + 0.3 * variation;
        let threshold = (-lambda).exp();
        let mut product = unit(self.rng.next_u64());
        while product > threshold && self.items.len() < self.options.max_length + 1 {
            let at = (unit(self.rng.next_u64()) * (self.items.len() + 1) as f64) as usize;
            let word = self.function_word();
            self.items.insert(
                at,
                Item {
                    word,
                    link: UNLINKED,
                    option: FUNCTION,
                },
            );
            product *= unit(self.rng.next_u64());
        }
        let len = self.items.len();
        if len >= 2 && unit(self.rng.next_u64()) < 0.12 + 0.05 * variation {
            let at = (unit(self.rng.next_u64()) * (len - 1) as f64) as usize;
            self.items.swap(at, at + 1);
        }
        (1..=self.options.max_length).contains(&len)
            && self.items.iter().any(|item| item.link != UNLINKED)
    }

    fn function_word(&mut self) -> u32 {
        self.target
            .id(self.function_words.sample(&mut self.rng) as usize)
    }

    /// The `option`-th likely translation of source word `s`: a target word of similar
    /// frequency rank, fixed per (word, option).
    fn translation(&self, s: u32, option: u8) -> u32 {
        if option == 0 && self.translations_ready {
            return self.source.translation(s);
        }
        self.compute_translation(s, option)
    }

    fn compute_translation(&self, s: u32, option: u8) -> u32 {
        let rank = self.source.rank(s);
        if option == 0 && PUNCTUATION.iter().any(|&(p, _)| p == rank) {
            return self.target.id(rank);
        }
        let h = mix(self.salt ^ (u64::from(s) << 8) ^ u64::from(option));
        let normal = (unit(h) + unit(mix(h)) + unit(mix(h ^ 1)) - 1.5) * 2.0;
        let sigma = if option == 0 {
            0.45
        } else {
            1.1 + 0.1 * f64::from(option)
        };
        let scale = self.target.len() as f64 / self.source.len() as f64;
        let n = self.target.len();
        let mut r =
            (((rank + 1) as f64 * scale * (sigma * normal).exp()) as usize).saturating_sub(1);
        if r >= n {
            r = n - 1 - (r - n) % (n / 2); // reflect back into the rare half
        }
        while PUNCTUATION.iter().any(|&(p, _)| p == r) {
            r = (r + 1) % n;
        }
        self.target.id(r)
    }

    /// The lowest option index under which `t` translates `s` (`t` being option `upto`), so
    /// that word probabilities depend on the word pair alone.
    fn option_of(&self, s: u32, t: u32, upto: u8) -> u8 {
        (0..upto)
            .find(|&o| self.translation(s, o) == t)
            .unwrap_or(upto)
    }

    /// Word translation probability `w(t | s)` (`forward`) or `w(s | t)`, fixed per word pair;
    /// `option` is [`Generator::option_of`] the pair, or [`FUNCTION`].
    fn word_probability(&self, s: u32, t: u32, option: u8, forward: bool) -> f64 {
        let salt = if forward { 0x1e7 } else { 0x2e7 };
        let jitter = unit(mix(self.salt ^ salt ^ (u64::from(s) << 32) ^ u64::from(t)));
        if option == FUNCTION {
            0.002 + 0.05 * jitter
        } else {
            let base = if forward { 0.7 } else { 0.6 };
            base * 0.6f64.powi(i32::from(option)) * (0.5 + 0.5 * jitter)
        }
    }

    /// Probability of a word aligned to nothing, higher for frequent words.
    fn null_probability(rank: usize) -> f64 {
        0.01 + 0.3 / (1.0 + rank as f64 / 5.0)
    }

    /// Records `items` as a new choice with its alignment and lexical weights.
    fn push_choice(&mut self) {
        let tokens_start = self.target_ids.len() as u32;
        let links_start = self.link_store.len() as u32;
        let mut lex_t_given_s = 1.0;
        for (j, item) in self.items.iter().enumerate() {
            self.target_ids.push(item.word);
            if item.link == UNLINKED {
                lex_t_given_s *= Self::null_probability(self.target.rank(item.word));
            } else {
                let s = self.prefix[item.link as usize];
                lex_t_given_s *= self.word_probability(s, item.word, item.option, true);
                self.link_store.push((item.link, j as u16));
            }
        }
        let links = &mut self.link_store[links_start as usize..];
        links.sort_unstable();
        let mut lex_s_given_t = 1.0;
        for (i, &s) in self.prefix.iter().enumerate() {
            let (mut sum, mut n) = (0.0, 0);
            for item in self.items.iter().filter(|item| item.link as usize == i) {
                sum += self.word_probability(s, item.word, item.option, false);
                n += 1;
            }
            lex_s_given_t *= if n == 0 {
                Self::null_probability(self.source.rank(s))
            } else {
                sum / f64::from(n)
            };
        }
        let count_target = self.phrase_count(&self.target_ids[tokens_start as usize..], false);
        self.choices.push(Choice {
            tokens: (tokens_start, self.target_ids.len() as u32),
            links: (links_start, self.link_store.len() as u32),
            lex_t_given_s,
            lex_s_given_t,
            count: 0,
            count_target,
        });
    }

    /// Expected occurrences of a phrase in the imagined corpus, at least 1.
    fn phrase_count(&self, ids: &[u32], source: bool) -> u64 {
        let vocab = if source { &self.source } else { &self.target };
        let mut p = vocab.probability(ids[0]);
        for &id in &ids[1..] {
            p *= (COLLOCATION * vocab.probability(id)).min(1.0);
        }
        ((self.corpus_tokens * p).round() as u64).max(1)
    }

    /// Joint and source counts of the current source's choices, then target order.
    fn finish_source(&mut self) {
        if self.choices.is_empty() {
            return;
        }
        self.source_text.clear();
        self.source.render(&self.prefix, &mut self.source_text);
        let modelled = self.phrase_count(&self.prefix, true);
        let k = self.choices.len() as u64;
        let mass = k.max((modelled as f64 * 0.9) as u64);
        while self.option_weights.len() < self.choices.len() {
            let i = self.option_weights.len();
            self.option_weights.push(((i + 1) as f64).powf(-1.1));
        }
        let weights = &self.option_weights[..self.choices.len()];
        let weight = |i: usize| weights[i];
        let sum: f64 = weights.iter().sum();
        let spare = (mass - k) as f64;
        let mut total = 0;
        for (i, choice) in self.choices.iter_mut().enumerate() {
            let count = 1 + (spare * weight(i) / sum) as u64;
            choice.count = count.min(choice.count_target);
            total += choice.count;
        }
        self.count_source = modelled.max(total);
        self.df_source = occupancy(self.count_source, self.sentences);
        let ids = &self.target_ids;
        self.choices.sort_unstable_by(|a, b| {
            ids[a.tokens.0 as usize..a.tokens.1 as usize]
                .cmp(&ids[b.tokens.0 as usize..b.tokens.1 as usize])
        });
    }
}

impl Iterator for Generator {
    type Item = PhrasePair;

    fn next(&mut self) -> Option<PhrasePair> {
        let mut pair = PhrasePair::default();
        self.next_into(&mut pair).then_some(pair)
    }
}

/// Expected number of sentences, among `sentences`, holding at least one of `occurrences`
/// scattered uniformly at random: `N (1 - (1 - 1/N)^c)`, rounded, between 1 and `min(c, N)`.
///
/// # Examples
/// ```
/// use baler::synth::occupancy;
/// assert_eq!(occupancy(1, 1000), 1);
/// assert_eq!(occupancy(1000, 1000), 632); // 1000 (1 - 0.999^1000) = 632.3
/// assert_eq!(occupancy(10_000_000, 50), 50);
/// ```
pub fn occupancy(occurrences: u64, sentences: u64) -> u64 {
    if sentences <= 1 || occurrences == 0 {
        return occurrences.min(sentences).max(1);
    }
    let n = sentences as f64;
    let expected = -(occurrences as f64 * (-1.0 / n).ln_1p()).exp_m1() * n;
    (expected.round() as u64).clamp(1, occurrences.min(sentences))
}

/// Passes a pre-mixed 64-bit hash through unchanged.
#[derive(Default)]
struct IdentityHasher(u64);

impl Hasher for IdentityHasher {
    fn finish(&self) -> u64 {
        self.0
    }
    fn write(&mut self, bytes: &[u8]) {
        for &b in bytes {
            self.0 = (self.0 << 8) | u64::from(b);
        }
    }
    fn write_u64(&mut self, x: u64) {
        self.0 = x;
    }
}

/// Writes every pair of `generator` as TSV to `out` (header included).
///
/// # Examples
/// ```
/// use baler::synth::{write_tsv, Generator, SynthOptions};
/// let options = SynthOptions { pairs: 3, source_words: 1000, target_words: 1000,
///                              ..SynthOptions::default() };
/// let text = String::from_utf8(write_tsv(Generator::new(&options)?, Vec::new())?).unwrap();
/// assert_eq!(text.lines().filter(|l| !l.starts_with('#')).count(), 4);
/// # Ok::<(), baler::Error>(())
/// ```
pub fn write_tsv<W: Write>(mut generator: Generator, out: W) -> Result<W> {
    let err = |e| Error::io("-", "writing", e);
    let mut writer = TsvWriter::new(out, &generator.header()).map_err(err)?;
    let mut pair = PhrasePair::default();
    while generator.next_into(&mut pair) {
        writer.write_pair(&pair).map_err(err)?;
    }
    Ok(writer.into_inner())
}
