//! Phrase-pair extraction and scoring from word-aligned parallel text.
//!
//! The work is shaped as map and reduce, so that each step can also run on its own (the
//! `baler extract` subcommands expose them) and a corpus larger than one machine can be
//! processed shard by shard elsewhere:
//!
//! 1. **map** ([`shard`]): a shard of the corpus becomes a sorted, compressed count run of
//!    phrase pairs and word links ([`runs`]);
//! 2. **reduce** ([`score`]): runs from any number of shards merge into the scored table,
//!    sorted by source then target, and a phrase index of it ([`index`]);
//! 3. **map** ([`sentences::tally`]): each shard counts, for every pair of that table (read
//!    through the index), the sentence pairs containing its source, its target, and both;
//! 4. **reduce** ([`sentences::attach`]): the tallies are summed and appended as the
//!    `cooc`, `df_source` and `df_target` columns.
//!
//! Memory: the map step's count tables share `--memory` between the threads and spill to runs;
//! the reduce step's two external sorts take half of it each; the counting step keeps the two
//! index maps and takes the sources' rows in chunks that fit the rest, one corpus pass per
//! chunk. Beyond the budget: the word translation table (one entry per distinct word link)
//! and the options of the one source being scored are held in memory.
//!
//! [`extract`] runs the job on one machine, by one of three paths with the same output:
//!
//! * **resident** (`resident.rs`), when the corpus fits `--memory`: one pass in memory (words
//!   as integer ids, phrases as nodes of a prefix tree, no intermediate files; sums parallel
//!   by source range, sentence counts parallel by sentence);
//! * **range-partitioned** (`partitioned.rs`), when it does not: one corpus pass writes every
//!   phrase-pair occurrence as integers into bucket files by the byte order of its first
//!   source word; target totals are counted bucket by bucket; then groups of buckets that fit
//!   the budget each run the resident machinery and are written in order. Memory: the
//!   sentences as ids and the word links are held throughout; everything else is bounded by
//!   the group size;
//! * **map/reduce** (the four steps above), with a discount (whose statistics span the whole
//!   table) beyond the budget, or when some word holds a control byte after its first byte
//!   (so that word order and text order differ).
//!
//! Every count is an integer summed by key and every score is computed from the summed
//! counts, so the output is byte-identical whatever the path, the number of threads or shards.
//!
//! ```
//! # fn main() -> baler::Result<()> {
//! use baler::extract::{extract, corpus::CorpusPaths, ExtractOptions};
//! let dir = tempfile::tempdir().unwrap();
//! let write = |name: &str, text: &str| {
//!     let p = dir.path().join(name);
//!     std::fs::write(&p, text).unwrap();
//!     p
//! };
//! let paths = CorpusPaths {
//!     source: write("ferry.es", "el ferry sale\nel ferry llega\n"),
//!     target: write("ferry.en", "the ferry leaves\nthe ferry arrives\n"),
//!     alignment: Some(write("ferry.links", "0-0 1-1 2-2\n0-0 1-1 2-2\n")),
//! };
//! let out = dir.path().join("ferry.tsv");
//! let summary = extract(&paths, &ExtractOptions::default(), &out)?;
//! assert_eq!(summary.corpus.sentence_pairs, 2);
//! let table = std::fs::read_to_string(&out).unwrap();
//! let row = table.lines().find(|l| l.starts_with("el ferry\t")).unwrap();
//! // source, target, alignment, 4 scores, count, count_source, count_target, cooc, df_source, df_target
//! assert_eq!(row, "el ferry\tthe ferry\t0-0 1-1\t1\t1\t1\t1\t2\t2\t2\t2\t2\t2");
//! # Ok(()) }
//! ```

pub(crate) mod cooccurrence;
pub mod corpus;
mod counter;
mod framed;
pub mod index;
mod partitioned;
pub mod phrases;
pub mod ranges;
mod report;
mod resident;
pub mod runs;
pub mod score;
pub mod sentences;
pub mod shard;
pub mod synthetic;

pub use report::peak_memory;

use std::path::Path;
use std::time::Instant;

use crate::error::Result;
use crate::files::Output;
use corpus::{CorpusPaths, CorpusStats};
use score::{MergeOptions, MergeSummary};
use sentences::TallyOptions;
use shard::ShardOptions;

/// Settings of the one-machine path.
#[derive(Clone, Debug, Default)]
pub struct ExtractOptions {
    /// Extraction, corpus reading, memory, threads, temporary directory, progress.
    pub shard: ShardOptions,
    /// Discounting of the phrase counts.
    pub discount: score::Discount,
}

/// What a run of [`extract`] did.
#[derive(Clone, Debug, PartialEq)]
pub struct ExtractSummary {
    /// Lines read and sentence pairs kept or skipped.
    pub corpus: CorpusStats,
    /// Phrase-pair occurrences extracted.
    pub pair_occurrences: u64,
    /// Distinct phrase pairs in the table.
    pub pairs: u64,
    /// Distinct source phrases.
    pub sources: u64,
    /// Distinct target phrases.
    pub targets: u64,
    /// Corpus passes of the sentence-level counting.
    pub sentence_count_passes: u64,
    /// Wall-clock seconds.
    pub seconds: f64,
    /// Wall-clock seconds of the four steps: extraction into runs, merge and scoring,
    /// sentence-level counting, attaching the counts.
    pub step_seconds: [f64; 4],
}

