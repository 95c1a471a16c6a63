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
use super::resort::Resorter;
use super::runs::{put_varint, take_varint, RunInfo, RunMerger, RunReader, PHRASE_KIND, WORD_KIND};
use super::shard::combined_info;
use crate::error::{Error, Result};
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

/// The error of a count run whose records do not parse.
pub(crate) fn damaged(what: &str) -> Error {
    Error::Unsupported(format!("damaged count run: {what}"))
}

/// One source's pairs, buffered until its total is known.
#[derive(Default)]
struct Group {
    bytes: Vec<u8>,
    // (start in bytes, phrase length, count); the alignment follows the phrase.
    items: Vec<(usize, usize, usize, u64)>,
}

impl Group {
    fn clear(&mut self) {
        self.bytes.clear();
        self.items.clear();
    }
    fn push(&mut self, phrase: &[u8], alignment: &[u8], count: u64) {
        self.items
            .push((self.bytes.len(), phrase.len(), alignment.len(), count));
        self.bytes.extend_from_slice(phrase);
        self.bytes.extend_from_slice(alignment);
    }
    fn iter(&self) -> impl Iterator<Item = (&[u8], &[u8], u64)> {
        self.items.iter().map(|&(start, p, a, c)| {
            (
                &self.bytes[start..start + p],
                &self.bytes[start + p..start + p + a],
                c,
            )
        })
    }
}

