//! The map step: one shard of the corpus into sorted, compressed count runs.
//!
//! One thread reads and validates the corpus in batches; worker threads extract phrase pairs
//! and word links into their own count tables, which spill to a run whenever they reach
//! their share of the memory budget. The counts are integers summed by key, so the merged
//! result does not depend on how the sentences were split between threads.

use std::path::{Path, PathBuf};
use std::sync::mpsc;
use std::sync::Mutex;

use super::corpus::{CorpusOptions, CorpusPaths, CorpusReader, CorpusStats, SentencePair};
use super::counter::CountTable;
use super::phrases::{write_inside, PhraseFinder, PhraseLimits, SpanPair};
use super::report::Progress;
use super::runs::{RunInfo, RunMerger, RunWriter, PHRASE_KIND, WORD_KIND};
use crate::error::{Error, Result};
use crate::files::TempDir;

const BATCH: usize = 512;

/// Settings of the map step.
#[derive(Clone, Debug)]
pub struct ShardOptions {
    /// Which phrase pairs to extract.
    pub limits: PhraseLimits,
    /// How to read the corpus.
    pub corpus: CorpusOptions,
    /// Memory budget in bytes for all count tables together.
    pub memory: u64,
    /// Worker threads (at least 1).
    pub threads: usize,
    /// Parent directory for temporary runs (the system default when `None`).
    pub temp_dir: Option<PathBuf>,
    /// Draw a progress bar on stderr (only when it is a terminal).
    pub progress: bool,
}

impl Default for ShardOptions {
    fn default() -> Self {
        ShardOptions {
            limits: PhraseLimits::default(),
            corpus: CorpusOptions::default(),
            memory: crate::settings::DEFAULT_MEMORY,
            threads: 1,
            temp_dir: None,
            progress: false,
        }
    }
}

/// Runs written to a temporary directory, removed when this is dropped.
pub struct ShardRuns {
    /// The run files.
    pub runs: Vec<PathBuf>,
    /// The shard's combined header.
    pub info: RunInfo,
    _dir: TempDir,
}

/// Checks the settings of an extraction before any work.
pub(crate) fn check_settings(paths: &CorpusPaths, options: &ShardOptions) -> Result<()> {
    options.corpus.validate()?;
    if options.limits.max_length == 0 {
        return Err(Error::invalid("--max-length", "must be at least 1"));
    }
    if paths.alignment.is_none() {
        return Err(Error::invalid(
            "--alignment",
            "extraction needs an alignment file",
        ));
    }
    Ok(())
}

/// Extracts the corpus into runs in a temporary directory (one or more per thread).
pub fn extract_runs(paths: &CorpusPaths, options: &ShardOptions) -> Result<ShardRuns> {
    check_settings(paths, options)?;
    let threads = options.threads.max(1);
    let dir = TempDir::new(options.temp_dir.as_deref(), "baler-extract-")?;
    let mut reader = CorpusReader::open(paths, options.corpus)?;
    let progress = Progress::new("extract", reader.total_bytes(), options.progress);
    let counter = reader.progress_counter();
    // The reader's batches in flight and the runs' buffers are small next to this.
    let budget = (options.memory as usize / threads).max(1 << 20);
    let settings = RunInfo {
        corpus: CorpusStats::default(),
        max_length: options.limits.max_length,
        max_sentence_length: options.corpus.max_sentence_length,
        unaligned_edges: options.limits.unaligned_edges,
        pair_occurrences: 0,
        shards: Vec::new(),
    };
    let final_stats: Mutex<Option<(CorpusStats, u64)>> = Mutex::new(None);
    let (tx, rx) = mpsc::sync_channel::<Vec<SentencePair>>(threads * 2);
    let rx = Mutex::new(rx);
    let (read_result, worker_results) = std::thread::scope(|scope| {
        let handles: Vec<_> = (0..threads)
            .map(|w| {
                let (rx, settings, final_stats, dir) = (&rx, &settings, &final_stats, dir.path());
                let limits = options.limits;
                scope.spawn(move || work(w, rx, limits, budget, settings, final_stats, dir))
            })
            .collect();
        let read_result = (|| -> Result<()> {
            loop {
                let batch = reader.next_batch(BATCH)?;
                let done = batch.len() < BATCH;
                if !batch.is_empty() && tx.send(batch).is_err() {
                    return Ok(()); // every worker stopped; their errors are reported below
                }
                progress.update(
                    counter.load(std::sync::atomic::Ordering::Relaxed),
                    reader.stats().sentence_pairs,
                );
                if done {
                    return Ok(());
                }
            }
        })();
        *final_stats.lock().unwrap() = Some((reader.stats(), reader.fingerprint()));
        drop(tx);
        let results: Vec<Result<Vec<(PathBuf, RunInfo)>>> = handles
            .into_iter()
            .map(|h| h.join().expect("extraction worker panicked"))
            .collect();
        (read_result, results)
    });
    progress.finish();
    read_result?;
    let mut runs = Vec::new();
    let mut info = settings.clone();
    for result in worker_results {
        for (path, run_info) in result? {
            info.combine(&run_info, &path)?;
            runs.push(path);
        }
    }
    runs.sort();
    Ok(ShardRuns {
        runs,
        info,
        _dir: dir,
    })
}

