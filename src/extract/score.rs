//! The reduce step: count runs from any number of shards into a scored, sorted table.
//!
//! The merged runs arrive in key order: first the word-link counts, which become the word
//! translation table in memory, then the phrase-pair counts by source, target and internal
//! alignment. Three streaming passes follow, joined by two external sorts of the re-keyed
//! rows that spill past the memory budget:
//!
//! 1. in source order: sum the counts of each pair's alignments and keep the most frequent one
//!    (ties go to the alignment first in byte order), sum `count_source` over each source, and
//!    re-key by target;
//! 2. in target order: sum `count_target` over each target and re-key by source;
//! 3. in source order again: compute the scores and write the table.
//!
//! # Scores
//! * `p_t_given_s = c(s,t) / c(s)` and `p_s_given_t = c(s,t) / c(t)` (relative frequency),
//!   or their discounted forms (see [`Discount`]).
//! * `lex_t_given_s`, `lex_s_given_t`: the lexical weights of Koehn, Och and Marcu (2003),
//!   computed on the pair's kept alignment. For each target word of the pair, the average of
//!   `w(e|f)` over the source words linked to it, or `w(e|NULL)` when it has no link;
//!   the weight is the product over the target words (and symmetrically for `lex_s_given_t`).
//! * The word translation table comes from the same alignment: every link `f-e` counts once,
//!   every unaligned source word counts once as `f-NULL`, every unaligned target word once as
//!   `NULL-e`. **NULL convention:** unaligned occurrences enter a word's denominator,
//!   `w(e|f) = c(f,e) / (Σ_e' c(f,e') + c(f,NULL))`, and `w(e|NULL) = c(NULL,e) / Σ_e'
//!   c(NULL,e')`, so each word's distribution over target words and NULL sums to 1.

use std::collections::HashMap;
use std::hash::{BuildHasherDefault, Hasher};
use std::io::Write;
use std::path::{Path, PathBuf};

use super::counter::hash_bytes;
use super::index::IndexWriter;
use super::ranges::TargetTotals;
use super::runs::{RunInfo, RunMerger, PHRASE_KIND, WORD_KIND};
use crate::error::{Error, Result};
use crate::format::{take_varint, write_varint as put_varint};
use crate::sort::{ExternalSorter, SortedRecords};
use crate::table::{CountColumn, Header, PhrasePair, TsvWriter};

/// Score columns written by extraction, in order.
pub const SCORE_COLUMNS: [&str; 4] = [
    "p_t_given_s",
    "p_s_given_t",
    "lex_t_given_s",
    "lex_s_given_t",
];

/// Counts at or below this are discounted by [`Discount::GoodTuring`].
pub const GOOD_TURING_MAX_COUNT: u64 = 10;

/// How phrase counts are discounted before the relative frequencies are taken
/// (Foster, Kuhn and Johnson 2006). The marginals `c(s)` and `c(t)` are never discounted, so
/// with a discount the probabilities of a source's extracted options sum to less than 1; the
/// `count` column always holds the raw count.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum Discount {
    /// Plain relative frequencies; `p_t_given_s` sums to 1 over each source's options.
    #[default]
    None,
    /// Good-Turing: a joint count `c ≤` [`GOOD_TURING_MAX_COUNT`] becomes
    /// `c* = (c+1)·n(c+1)/n(c)`, `n(k)` being the number of distinct pairs seen `k` times,
    /// when that is defined and `0 < c* < c`; other counts are kept.
    GoodTuring,
    /// Kneser-Ney style: a fixed `D = n(1) / (n(1) + 2·n(2))` is subtracted from every joint
    /// count, and the freed mass is given out by the lower-order distribution:
    /// `p(t|s) = (c(s,t) − D)/c(s) + D·N(s,•)/c(s) · N(•,t)/N(•,•)`, where `N(s,•)` is the
    /// number of distinct targets of `s`, `N(•,t)` the number of distinct sources of `t`, and
    /// `N(•,•)` the number of distinct pairs (symmetrically for `p(s|t)`).
    KneserNey,
}

impl Discount {
    /// The name used on the command line and in the table's metadata.
    pub fn name(self) -> &'static str {
        match self {
            Discount::None => "none",
            Discount::GoodTuring => "good-turing",
            Discount::KneserNey => "kneser-ney",
        }
    }
}

/// Settings of the reduce step.
#[derive(Clone, Debug)]
pub struct MergeOptions {
    /// Discounting of the phrase counts.
    pub discount: Discount,
    /// Memory budget in bytes for the external sorts.
    pub memory: u64,
    /// Parent directory for temporary files.
    pub temp_dir: Option<PathBuf>,
    /// Where to write the phrase index the sentence-level counting step reads
    /// ([`super::sentences::tally`]); `None` writes none.
    pub index: Option<PathBuf>,
    /// The target-totals runs of every shard ([`super::ranges`]), when the runs merged hold
    /// one source key range only: `count_target` is then taken from these totals instead of
    /// summed over the runs. Empty: the runs hold every source.
    pub target_totals: Vec<PathBuf>,
}

impl Default for MergeOptions {
    fn default() -> Self {
        MergeOptions {
            discount: Discount::None,
            memory: crate::settings::DEFAULT_MEMORY,
            temp_dir: None,
            index: None,
            target_totals: Vec::new(),
        }
    }
}