/// Extracts, scores and counts the corpus at `paths` and writes the table to `out`
/// (`.tsv`, `.tsv.zst`, `.tsv.gz` or `-`); the file appears only when complete.
pub fn extract(
    paths: &CorpusPaths,
    options: &ExtractOptions,
    out: &Path,
) -> Result<ExtractSummary> {
    let started = Instant::now();
    for (flag, path) in [("--source", &paths.source), ("--target", &paths.target)] {
        if path.as_os_str() == crate::files::STDIO {
            return Err(crate::Error::invalid(
                flag,
                "the corpus is read twice (extraction, then sentence-level counts): give a file, not -",
            ));
        }
    }
    shard::check_settings(paths, &options.shard)?;
    crate::files::check_output(out, &paths.inputs())?;
    let mut output = Output::create(out)?;
    let summary = |done: resident::ResidentSummary| ExtractSummary {
        corpus: done.info.corpus,
        pair_occurrences: done.info.pair_occurrences,
        pairs: done.pairs,
        sources: done.sources,
        targets: done.targets,
        sentence_count_passes: done.passes,
        seconds: started.elapsed().as_secs_f64(),
        step_seconds: done.step_seconds,
    };
    // A corpus far smaller than the budget goes straight to the resident path; otherwise its
    // first sentence pairs tell whether that path is expected to fit.
    let memory = options.shard.memory;
    let small = std::fs::metadata(&paths.source)
        .is_ok_and(|m| m.len().saturating_mul(partitioned::BYTES_PER_CORPUS_BYTE) <= memory);
    let mut sample = None;
    if !small {
        sample = Some(partitioned::sample(paths, &options.shard)?);
    }
    let mut word_order_differs = false;
    if small || sample.as_ref().is_some_and(|s| s.resident_fits(memory)) {
        match resident::extract_resident(paths, &options.shard, options.discount, &mut output, out)?
        {
            Ok(done) => {
                output.commit()?;
                return Ok(summary(done));
            }
            Err(resident::Declined::WordOrder) => word_order_differs = true,
            Err(resident::Declined::OverBudget) => {}
        }
    }
    if !word_order_differs {
        let sample = match sample {
            Some(sample) => sample,
            None => partitioned::sample(paths, &options.shard)?,
        };
        if let Some(done) = partitioned::extract_partitioned(
            paths,
            &options.shard,
            options.discount,
            &sample,
            &mut output,
            out,
        )? {
            output.commit()?;
            return Ok(summary(done));
        }
    }
    extract_spilling(paths, options, output, started)
}

/// The map/reduce path on one machine: count runs, merge, tally, attach.
fn extract_spilling(
    paths: &CorpusPaths,
    options: &ExtractOptions,
    mut output: Output,
    started: Instant,
) -> Result<ExtractSummary> {
    let out = output.path().to_path_buf();
    let out = out.as_path();
    let work =
        crate::files::TempDir::new(options.shard.temp_dir.as_deref(), "baler-extract-work-")?;
    let merged_path = work.path().join("merged.tsv.zst");
    let index_path = work.path().join("merged.index");
    let mut steps = [0.0; 4];
    let mut lap = Instant::now();
    let mut next_lap = |k: usize| {
        steps[k] = lap.elapsed().as_secs_f64();
        lap = Instant::now();
    };
    let runs = shard::extract_runs(paths, &options.shard)?;
    next_lap(0);
    let MergeSummary {
        info,
        pairs,
        sources,
        targets,
    } = {
        let merge = MergeOptions {
            discount: options.discount,
            memory: options.shard.memory,
            temp_dir: Some(work.path().to_path_buf()),
            index: Some(index_path.clone()),
            target_totals: Vec::new(),
        };
        // A temporary file: fast compression, no sync to disk.
        let werr = |e| crate::Error::io(&merged_path, "writing", e);
        let file = std::fs::File::create(&merged_path).map_err(werr)?;
        let mut merged =
            zstd::stream::write::Encoder::new(std::io::BufWriter::with_capacity(1 << 20, file), 1)
                .map_err(werr)?;
        let summary = score::merge_and_score(&runs.runs, &mut merged, &merged_path, &merge)?;
        let mut file = merged.finish().map_err(werr)?;
        std::io::Write::flush(&mut file).map_err(werr)?;
        summary
    };
    drop(runs);
    next_lap(1);
    let tally_path = work.path().join("corpus.tally");
    let tally_options = TallyOptions {
        max_sentence_length: Some(options.shard.corpus.max_sentence_length),
        memory: options.shard.memory,
        threads: options.shard.threads,
        temp_dir: Some(work.path().to_path_buf()),
        progress: options.shard.progress,
        lines: options.shard.corpus.lines,
    };
    let counting = CorpusPaths {
        alignment: None,
        ..paths.clone()
    };
    let tally = sentences::tally(&index_path, &counting, &tally_options, &tally_path)?;
    next_lap(2);
    sentences::attach(&merged_path, &[tally_path], &mut output, out)?;
    output.commit()?;
    next_lap(3);
    Ok(ExtractSummary {
        corpus: info.corpus,
        pair_occurrences: info.pair_occurrences,
        pairs,
        sources,
        targets,
        sentence_count_passes: tally.passes,
        seconds: started.elapsed().as_secs_f64(),
        step_seconds: steps,
    })
}