fn work(
    worker: usize,
    rx: &Mutex<mpsc::Receiver<Vec<SentencePair>>>,
    limits: PhraseLimits,
    budget: usize,
    settings: &RunInfo,
    final_stats: &Mutex<Option<(CorpusStats, u64)>>,
    dir: &Path,
) -> Result<Vec<(PathBuf, RunInfo)>> {
    let mut table = CountTable::with_budget(budget);
    let mut scratch = Scratch::default();
    let mut written = Vec::new();
    let mut occurrences = 0u64;
    let mut spill = |table: &mut CountTable,
                     occurrences: &mut u64,
                     (stats, shards): (CorpusStats, Vec<u64>)| {
        let path = dir.join(format!("worker{worker:03}-{:05}.run", written.len()));
        let info = RunInfo {
            corpus: stats,
            shards,
            pair_occurrences: std::mem::take(occurrences),
            ..settings.clone()
        };
        table.spill(&path, &info)?;
        written.push((path, info));
        Ok::<(), Error>(())
    };
    loop {
        let batch = match rx.lock().unwrap().recv() {
            Ok(b) => b,
            Err(_) => break,
        };
        for pair in &batch {
            if table.nearly_full() || table.arena_full() {
                spill(&mut table, &mut occurrences, Default::default())?;
            }
            occurrences += count_pair(pair, limits, &mut table, &mut scratch);
        }
    }
    // The reader's totals and the shard's identity travel in worker 0's last run.
    let stats = match worker {
        0 => final_stats
            .lock()
            .unwrap()
            .take()
            .map(|(stats, shard)| (stats, vec![shard]))
            .unwrap_or_default(),
        _ => Default::default(),
    };
    if !table.is_empty() || worker == 0 {
        spill(&mut table, &mut occurrences, stats)?;
    }
    Ok(written)
}

#[derive(Default)]
struct Scratch {
    finder: PhraseFinder,
    spans: Vec<SpanPair>,
    key: Vec<u8>,
    alignment: String,
    source_aligned: Vec<bool>,
    target_aligned: Vec<bool>,
}

/// Adds the word links and phrase pairs of one sentence pair; returns the number of phrase
/// pair occurrences.
fn count_pair(
    pair: &SentencePair,
    limits: PhraseLimits,
    table: &mut CountTable,
    s: &mut Scratch,
) -> u64 {
    let (ns, nt) = (pair.source_len(), pair.target_len());
    // Word links, and NULL links for unaligned words.
    s.source_aligned.clear();
    s.source_aligned.resize(ns, false);
    s.target_aligned.clear();
    s.target_aligned.resize(nt, false);
    let word_key = |key: &mut Vec<u8>, f: &str, e: &str| {
        key.clear();
        key.push(WORD_KIND);
        key.extend_from_slice(f.as_bytes());
        key.push(0);
        key.extend_from_slice(e.as_bytes());
    };
    for &(i, j) in &pair.links {
        let (i, j) = (usize::from(i), usize::from(j));
        s.source_aligned[i] = true;
        s.target_aligned[j] = true;
        word_key(
            &mut s.key,
            pair.source_phrase(i, i + 1),
            pair.target_phrase(j, j + 1),
        );
        table.add(&s.key, 1);
    }
    for i in (0..ns).filter(|&i| !s.source_aligned[i]) {
        word_key(&mut s.key, pair.source_phrase(i, i + 1), "");
        table.add(&s.key, 1);
    }
    for j in (0..nt).filter(|&j| !s.target_aligned[j]) {
        word_key(&mut s.key, "", pair.target_phrase(j, j + 1));
        table.add(&s.key, 1);
    }
    // Phrase pairs.
    s.spans.clear();
    let spans = &mut s.spans;
    s.finder
        .find(ns, nt, &pair.links, limits, |p| spans.push(p));
    for &p in spans.iter() {
        s.key.clear();
        s.key.push(PHRASE_KIND);
        s.key
            .extend_from_slice(pair.source_phrase(p.source_start, p.source_end).as_bytes());
        s.key.push(0);
        s.key
            .extend_from_slice(pair.target_phrase(p.target_start, p.target_end).as_bytes());
        s.key.push(0);
        s.alignment.clear();
        write_inside(&pair.links, p, &mut s.alignment);
        s.key.extend_from_slice(s.alignment.as_bytes());
        table.add(&s.key, 1);
    }
    spans.len() as u64
}

/// Merges `runs` into one run at `out` (written under a temporary name and renamed into
/// place), checking that they were extracted with the same settings. Returns the combined
/// header.
pub fn merge_runs_into(runs: &[PathBuf], out: &Path) -> Result<RunInfo> {
    let (mut merger, info) = RunMerger::open(runs)?;
    let temp = crate::files::Partial::beside(out)?;
    let mut writer = RunWriter::create(temp.path(), &info)?;
    while let Some((key, count)) = merger.next_record()? {
        writer.push(key, count)?;
    }
    writer.finish()?;
    temp.persist()?;
    Ok(info)
}

/// The map step as one command: extracts the corpus shard at `paths` into the single count
/// run `out`.
///
/// # Examples
/// ```
/// use baler::extract::corpus::CorpusPaths;
/// use baler::extract::shard::{extract_shard, ShardOptions};
/// let dir = tempfile::tempdir().unwrap();
/// let write = |name: &str, text: &str| {
///     let p = dir.path().join(name);
///     std::fs::write(&p, text).unwrap();
///     p
/// };
/// let paths = CorpusPaths {
///     source: write("s", "el muelle\n"),
///     target: write("t", "the pier\n"),
///     alignment: Some(write("a", "0-0 1-1\n")),
/// };
/// let run = dir.path().join("shard0.run");
/// let info = extract_shard(&paths, &ShardOptions::default(), &run).unwrap();
/// assert_eq!((info.corpus.sentence_pairs, info.pair_occurrences), (1, 3));
/// ```
pub fn extract_shard(paths: &CorpusPaths, options: &ShardOptions, out: &Path) -> Result<RunInfo> {
    check_settings(paths, options)?;
    crate::files::check_output(out, &paths.inputs())?;
    let runs = extract_runs(paths, options)?;
    merge_runs_into(&runs.runs, out)
}