/// What the reduce step produced.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct MergeSummary {
    /// The combined headers of the runs.
    pub info: RunInfo,
    /// Distinct phrase pairs written.
    pub pairs: u64,
    /// Distinct source phrases.
    pub sources: u64,
    /// Distinct target phrases.
    pub targets: u64,
}

#[derive(Default)]
pub(crate) struct FastHasher(u64);

impl Hasher for FastHasher {
    fn finish(&self) -> u64 {
        self.0
    }
    fn write(&mut self, bytes: &[u8]) {
        self.0 = hash_bytes(bytes) ^ self.0.rotate_left(17);
    }
    fn write_u32(&mut self, n: u32) {
        self.write_u64(u64::from(n));
    }
    fn write_u64(&mut self, n: u64) {
        self.0 = (self.0.rotate_left(5) ^ n).wrapping_mul(0x9e37_79b9_7f4a_7c15);
    }
}

pub(crate) type FastMap<K, V> = HashMap<K, V, BuildHasherDefault<FastHasher>>;

/// The word translation table, from word-link counts.
///
/// # Examples
/// ```
/// use baler::extract::score::WordTable;
/// let mut words = WordTable::default();
/// words.add("muelle", "pier", 3);
/// words.add("muelle", "quay", 1);
/// words.add("el", "", 2); // "el" unaligned twice
/// words.add("el", "the", 2);
/// assert_eq!(words.target_given_source("muelle", "pier"), 0.75);
/// assert_eq!(words.target_given_source("el", "the"), 0.5); // NULL takes half of "el"
/// assert_eq!(words.source_given_target("el", ""), 1.0);    // all of NULL's source mass
/// ```
#[derive(Default, Debug)]
pub struct WordTable {
    source_ids: FastMap<Box<[u8]>, u32>,
    target_ids: FastMap<Box<[u8]>, u32>,
    joint: FastMap<(u32, u32), u64>,
    source_totals: Vec<u64>,
    target_totals: Vec<u64>,
}

impl WordTable {
    /// A table over word ids numbered by the caller (`0` is NULL on both sides): the link
    /// counts, and each side's totals indexed by id.
    pub(crate) fn from_ids(
        joint: FastMap<(u32, u32), u64>,
        source_totals: Vec<u64>,
        target_totals: Vec<u64>,
    ) -> WordTable {
        WordTable {
            source_ids: FastMap::default(),
            target_ids: FastMap::default(),
            joint,
            source_totals,
            target_totals,
        }
    }

    fn id(ids: &mut FastMap<Box<[u8]>, u32>, totals: &mut Vec<u64>, word: &[u8]) -> u32 {
        if word.is_empty() {
            if totals.is_empty() {
                totals.push(0);
            }
            return 0;
        }
        if totals.is_empty() {
            totals.push(0); // id 0 is NULL
        }
        if let Some(&id) = ids.get(word) {
            return id;
        }
        let id = totals.len() as u32;
        ids.insert(word.into(), id);
        totals.push(0);
        id
    }

    /// Adds `n` links between source word `f` and target word `e`; an empty word is NULL.
    pub fn add(&mut self, f: &str, e: &str, n: u64) {
        self.add_bytes(f.as_bytes(), e.as_bytes(), n);
    }

    fn add_bytes(&mut self, f: &[u8], e: &[u8], n: u64) {
        let fi = Self::id(&mut self.source_ids, &mut self.source_totals, f);
        let ei = Self::id(&mut self.target_ids, &mut self.target_totals, e);
        *self.joint.entry((fi, ei)).or_insert(0) += n;
        self.source_totals[fi as usize] += n;
        self.target_totals[ei as usize] += n;
    }

    fn source_id(&self, f: &[u8]) -> Option<u32> {
        if f.is_empty() {
            Some(0)
        } else {
            self.source_ids.get(f).copied()
        }
    }

    fn target_id(&self, e: &[u8]) -> Option<u32> {
        if e.is_empty() {
            Some(0)
        } else {
            self.target_ids.get(e).copied()
        }
    }

    fn joint(&self, f: Option<u32>, e: Option<u32>) -> u64 {
        match (f, e) {
            (Some(f), Some(e)) => self.joint.get(&(f, e)).copied().unwrap_or(0),
            _ => 0,
        }
    }

    fn ratio(n: u64, d: u64) -> f64 {
        if d == 0 {
            0.0
        } else {
            n as f64 / d as f64
        }
    }

    fn t_given_s_ids(&self, f: Option<u32>, e: Option<u32>) -> f64 {
        let total = f.map_or(0, |f| self.source_totals[f as usize]);
        Self::ratio(self.joint(f, e), total)
    }

    fn s_given_t_ids(&self, f: Option<u32>, e: Option<u32>) -> f64 {
        let total = e.map_or(0, |e| self.target_totals[e as usize]);
        Self::ratio(self.joint(f, e), total)
    }

    /// `w(e|f)`; an empty `f` is NULL.
    pub fn target_given_source(&self, f: &str, e: &str) -> f64 {
        self.t_given_s_ids(self.source_id(f.as_bytes()), self.target_id(e.as_bytes()))
    }

