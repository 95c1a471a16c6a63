//! Source key ranges: the map step's counts split so that each reducer merges one range.
//!
//! For a corpus processed on many machines (see `spark/` in the repository), the map step
//! writes, instead of one count run, one run per **source key range** and a run of **target
//! totals**:
//!
//! * the ranges are given by split keys `k₁ < k₂ < … < k_{R−1}` (one per line of a key file,
//!   compared as bytes with the source phrase): range 0 holds the sources below `k₁`, range
//!   `r` those from `k_r` up to `k_{r+1}`, the last range those from `k_{R−1}` on;
//! * range run `r` holds the phrase-pair counts whose source falls in range `r`, and every
//!   word-link count of the shard (each reducer needs the whole word translation table for the
//!   lexical weights); its header is the shard's full header, so that the runs a reducer
//!   merges add up to the whole corpus's totals;
//! * the target-totals run holds, for every target phrase of the shard, the sum of its
//!   pair counts (`count_target` is a sum over all sources, so no source range can compute it
//!   alone); the totals of all shards are summed while merging.
//!
//! A reducer merges the range-`r` runs of every shard with the target totals of every shard
//! (`baler extract merge --target-totals`) and writes the rows of range `r`; the ranges'
//! tables, concatenated in order without their headers after the first, are the table the
//! one-machine merge writes. Which split keys are chosen changes only how the work is shared.

use std::path::{Path, PathBuf};

use super::runs::{RunInfo, RunMerger, RunWriter, PHRASE_KIND, TARGET_KIND, WORD_KIND};
use super::score::{damaged, split_zero};
use crate::error::{Error, Result};
use crate::files::{self, Partial};
use crate::format::{take_varint, write_varint as put_varint};
use crate::sort::ExternalSorter;

/// The split keys of the source key ranges.
///
/// # Examples
/// ```
/// use baler::extract::ranges::SplitKeys;
/// let keys = SplitKeys::new(vec![b"de".to_vec(), b"la".to_vec()]).unwrap();
/// assert_eq!(keys.ranges(), 3);
/// assert_eq!(keys.range_of(b"code"), 0);
/// assert_eq!(keys.range_of(b"de"), 1);
/// assert_eq!(keys.range_of(b"fichier"), 1);
/// assert_eq!(keys.range_of(b"la"), 2);
/// assert!(SplitKeys::new(vec![b"la".to_vec(), b"de".to_vec()]).is_err());
/// ```
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct SplitKeys {
    keys: Vec<Vec<u8>>,
}

impl SplitKeys {
    /// Split keys from bytes; they must be non-empty and strictly increasing.
    pub fn new(keys: Vec<Vec<u8>>) -> std::result::Result<SplitKeys, String> {
        for (k, key) in keys.iter().enumerate() {
            if key.is_empty() {
                return Err(format!("split key {} is empty", k + 1));
            }
            if k > 0 && keys[k - 1] >= *key {
                return Err(format!(
                    "split keys must be strictly increasing in byte order: {:?} follows {:?}",
                    String::from_utf8_lossy(key),
                    String::from_utf8_lossy(&keys[k - 1])
                ));
            }
        }
        Ok(SplitKeys { keys })
    }

    /// Reads a key file: one split key per line (UTF-8, strictly increasing in byte order, no
    /// empty line). Errors name the file and line.
    pub fn read(path: &Path) -> Result<SplitKeys> {
        let name = path.display().to_string();
        let mut input = files::open_input(path)?;
        let mut keys: Vec<Vec<u8>> = Vec::new();
        let mut line = String::new();
        let mut line_no = 0;
        loop {
            line_no += 1;
            if !files::read_line(&mut *input, &mut line, &name, line_no)? {
                break;
            }
            if line.is_empty() {
                return Err(Error::input(&name, line_no, "empty split key"));
            }
            if line.contains(['\0', '\t']) {
                return Err(Error::input(
                    &name,
                    line_no,
                    "a split key holds no NUL byte or tab",
                ));
            }
            if keys.last().is_some_and(|k| k.as_slice() >= line.as_bytes()) {
                return Err(Error::input(
                    &name,
                    line_no,
                    "split keys must be strictly increasing in byte order",
                ));
            }
            keys.push(line.as_bytes().to_vec());
        }
        Ok(SplitKeys { keys })
    }

    /// Number of ranges (one more than the keys).
    pub fn ranges(&self) -> usize {
        self.keys.len() + 1
    }