/// Merges count runs and writes the scored table (without the sentence-level counts) to `out`
/// as interchange TSV. See the module documentation for the passes and scores.
pub fn merge_and_score<W: Write + Send>(
    runs: &[PathBuf],
    out: W,
    output_name: &Path,
    options: &MergeOptions,
) -> Result<MergeSummary> {
    let readers = runs
        .iter()
        .map(|p| RunReader::open(p))
        .collect::<Result<Vec<_>>>()?;
    let info = combined_info(runs, &readers)?;
    let mut target_totals = open_target_totals(options, &info)?;
    let mut merger = RunMerger::new(readers)?;
    // Two sorters are alive at once in pass 2, and a sorter's buffers may hold up to twice
    // what it counts (vectors grow by doubling): a quarter of the budget each.
    let budget = (options.memory / 4).max(1 << 20) as usize;

    // Word table, then pass 1 (source order).
    let mut words = WordTable::default();
    let mut by_target = Resorter::new(budget, options.temp_dir.clone());
    let mut histogram = vec![0u64; GOOD_TURING_MAX_COUNT as usize + 2];
    let mut source: Vec<u8> = Vec::new();
    let mut pair_target: Vec<u8> = Vec::new();
    let mut best_alignment: Vec<u8> = Vec::new();
    let (mut best_count, mut pair_count) = (0u64, 0u64);
    let mut in_pair = false;
    let mut group = Group::default();
    let (mut pairs, mut sources) = (0u64, 0u64);
    let mut value = Vec::new();
    let mut key = Vec::new();

    let mut flush_source =
        |source: &[u8], group: &mut Group, by_target: &mut Resorter| -> Result<()> {
            if group.items.is_empty() {
                return Ok(());
            }
            let total: u64 = group.items.iter().map(|i| i.3).sum();
            let distinct = group.items.len() as u64;
            sources += 1;
            for (target, alignment, count) in group.iter() {
                pairs += 1;
                let top = histogram.len() - 1;
                histogram[(count as usize).min(top)] += 1;
                key.clear();
                key.extend_from_slice(target);
                key.push(0);
                key.extend_from_slice(source);
                value.clear();
                put_varint(&mut value, count);
                put_varint(&mut value, total);
                put_varint(&mut value, distinct);
                value.extend_from_slice(alignment);
                by_target.push(&key, &value)?;
            }
            group.clear();
            Ok(())
        };

    while let Some((record, count)) = merger.next_record()? {
        let (&kind, rest) = record.split_first().ok_or_else(|| damaged("empty key"))?;
        if kind == WORD_KIND {
            let (f, e) = split_zero(rest);
            words.add_bytes(f, e, count);
            continue;
        }
        if kind != PHRASE_KIND {
            return Err(damaged(&format!("unknown record kind {kind}")));
        }
        let (s, rest) = split_zero(rest);
        let (t, a) = split_zero(rest);
        if s.is_empty() || t.is_empty() {
            return Err(damaged("empty phrase"));
        }
        let same_source = in_pair && s == source.as_slice();
        if !(same_source && t == pair_target.as_slice()) {
            if in_pair {
                group.push(&pair_target, &best_alignment, pair_count);
            }
            if !same_source {
                flush_source(&source, &mut group, &mut by_target)?;
                source.clear();
                source.extend_from_slice(s);
            }
            pair_target.clear();
            pair_target.extend_from_slice(t);
            best_alignment.clear();
            best_alignment.extend_from_slice(a);
            best_count = count;
            pair_count = 0;
            in_pair = true;
        } else if count > best_count {
            best_alignment.clear();
            best_alignment.extend_from_slice(a);
            best_count = count;
        }
        pair_count += count;
    }
    if in_pair {
        group.push(&pair_target, &best_alignment, pair_count);
    }
    flush_source(&source, &mut group, &mut by_target)?;
    drop(merger);

    // Pass 2 (target order): count_target and distinct sources per target.
    let mut by_source = Resorter::new(budget, options.temp_dir.clone());
    let mut sorted = by_target.finish()?;
    let mut target: Vec<u8> = Vec::new();
    let mut targets = 0u64;
    let mut index = match &options.index {
        Some(_) => Some(IndexWriter::new(&options.temp_dir)?),
        None => None,
    };
    let mut tgroup = Group::default(); // phrase = source, "alignment" = the value bytes
    let mut flush_target =
        |target: &[u8], tgroup: &mut Group, by_source: &mut Resorter| -> Result<()> {
            if tgroup.items.is_empty() {
                return Ok(());
            }
            let rank = match index.as_mut() {
                Some(ix) => ix.add_target(target)?,
                None => targets,
            };
            targets += 1;
            let total: u64 = match target_totals.as_mut() {
                Some(totals) => totals.total(target)?,
                None => tgroup.items.iter().map(|i| i.3).sum(),
            };
            let distinct = tgroup.items.len() as u64;
            for (source, old, _) in tgroup.iter() {
                let mut rest = old;
                let count = take_varint(&mut rest).ok_or_else(|| damaged("value"))?;
                let source_total = take_varint(&mut rest).ok_or_else(|| damaged("value"))?;
                let source_distinct = take_varint(&mut rest).ok_or_else(|| damaged("value"))?;
                key.clear();
                key.extend_from_slice(source);
                key.push(0);
                key.extend_from_slice(target);
                value.clear();
                for v in [count, source_total, total, source_distinct, distinct, rank] {
                    put_varint(&mut value, v);
                }
                value.extend_from_slice(rest);
                by_source.push(&key, &value)?;
            }
            tgroup.clear();
            Ok(())
        };
    while let Some(record) = sorted.next_record()? {
        let (t, rest) = split_zero(record);
        let (s, v) = split_zero(rest);
        if t != target.as_slice() {
            flush_target(&target, &mut tgroup, &mut by_source)?;
            target.clear();
            target.extend_from_slice(t);
        }
        let mut peek = v;
        let count = take_varint(&mut peek).ok_or_else(|| damaged("value"))?;
        tgroup.push(s, v, count);
    }
    flush_target(&target, &mut tgroup, &mut by_source)?;
    drop(sorted);

    // Pass 3 (source order): scores.
    let scorer = Scorer::new(options.discount, &histogram, pairs);
    let header = scored_header(&info, options.discount, false);
    let werr = |e| Error::io(output_name, "writing", e);
    let writer = TsvWriter::new(out, &header).map_err(werr)?;
    let mut sorted = by_source.finish()?;
    // Scoring, formatting and compressing the rows run on a second thread, fed batches of raw
    // records in table order.
    let (tx, rx) = std::sync::mpsc::sync_channel::<Vec<u8>>(4);
    let (words, scorer) = (&words, &scorer);
    std::thread::scope(|scope| -> Result<()> {
        let worker = scope.spawn(move || write_rows(rx, writer, words, scorer, output_name));
        let mut batch = Vec::with_capacity(1 << 18);
        let mut previous_source: Vec<u8> = Vec::new();
        let mut first = true;
        let fed = (|| -> Result<()> {
            while let Some(record) = sorted.next_record()? {
                let (s, rest) = split_zero(record);
                let (t, v) = split_zero(rest);
                let k = &record[..s.len() + 1 + t.len()];
                let new_source = first || s != previous_source.as_slice();
                if new_source {
                    previous_source.clear();
                    previous_source.extend_from_slice(s);
                    first = false;
                }
                if let Some(ix) = index.as_mut() {
                    let mut rest = v;
                    for _ in 0..5 {
                        take_varint(&mut rest).ok_or_else(|| damaged("value"))?;
                    }
                    let target_rank = take_varint(&mut rest).ok_or_else(|| damaged("value"))?;
                    ix.add_row(s, new_source, target_rank)?;
                }
                put_varint(&mut batch, k.len() as u64);
                batch.extend_from_slice(k);
                put_varint(&mut batch, v.len() as u64);
                batch.extend_from_slice(v);
                if batch.len() >= 1 << 18 {
                    let full = std::mem::replace(&mut batch, Vec::with_capacity(1 << 18));
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
        let written = worker.join().expect("row writer panicked");
        written?;
        fed
    })?;
    if let (Some(ix), Some(path)) = (index, &options.index) {
        ix.finish(path, info.corpus.sentence_pairs, info.max_sentence_length)?;
    }
    Ok(MergeSummary {
        info,
        pairs,
        sources,
        targets,
    })
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
            let mut rest = v;
            let mut next = || take_varint(&mut rest).ok_or_else(|| damaged("value"));
            let (count, cs, ct, ns, nt) = (next()?, next()?, next()?, next()?, next()?);
            let _target_rank = next()?;
            parse_links(rest, &mut row.alignment)?;
            if row.alignment.iter().any(|&(i, j)| {
                usize::from(i) >= source_ids.len() || usize::from(j) >= target_ids.len()
            }) {
                return Err(damaged("alignment outside its phrase pair"));
            }
            let (p_t_given_s, p_s_given_t) = scorer.probabilities(count, cs, ct, ns, nt);
            let (lex_t, lex_s) =
                words.lexical_weights_ids(&source_ids, &target_ids, &row.alignment);
            row.scores
                .copy_from_slice(&[p_t_given_s, p_s_given_t, lex_t, lex_s]);
            row.counts.copy_from_slice(&[count, cs, ct]);
            writer.write_pair(&row).map_err(werr)?;
        }
    }
    writer.get_mut().flush().map_err(werr)?;
    Ok(())
}

fn parse_links(text: &[u8], links: &mut Vec<(u16, u16)>) -> Result<()> {
    links.clear();
    if text.is_empty() {
        return Ok(());
    }
    let text = std::str::from_utf8(text).map_err(|_| damaged("alignment not UTF-8"))?;
    for link in crate::table::split_links(text) {
        let (i, j) = link.map_err(|_| damaged("malformed alignment"))?;
        let small = |n: usize| u16::try_from(n).map_err(|_| damaged("malformed alignment"));
        links.push((small(i)?, small(j)?));
    }
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