    /// `w(f|e)`; an empty `e` is NULL.
    pub fn source_given_target(&self, f: &str, e: &str) -> f64 {
        self.s_given_t_ids(self.source_id(f.as_bytes()), self.target_id(e.as_bytes()))
    }

    /// The lexical weights `(lex(t|s), lex(s|t))` of a phrase pair with the given internal
    /// links `(source index, target index)`.
    ///
    /// # Examples
    /// ```
    /// use baler::extract::score::WordTable;
    /// let mut w = WordTable::default();
    /// w.add("grúa", "crane", 1);
    /// w.add("la", "the", 1);
    /// w.add("", "big", 1);
    /// let (t_given_s, s_given_t) = w.lexical_weights(&["la", "grúa"], &["the", "big", "crane"],
    ///                                                &[(0, 0), (1, 2)]);
    /// assert_eq!((t_given_s, s_given_t), (1.0, 1.0));
    /// ```
    pub fn lexical_weights(
        &self,
        source: &[&str],
        target: &[&str],
        links: &[(u16, u16)],
    ) -> (f64, f64) {
        let f: Vec<Option<u32>> = source
            .iter()
            .map(|w| self.source_id(w.as_bytes()))
            .collect();
        let e: Vec<Option<u32>> = target
            .iter()
            .map(|w| self.target_id(w.as_bytes()))
            .collect();
        self.lexical_weights_ids(&f, &e, links)
    }

    pub(crate) fn lexical_weights_ids(
        &self,
        f: &[Option<u32>],
        e: &[Option<u32>],
        links: &[(u16, u16)],
    ) -> (f64, f64) {
        /// Phrases up to this long keep their sums on the stack.
        const SHORT: usize = 16;
        if f.len() > SHORT || e.len() > SHORT {
            return self.lexical_weights_long(f, e, links);
        }
        // One pass over the links: each link's joint count is looked up once and serves both
        // directions. Each word's sum takes its links in link order, as the definition's
        // per-word sums do, so the results are the same to the bit.
        let (mut e_sum, mut e_n) = ([0.0f64; SHORT], [0u32; SHORT]);
        let (mut f_sum, mut f_n) = ([0.0f64; SHORT], [0u32; SHORT]);
        for &(i, j) in links {
            let (i, j) = (usize::from(i), usize::from(j));
            let (fi, ej) = (f[i], e[j]);
            let joint = self.joint(fi, ej);
            e_sum[j] += Self::ratio(joint, fi.map_or(0, |f| self.source_totals[f as usize]));
            e_n[j] += 1;
            f_sum[i] += Self::ratio(joint, ej.map_or(0, |e| self.target_totals[e as usize]));
            f_n[i] += 1;
        }
        let mut t_given_s = 1.0;
        for (j, &ej) in e.iter().enumerate() {
            t_given_s *= if e_n[j] == 0 {
                self.t_given_s_ids(Some(0), ej)
            } else {
                e_sum[j] / f64::from(e_n[j])
            };
        }
        let mut s_given_t = 1.0;
        for (i, &fi) in f.iter().enumerate() {
            s_given_t *= if f_n[i] == 0 {
                self.s_given_t_ids(fi, Some(0))
            } else {
                f_sum[i] / f64::from(f_n[i])
            };
        }
        (t_given_s, s_given_t)
    }

    /// [`WordTable::lexical_weights_ids`] straight from the definition, for phrases of any
    /// length.
    fn lexical_weights_long(
        &self,
        f: &[Option<u32>],
        e: &[Option<u32>],
        links: &[(u16, u16)],
    ) -> (f64, f64) {
        let mut t_given_s = 1.0;
        for (j, &ej) in e.iter().enumerate() {
            let (mut sum, mut n) = (0.0, 0u32);
            for &(i, jj) in links {
                if usize::from(jj) == j {
                    sum += self.t_given_s_ids(f[usize::from(i)], ej);
                    n += 1;
                }
            }
            t_given_s *= if n == 0 {
                self.t_given_s_ids(Some(0), ej)
            } else {
                sum / f64::from(n)
            };
        }
        let mut s_given_t = 1.0;
        for (i, &fi) in f.iter().enumerate() {
            let (mut sum, mut n) = (0.0, 0u32);
            for &(ii, j) in links {
                if usize::from(ii) == i {
                    sum += self.s_given_t_ids(fi, e[usize::from(j)]);
                    n += 1;
                }
            }
            s_given_t *= if n == 0 {
                self.s_given_t_ids(fi, Some(0))
            } else {
                sum / f64::from(n)
            };
        }
        (t_given_s, s_given_t)
    }
}

/// Splits `bytes` at its first 0x00 (the separator inside run keys and re-keyed records).
pub(crate) fn split_zero(bytes: &[u8]) -> (&[u8], &[u8]) {
    match bytes.iter().position(|&b| b == 0) {
        Some(k) => (&bytes[..k], &bytes[k + 1..]),
        None => (bytes, &[]),
    }
}

/// The error of a record of this run's own sorts (or of the batches between its threads) that
/// does not read back as written: what reaches them from a count run was checked on the way in.
pub(crate) fn damaged(what: &str) -> Error {
    Error::DamagedTemporary {
        what: "sort run",
        reason: what.to_string(),
    }
}