    /// The range holding source phrase `source`.
    pub fn range_of(&self, source: &[u8]) -> usize {
        self.keys.partition_point(|k| k.as_slice() <= source)
    }
}

/// The file of range `r` among the outputs written with prefix `prefix`.
pub fn range_path(prefix: &Path, r: usize) -> PathBuf {
    let mut name = prefix.as_os_str().to_owned();
    name.push(format!(".{r:04}.run"));
    PathBuf::from(name)
}

/// The target-totals file among the outputs written with prefix `prefix`.
pub fn totals_path(prefix: &Path) -> PathBuf {
    let mut name = prefix.as_os_str().to_owned();
    name.push(".targets.run");
    PathBuf::from(name)
}

/// Merges `runs` (one shard's) and writes them split by `keys`: range run `r` to
/// [`range_path`]`(prefix, r)` and the target totals to [`totals_path`]`(prefix)`. Every file
/// is written under a temporary name; all are renamed into place once all are complete.
/// `memory` bounds the sort of the pairs by target (it spills to `temp_dir`).
pub fn split_runs(
    runs: &[PathBuf],
    keys: &SplitKeys,
    prefix: &Path,
    memory: u64,
    temp_dir: Option<PathBuf>,
) -> Result<RunInfo> {
    let (mut merger, info) = RunMerger::open(runs)?;
    let mut partials = Vec::with_capacity(keys.ranges() + 1);
    let mut writers = Vec::with_capacity(keys.ranges());
    for r in 0..keys.ranges() {
        let partial = Partial::beside(&range_path(prefix, r))?;
        writers.push(RunWriter::create(partial.path(), &info)?);
        partials.push(partial);
    }
    let totals_partial = Partial::beside(&totals_path(prefix))?;
    let mut by_target = ExternalSorter::new((memory / 2).max(1 << 20) as usize, temp_dir)?;
    // Pairs summed over their alignments (adjacent in key order), re-keyed `target 0 source`.
    let mut pair: Vec<u8> = Vec::new();
    let mut pair_count = 0u64;
    let mut key = Vec::new();
    let mut value = Vec::new();
    let mut flush = |pair: &[u8], count: u64, by_target: &mut ExternalSorter| -> Result<()> {
        if pair.is_empty() {
            return Ok(());
        }
        let (s, t) = split_zero(pair);
        key.clear();
        key.extend_from_slice(t);
        key.push(0);
        key.extend_from_slice(s);
        value.clear();
        put_varint(&mut value, count);
        by_target.push(&key, &value)
    };
    while let Some(merged) = merger.next_merged()? {
        let (record, count) = (merged.key, merged.count);
        let (&kind, rest) = record
            .split_first()
            .ok_or_else(|| merged.damaged("empty key"))?;
        if kind == WORD_KIND {
            for w in &mut writers {
                w.push(record, count)?;
            }
            continue;
        }
        if kind != PHRASE_KIND {
            return Err(merged.damaged(format!("unknown record kind {kind}")));
        }
        let (s, rest_t) = split_zero(rest);
        let (t, _) = split_zero(rest_t);
        if s.is_empty() || t.is_empty() {
            return Err(merged.damaged("empty phrase"));
        }
        writers[keys.range_of(s)].push(record, count)?;
        let this_pair = &rest[..s.len() + 1 + t.len()];
        if this_pair != pair.as_slice() {
            flush(&pair, pair_count, &mut by_target)?;
            pair.clear();
            pair.extend_from_slice(this_pair);
            pair_count = 0;
        }
        pair_count += count;
    }
    flush(&pair, pair_count, &mut by_target)?;
    drop(merger);
    for w in writers {
        w.finish()?;
    }
    let mut totals = RunWriter::create(totals_partial.path(), &info)?;
    let mut sorted = by_target.finish()?;
    let mut target: Vec<u8> = vec![TARGET_KIND];
    let mut total = 0u64;
    while let Some((key, mut v)) = sorted.next_record()? {
        let (t, _) = split_zero(key);
        let count = take_varint(&mut v).ok_or_else(|| damaged("value"))?;
        if &target[1..] != t {
            if target.len() > 1 {
                totals.push(&target, total)?;
            }
            target.truncate(1);
            target.extend_from_slice(t);
            total = 0;
        }
        total += count;
    }
    if target.len() > 1 {
        totals.push(&target, total)?;
    }
    totals.finish()?;
    for p in partials {
        p.persist()?;
    }
    totals_partial.persist()?;
    Ok(info)
}

