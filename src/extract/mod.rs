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
//! use baler::extract::{corpus::CorpusPaths, ExtractOptions};
//! use baler::pipeline::extract_file;
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
//! let summary = extract_file(&paths, &ExtractOptions::default(), &out)?;
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
pub(crate) mod partitioned;
pub mod phrases;
pub mod ranges;
mod report;
pub(crate) mod resident;
pub mod runs;
pub mod score;
pub mod sentences;
pub mod shard;
pub mod synthetic;

pub use report::peak_memory;

use corpus::CorpusStats;
use shard::ShardOptions;

/// Settings of the one-machine path.
#[derive(Clone, Debug, Default)]
pub struct ExtractOptions {
    /// Extraction, corpus reading, memory, threads, temporary directory, progress.
    pub shard: ShardOptions,
    /// Discounting of the phrase counts.
    pub discount: score::Discount,
}

/// What a run of [`crate::pipeline::extract_file`] did.
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