/// The number of words of a phrase of a merged run, checking that it is UTF-8 (the row writer
/// relies on it).
fn phrase_words(phrase: &[u8]) -> std::result::Result<usize, String> {
    std::str::from_utf8(phrase).map_err(|_| "a phrase is not UTF-8".to_string())?;
    Ok(phrase.iter().filter(|&&b| b == b' ').count() + 1)
}

/// Reads the internal alignment `text` of a pair of `source_words` and `target_words` words
/// into `links` (through the one link parser, [`crate::table::split_links`]).
fn read_links(
    text: &[u8],
    source_words: usize,
    target_words: usize,
    links: &mut Vec<(u16, u16)>,
) -> std::result::Result<(), String> {
    links.clear();
    let text = std::str::from_utf8(text).map_err(|_| "an alignment is not UTF-8".to_string())?;
    for link in crate::table::split_links(text) {
        let (i, j) = link.map_err(|link| format!("malformed alignment link {link:?}"))?;
        if i >= source_words || j >= target_words {
            return Err(format!(
                "alignment link {i}-{j} outside a pair of {source_words} and {target_words} words"
            ));
        }
        links.push((i as u16, j as u16));
    }
    Ok(())
}

/// One group's entries (a source's targets in pass 1, a target's sources in pass 2), buffered
/// until the group's total is known.
#[derive(Default)]
struct Group {
    bytes: Vec<u8>,
    entries: Vec<GroupEntry>,
}

/// Where an entry of a [`Group`] sits in its bytes: the phrase, then `rest` (the kept
/// alignment in pass 1, the record's value in pass 2).
struct GroupEntry {
    start: usize,
    phrase_len: usize,
    rest_len: usize,
    count: u64,
}

impl Group {
    fn clear(&mut self) {
        self.bytes.clear();
        self.entries.clear();
    }
    fn push(&mut self, phrase: &[u8], rest: &[u8], count: u64) {
        self.entries.push(GroupEntry {
            start: self.bytes.len(),
            phrase_len: phrase.len(),
            rest_len: rest.len(),
            count,
        });
        self.bytes.extend_from_slice(phrase);
        self.bytes.extend_from_slice(rest);
    }
    fn total(&self) -> u64 {
        self.entries.iter().map(|e| e.count).sum()
    }
    fn distinct(&self) -> u64 {
        self.entries.len() as u64
    }
    fn iter(&self) -> impl Iterator<Item = (&[u8], &[u8], u64)> {
        self.entries.iter().map(|e| {
            let phrase_end = e.start + e.phrase_len;
            (
                &self.bytes[e.start..phrase_end],
                &self.bytes[phrase_end..phrase_end + e.rest_len],
                e.count,
            )
        })
    }
}

/// One phrase pair summed over its internal alignments (adjacent in the merged runs): the
/// count, and the most frequent alignment (the first in byte order on ties).
#[derive(Default)]
struct PairSum {
    target: Vec<u8>,
    alignment: Vec<u8>,
    best: u64,
    count: u64,
}

impl PairSum {
    fn start(&mut self, target: &[u8], alignment: &[u8], count: u64) {
        self.target.clear();
        self.target.extend_from_slice(target);
        self.alignment.clear();
        self.alignment.extend_from_slice(alignment);
        self.best = count;
        self.count = count;
    }
    fn add(&mut self, alignment: &[u8], count: u64) {
        if count > self.best {
            self.alignment.clear();
            self.alignment.extend_from_slice(alignment);
            self.best = count;
        }
        self.count += count;
    }
}

/// The value of a pair re-keyed `target 0 source` by pass 1.
struct SourceCounts<'a> {
    count: u64,
    source_total: u64,
    source_distinct: u64,
    alignment: &'a [u8],
}

impl<'a> SourceCounts<'a> {
    fn encode(&self, out: &mut Vec<u8>) {
        out.clear();
        for v in [self.count, self.source_total, self.source_distinct] {
            put_varint(out, v);
        }
        out.extend_from_slice(self.alignment);
    }
    fn decode(mut bytes: &'a [u8]) -> Result<SourceCounts<'a>> {
        let mut next = || take_varint(&mut bytes).ok_or_else(|| damaged("value"));
        let (count, source_total, source_distinct) = (next()?, next()?, next()?);
        Ok(SourceCounts {
            count,
            source_total,
            source_distinct,
            alignment: bytes,
        })
    }
}

/// The value of a pair re-keyed `source 0 target` by pass 2: every count its scores need, the
/// target's rank (for the phrase index) and the kept alignment.
struct PairCounts<'a> {
    count: u64,
    source_total: u64,
    target_total: u64,
    source_distinct: u64,
    target_distinct: u64,
    target_rank: u64,
    alignment: &'a [u8],
}