/// The summed target totals of all shards, read in target order alongside the merge's pass
/// over the targets ([`TargetTotals::total`] must be asked in increasing target order).
pub(crate) struct TargetTotals {
    merger: RunMerger,
    current: Option<(Vec<u8>, u64)>,
    shards: Vec<u64>,
}

impl TargetTotals {
    /// Opens the target-totals runs of every shard.
    pub(crate) fn open(paths: &[PathBuf]) -> Result<TargetTotals> {
        let (merger, info) = RunMerger::open(paths)?;
        let mut totals = TargetTotals {
            merger,
            current: None,
            shards: info.shards,
        };
        totals.advance()?;
        Ok(totals)
    }

    /// The shards the totals were summed over.
    pub(crate) fn shards(&self) -> &[u64] {
        &self.shards
    }

    fn advance(&mut self) -> Result<()> {
        self.current = match self.merger.next_merged()? {
            Some(merged) => match merged.key.split_first() {
                Some((&TARGET_KIND, t)) => Some((t.to_vec(), merged.count)),
                _ => return Err(merged.damaged("not a target total")),
            },
            None => None,
        };
        Ok(())
    }

    /// The total count of target phrase `target` over all sources and shards.
    pub(crate) fn total(&mut self, target: &[u8]) -> Result<u64> {
        loop {
            match &self.current {
                Some((t, count)) if t.as_slice() == target => return Ok(*count),
                Some((t, _)) if t.as_slice() < target => self.advance()?,
                _ => {
                    return Err(Error::invalid(
                        "--target-totals",
                        format!(
                            "the target totals lack the target {:?}: give the target totals of every shard whose runs are merged",
                            String::from_utf8_lossy(target)
                        ),
                    ))
                }
            }
        }
    }
}

/// The map step split by source key range: extracts the corpus shard at `paths` and writes
/// its counts as [`split_runs`] does (range runs and target totals named after `prefix`).
///
/// # Examples
/// ```
/// use baler::extract::corpus::CorpusPaths;
/// use baler::extract::ranges::{extract_shard_ranges, range_path, totals_path, SplitKeys};
/// use baler::extract::score::{merge_and_score, MergeOptions};
/// use baler::extract::shard::ShardOptions;
/// let dir = tempfile::tempdir().unwrap();
/// let write = |name: &str, text: &str| {
///     let p = dir.path().join(name);
///     std::fs::write(&p, text).unwrap();
///     p
/// };
/// let paths = CorpusPaths {
///     source: write("s", "el muelle\nla grúa\n"),
///     target: write("t", "the pier\nthe crane\n"),
///     alignment: Some(write("a", "0-0 1-1\n0-0 1-1\n")),
/// };
/// let keys = SplitKeys::new(vec![b"la".to_vec()]).unwrap();
/// let prefix = dir.path().join("part");
/// extract_shard_ranges(&paths, &ShardOptions::default(), &keys, &prefix).unwrap();
/// // Range 1 (sources from "la" on), with the target totals of every shard (here one).
/// let options = MergeOptions {
///     target_totals: vec![totals_path(&prefix)],
///     ..Default::default()
/// };
/// let mut table = Vec::new();
/// let name = std::path::Path::new("range1.tsv");
/// merge_and_score(&[range_path(&prefix, 1)], &mut table, name, &options).unwrap();
/// let table = String::from_utf8(table).unwrap();
/// assert!(!table.contains("el muelle"));
/// let row = table.lines().find(|l| l.starts_with("la\tthe\t")).unwrap();
/// // count 1, count_source 1, count_target 2: "the" is also a target of "el", in range 0.
/// assert!(row.ends_with("\t1\t1\t2"), "{row}");
/// ```
pub fn extract_shard_ranges(
    paths: &super::corpus::CorpusPaths,
    options: &super::shard::ShardOptions,
    keys: &SplitKeys,
    prefix: &Path,
) -> Result<RunInfo> {
    super::shard::check_settings(paths, options)?;
    let inputs = paths.inputs();
    for r in 0..keys.ranges() {
        files::check_output(&range_path(prefix, r), &inputs)?;
    }
    files::check_output(&totals_path(prefix), &inputs)?;
    let runs = super::shard::extract_runs(paths, options)?;
    split_runs(
        &runs.runs,
        keys,
        prefix,
        options.memory,
        options.temp_dir.clone(),
    )
}