impl<'a> PairCounts<'a> {
    fn encode(&self, out: &mut Vec<u8>) {
        out.clear();
        for v in [
            self.count,
            self.source_total,
            self.target_total,
            self.source_distinct,
            self.target_distinct,
            self.target_rank,
        ] {
            put_varint(out, v);
        }
        out.extend_from_slice(self.alignment);
    }
    fn decode(mut bytes: &'a [u8]) -> Result<PairCounts<'a>> {
        let mut next = || take_varint(&mut bytes).ok_or_else(|| damaged("value"));
        let (count, source_total, target_total) = (next()?, next()?, next()?);
        let (source_distinct, target_distinct, target_rank) = (next()?, next()?, next()?);
        Ok(PairCounts {
            count,
            source_total,
            target_total,
            source_distinct,
            target_distinct,
            target_rank,
            alignment: bytes,
        })
    }
}

/// Appends `first 0 second` to the cleared `key`.
fn joined_key(key: &mut Vec<u8>, first: &[u8], second: &[u8]) {
    key.clear();
    key.extend_from_slice(first);
    key.push(0);
    key.extend_from_slice(second);
}

/// Merges count runs and writes the scored table (without the sentence-level counts) to `out`
/// as interchange TSV. See the module documentation for the passes and scores.
pub fn merge_and_score<W: Write + Send>(
    runs: &[PathBuf],
    out: W,
    output_name: &Path,
    options: &MergeOptions,
) -> Result<MergeSummary> {
    let (merger, info) = RunMerger::open(runs)?;
    let target_totals = open_target_totals(options, &info)?;
    // Two sorters are alive at once in pass 2, and a sorter's buffers may hold up to twice
    // what it counts (vectors grow by doubling): a quarter of the budget each.
    let budget = (options.memory / 4).max(1 << 20) as usize;
    let sorter = || ExternalSorter::new(budget, options.temp_dir.clone());

    let by_source = sum_sources(merger, sorter()?)?;
    let mut index = match &options.index {
        Some(_) => Some(IndexWriter::new(&options.temp_dir)?),
        None => None,
    };
    let by_target = sum_targets(
        by_source.by_target.finish()?,
        target_totals,
        index.as_mut(),
        sorter()?,
    )?;
    let scorer = Scorer::new(options.discount, &by_source.histogram, by_source.pairs);
    let header = scored_header(&info, options.discount, false);
    let writer = TsvWriter::new(out, &header).map_err(|e| Error::io(output_name, "writing", e))?;
    let table = ScoredRows {
        words: &by_source.words,
        scorer: &scorer,
        output_name,
    };
    table.write(by_target.by_source.finish()?, writer, index.as_mut())?;
    if let (Some(ix), Some(path)) = (index, &options.index) {
        ix.finish(path, info.corpus.sentence_pairs, info.max_sentence_length)?;
    }
    Ok(MergeSummary {
        info,
        pairs: by_source.pairs,
        sources: by_source.sources,
        targets: by_target.targets,
    })
}

/// What pass 1 leaves behind.
struct SourcePass {
    /// The word translation table.
    words: WordTable,
    /// How many distinct pairs were seen `c` times, `c` up to [`GOOD_TURING_MAX_COUNT`] + 1
    /// (the last slot counts every higher `c`).
    histogram: Vec<u64>,
    /// Every pair re-keyed `target 0 source`, valued [`SourceCounts`].
    by_target: ExternalSorter,
    pairs: u64,
    sources: u64,
}

/// Pass 1 (source order): the word table from the word-link records; each phrase pair summed
/// over its alignments, `count_source` and the distinct targets of each source; the pairs
/// re-keyed by target into `by_target`.
fn sum_sources(mut merger: RunMerger, by_target: ExternalSorter) -> Result<SourcePass> {
    let mut pass = SourcePass {
        words: WordTable::default(),
        histogram: vec![0u64; GOOD_TURING_MAX_COUNT as usize + 2],
        by_target,
        pairs: 0,
        sources: 0,
    };
    let mut source: Vec<u8> = Vec::new();
    let mut pair = PairSum::default();
    let mut in_pair = false;
    let mut group = Group::default();
    let mut links = Vec::new();
    let (mut source_words, mut target_words) = (0, 0);
    while let Some(record) = merger.next_merged()? {
        let count = record.count;
        let (&kind, rest) =
            (record.key.split_first()).ok_or_else(|| record.damaged("empty key"))?;
        if kind == WORD_KIND {
            let (f, e) = split_zero(rest);
            pass.words.add_bytes(f, e, count);
            continue;
        }
        if kind != PHRASE_KIND {
            return Err(record.damaged(format!("unknown record kind {kind}")));
        }
        let (s, rest) = split_zero(rest);
        let (t, a) = split_zero(rest);
        if s.is_empty() || t.is_empty() {
            return Err(record.damaged("empty phrase"));
        }
        let same_source = in_pair && s == source.as_slice();
        let same_pair = same_source && t == pair.target.as_slice();
        // What the row writer relies on, checked here where the run is known.
        if !same_source {
            source_words = phrase_words(s).map_err(|reason| record.damaged(reason))?;
        }
        if !same_pair {
            target_words = phrase_words(t).map_err(|reason| record.damaged(reason))?;
        }
        read_links(a, source_words, target_words, &mut links)
            .map_err(|reason| record.damaged(reason))?;
        if same_pair {
            pair.add(a, count);
            continue;
        }
        if in_pair {
            group.push(&pair.target, &pair.alignment, pair.count);
        }
        if !same_source {
            pass.flush_source(&source, &mut group)?;
            source.clear();
            source.extend_from_slice(s);
        }
        pair.start(t, a, count);
        in_pair = true;
    }
    if in_pair {
        group.push(&pair.target, &pair.alignment, pair.count);
    }
    pass.flush_source(&source, &mut group)?;
    Ok(pass)
}

impl SourcePass {
    /// Re-keys the finished `group` of `source`'s pairs by target.
    fn flush_source(&mut self, source: &[u8], group: &mut Group) -> Result<()> {
        if group.entries.is_empty() {
            return Ok(());
        }
        let (source_total, source_distinct) = (group.total(), group.distinct());
        self.sources += 1;
        let (mut key, mut value) = (Vec::new(), Vec::new());
        for (target, alignment, count) in group.iter() {
            self.pairs += 1;
            let top = self.histogram.len() - 1;
            self.histogram[(count as usize).min(top)] += 1;
            joined_key(&mut key, target, source);
            let counts = SourceCounts {
                count,
                source_total,
                source_distinct,
                alignment,
            };
            counts.encode(&mut value);
            self.by_target.push(&key, &value)?;
        }
        group.clear();
        Ok(())
    }
}

/// What pass 2 leaves behind.
struct TargetPass {
    /// Every pair re-keyed `source 0 target`, valued [`PairCounts`].
    by_source: ExternalSorter,
    targets: u64,
}

/// Pass 2 (target order): `count_target` (summed, or from the other ranges' `target_totals`)
/// and the distinct sources of each target; each target numbered in the phrase index; the
/// pairs re-keyed by source into `by_source`.
fn sum_targets(
    mut sorted: SortedRecords,
    mut target_totals: Option<TargetTotals>,
    mut index: Option<&mut IndexWriter>,
    mut by_source: ExternalSorter,
) -> Result<TargetPass> {
    let mut targets = 0u64;
    let (mut key, mut value) = (Vec::new(), Vec::new());
    let mut flush = |target: &[u8], group: &mut Group, by_source: &mut ExternalSorter| {
        if group.entries.is_empty() {
            return Ok(());
        }
        let target_rank = match index.as_mut() {
            Some(ix) => ix.add_target(target)?,
            None => targets,
        };
        targets += 1;
        let target_total = match target_totals.as_mut() {
            Some(totals) => totals.total(target)?,
            None => group.total(),
        };
        let target_distinct = group.distinct();
        for (source, value_bytes, _) in group.iter() {
            let from_source = SourceCounts::decode(value_bytes)?;
            joined_key(&mut key, source, target);
            let counts = PairCounts {
                count: from_source.count,
                source_total: from_source.source_total,
                target_total,
                source_distinct: from_source.source_distinct,
                target_distinct,
                target_rank,
                alignment: from_source.alignment,
            };
            counts.encode(&mut value);
            by_source.push(&key, &value)?;
        }
        group.clear();
        Ok::<(), Error>(())
    };
    let mut target: Vec<u8> = Vec::new();
    let mut group = Group::default(); // phrase = source, rest = the record's value
    while let Some((key, value)) = sorted.next_record()? {
        let (t, s) = split_zero(key);
        if t != target.as_slice() {
            flush(&target, &mut group, &mut by_source)?;
            target.clear();
            target.extend_from_slice(t);
        }
        group.push(s, value, SourceCounts::decode(value)?.count);
    }
    flush(&target, &mut group, &mut by_source)?;
    Ok(TargetPass { by_source, targets })
}

/// Pass 3 (source order): scoring, formatting and compressing the rows run on a second thread
/// ([`write_rows`]), fed batches of raw records in table order; the phrase index takes each
/// row's source and target rank on this one.
struct ScoredRows<'a> {
    words: &'a WordTable,
    scorer: &'a Scorer,
    output_name: &'a Path,
}

/// Bytes of raw records per batch handed to the row writer.
const BATCH_BYTES: usize = 1 << 18;

impl ScoredRows<'_> {
    fn write<W: Write + Send>(
        &self,
        mut sorted: SortedRecords,
        writer: TsvWriter<W>,
        mut index: Option<&mut IndexWriter>,
    ) -> Result<()> {
        let (tx, rx) = std::sync::mpsc::sync_channel::<Vec<u8>>(4);
        let (words, scorer, output_name) = (self.words, self.scorer, self.output_name);
        std::thread::scope(|scope| -> Result<()> {
            let worker = scope.spawn(move || write_rows(rx, writer, words, scorer, output_name));
            let mut batch = Vec::with_capacity(BATCH_BYTES);
            let mut previous_source: Vec<u8> = Vec::new();
            let mut first = true;
            let fed = (|| -> Result<()> {
                while let Some((k, v)) = sorted.next_record()? {
                    if let Some(ix) = index.as_mut() {
                        let (s, _) = split_zero(k);
                        let new_source = first || s != previous_source.as_slice();
                        if new_source {
                            previous_source.clear();
                            previous_source.extend_from_slice(s);
                            first = false;
                        }
                        ix.add_row(s, new_source, PairCounts::decode(v)?.target_rank)?;
                    }
                    put_varint(&mut batch, k.len() as u64);
                    batch.extend_from_slice(k);
                    put_varint(&mut batch, v.len() as u64);
                    batch.extend_from_slice(v);
                    if batch.len() >= BATCH_BYTES {
                        let full = std::mem::replace(&mut batch, Vec::with_capacity(BATCH_BYTES));
                        if tx.send(full).is_err() {
                            return Ok(()); // the writer failed; its error is reported below
                        }
                    }
                }
                if !batch.is_empty() {
                    let _ = tx.send(batch);
                }
                Ok(())
            })();
            drop(tx);
            let written = worker.join().map_err(|_| Error::WorkerPanicked {
                worker: "row writer",
            })?;
            written?;
            fed
        })
    }
}

/// Opens the target totals of a merge of one source key range, checking that they were summed
/// over the same shards as the runs and that the scores need nothing else from other ranges.
fn open_target_totals(options: &MergeOptions, info: &RunInfo) -> Result<Option<TargetTotals>> {
    if options.target_totals.is_empty() {
        return Ok(None);
    }
    if options.discount != Discount::None {
        return Err(Error::invalid(
            "--target-totals",
            format!(
                "--discount {} needs counts over every source key range (n(c), distinct sources per target); a merge of one range supports --discount none only",
                options.discount.name()
            ),
        ));
    }
    let totals = TargetTotals::open(&options.target_totals)?;
    let mut theirs = totals.shards().to_vec();
    let mut ours = info.shards.clone();
    theirs.sort_unstable();
    ours.sort_unstable();
    if theirs != ours {
        return Err(Error::invalid(
            "--target-totals",
            format!(
                "the target totals cover {} corpus shard(s) and the runs {}, not the same ones: give the runs of one range and the target totals of every shard",
                theirs.len(),
                ours.len()
            ),
        ));
    }
    Ok(Some(totals))
}

/// The header of a scored table: the extraction's settings as metadata, then the alignment,
/// the [`SCORE_COLUMNS`] and the three phrase counts; with `sentence_counts`, also `cooc`,
/// `df_source` and `df_target` (the columns [`super::sentences::attach`] appends).
pub(crate) fn scored_header(info: &RunInfo, discount: Discount, sentence_counts: bool) -> Header {
    let mut header = Header::default();
    let meta = &mut header.metadata;
    meta.set("sentence_pairs", info.corpus.sentence_pairs.to_string());
    meta.set("max_length", info.max_length.to_string());
    meta.set("max_sentence_length", info.max_sentence_length.to_string());
    meta.set("unaligned_edges", info.unaligned_edges.to_string());
    meta.set("discount", discount.name());
    header.schema.alignment = true;
    header.schema.scores = SCORE_COLUMNS.iter().map(|s| s.to_string()).collect();
    header.schema.counts = if sentence_counts {
        CountColumn::ALL.to_vec()
    } else {
        CountColumn::ALL[..3].to_vec()
    };
    header
}

/// Scores and writes the rows arriving in `rx`.
fn write_rows<W: Write>(
    rx: std::sync::mpsc::Receiver<Vec<u8>>,
    mut writer: TsvWriter<W>,
    words: &WordTable,
    scorer: &Scorer,
    output_name: &Path,
) -> Result<()> {
    let werr = |e| Error::io(output_name, "writing", e);
    let mut row = PhrasePair {
        scores: vec![0.0; 4],
        counts: vec![0; 3],
        ..Default::default()
    };
    let mut source_ids: Vec<Option<u32>> = Vec::new();
    let mut target_ids: Vec<Option<u32>> = Vec::new();
    for batch in rx {
        let mut records = batch.as_slice();
        while !records.is_empty() {
            let mut field = || -> Result<&[u8]> {
                let len = take_varint(&mut records).ok_or_else(|| damaged("batch"))? as usize;
                let (f, rest) = records.split_at(len);
                records = rest;
                Ok(f)
            };
            let (k, v) = (field()?, field()?);
            let (s, t) = split_zero(k);
            if row.source.as_bytes() != s || source_ids.is_empty() {
                row.source.clear();
                row.source
                    .push_str(std::str::from_utf8(s).map_err(|_| damaged("not UTF-8"))?);
                source_ids.clear();
                source_ids.extend(row.source.split(' ').map(|w| words.source_id(w.as_bytes())));
            }
            row.target.clear();
            row.target
                .push_str(std::str::from_utf8(t).map_err(|_| damaged("not UTF-8"))?);
            target_ids.clear();
            target_ids.extend(row.target.split(' ').map(|w| words.target_id(w.as_bytes())));
            let counts = PairCounts::decode(v)?;
            read_links(
                counts.alignment,
                source_ids.len(),
                target_ids.len(),
                &mut row.alignment,
            )
            .map_err(|reason| damaged(&reason))?;
            let (p_t_given_s, p_s_given_t) = scorer.probabilities(
                counts.count,
                counts.source_total,
                counts.target_total,
                counts.source_distinct,
                counts.target_distinct,
            );
            let (lex_t, lex_s) =
                words.lexical_weights_ids(&source_ids, &target_ids, &row.alignment);
            row.scores
                .copy_from_slice(&[p_t_given_s, p_s_given_t, lex_t, lex_s]);
            row.counts
                .copy_from_slice(&[counts.count, counts.source_total, counts.target_total]);
            writer.write_pair(&row).map_err(werr)?;
        }
    }
    writer.get_mut().flush().map_err(werr)?;
    Ok(())
}

/// Turns counts into the two conditional probabilities under a [`Discount`].
pub(crate) struct Scorer {
    discount: Discount,
    good_turing: Vec<f64>,
    kneser_ney: f64,
    distinct_pairs: f64,
}

impl Scorer {
    pub(crate) fn new(discount: Discount, histogram: &[u64], distinct_pairs: u64) -> Scorer {
        let n = |c: usize| histogram.get(c).copied().unwrap_or(0) as f64;
        let mut good_turing = vec![0.0; GOOD_TURING_MAX_COUNT as usize + 1];
        for (c, slot) in good_turing.iter_mut().enumerate().skip(1) {
            let cf = c as f64;
            let star = if n(c) > 0.0 && n(c + 1) > 0.0 {
                (cf + 1.0) * n(c + 1) / n(c)
            } else {
                cf
            };
            *slot = if star > 0.0 && star < cf { star } else { cf };
        }
        let kneser_ney = if n(1) + 2.0 * n(2) > 0.0 {
            n(1) / (n(1) + 2.0 * n(2))
        } else {
            0.0
        };
        Scorer {
            discount,
            good_turing,
            kneser_ney,
            distinct_pairs: distinct_pairs as f64,
        }
    }

    pub(crate) fn probabilities(
        &self,
        count: u64,
        cs: u64,
        ct: u64,
        ns: u64,
        nt: u64,
    ) -> (f64, f64) {
        let (c, cs, ct) = (count as f64, cs as f64, ct as f64);
        match self.discount {
            Discount::None => (c / cs, c / ct),
            Discount::GoodTuring => {
                let star = self.good_turing.get(count as usize).copied().unwrap_or(c);
                (star / cs, star / ct)
            }
            Discount::KneserNey => {
                let d = self.kneser_ney;
                let (ns, nt) = (ns as f64, nt as f64);
                let n = self.distinct_pairs;
                (
                    (c - d) / cs + d * ns / cs * (nt / n),
                    (c - d) / ct + d * nt / ct * (ns / n),
                )
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The one-pass lexical weights equal the per-word definition (`lexical_weights_long`) to
    /// the bit, with unaligned words on both sides, words linked many times and unknown words.
    #[test]
    fn one_pass_lexical_weights_equal_the_definition() {
        let mut joint = FastMap::default();
        let mut state = 12345u64;
        let mut next = |m: u64| {
            state = state
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (state >> 33) % m
        };
        for f in 0..6u32 {
            for e in 0..6u32 {
                if next(3) > 0 {
                    joint.insert((f, e), 1 + next(50));
                }
            }
        }
        let totals = |side: usize| -> Vec<u64> {
            (0..6u32)
                .map(|w| {
                    joint
                        .iter()
                        .filter(|(k, _)| if side == 0 { k.0 == w } else { k.1 == w })
                        .map(|(_, &n)| n)
                        .sum::<u64>()
                })
                .collect()
        };
        let (st, tt) = (totals(0), totals(1));
        let table = WordTable::from_ids(joint.clone(), st, tt);
        for _ in 0..500 {
            let word = |next: &mut dyn FnMut(u64) -> u64| match next(7) {
                6 => None,
                w => Some(w as u32),
            };
            let f: Vec<Option<u32>> = (0..1 + next(7)).map(|_| word(&mut next)).collect();
            let e: Vec<Option<u32>> = (0..1 + next(7)).map(|_| word(&mut next)).collect();
            let links: Vec<(u16, u16)> = (0..next(10))
                .map(|_| (next(f.len() as u64) as u16, next(e.len() as u64) as u16))
                .collect();
            let fast = table.lexical_weights_ids(&f, &e, &links);
            let slow = table.lexical_weights_long(&f, &e, &links);
            assert_eq!(fast.0.to_bits(), slow.0.to_bits(), "{f:?} {e:?} {links:?}");
            assert_eq!(fast.1.to_bits(), slow.1.to_bits(), "{f:?} {e:?} {links:?}");
        }
    }

    #[test]
    fn good_turing_discounts_only_where_defined() {
        // n(1)=4, n(2)=2, n(3)=0: c*(1) = 2·2/4 = 1; c*(2) undefined (n(3)=0), kept.
        let mut h = vec![0u64; GOOD_TURING_MAX_COUNT as usize + 2];
        h[1] = 4;
        h[2] = 2;
        let s = Scorer::new(Discount::GoodTuring, &h, 6);
        assert_eq!(s.good_turing[1], 1.0); // 1 is not < 1: kept
        assert_eq!(s.good_turing[2], 2.0);
        h[1] = 10;
        h[2] = 3; // c*(1) = 2·3/10 = 0.6
        let s = Scorer::new(Discount::GoodTuring, &h, 13);
        assert!((s.good_turing[1] - 0.6).abs() < 1e-12);
        assert_eq!(s.probabilities(1, 2, 4, 1, 1), (0.3, 0.15));
    }

    #[test]
    fn kneser_ney_mass_is_redistributed() {
        let mut h = vec![0u64; GOOD_TURING_MAX_COUNT as usize + 2];
        h[1] = 2;
        h[2] = 1; // D = 2 / (2 + 2) = 0.5
        let s = Scorer::new(Discount::KneserNey, &h, 3);
        assert_eq!(s.kneser_ney, 0.5);
        // c=2, c(s)=3 with 2 distinct targets, target seen with 1 source, 3 pairs in all:
        // (2 - 0.5)/3 + 0.5·2/3·(1/3)
        let (p, _) = s.probabilities(2, 3, 2, 2, 1);
        assert!((p - (1.5 / 3.0 + 0.5 * 2.0 / 3.0 / 3.0)).abs() < 1e-12);
    }
}
