//! baler: extract, prune, pack and query phrase tables for phrase-based machine translation.
//!
//! The map of every public module, one line each. The pipeline after word alignment, one
//! module per stage:
//!
//! * [`table`]: the tab-separated interchange format every stage reads and writes.
//! * [`extract`]: phrase pairs consistent with a word alignment, with relative-frequency and
//!   lexical scores and the sentence-level counts pruning needs.
//! * [`prune`]: significance testing (Fisher's exact test), top-k, threshold and
//!   relative-entropy filters over source-grouped streams.
//! * [`pack`]: writes the compact binary format (scores quantized by a private codebook module).
//! * [`read`]: [`Table`], the packed format read from a memory map: lookups, spans, iteration.
//! * [`format`](mod@format): every byte layout: the packed table's sections and the language model file.
//! * [`measure`]: sizes, held-out coverage, retained mass, divergence; the sweep grid.
//!
//! Translation quality:
//!
//! * [`lm`]: n-gram language models (interpolated modified Kneser-Ney), ARPA export.
//! * [`decode`]: the phrase-based stack decoder over a packed table and a language model.
//! * [`evaluate`]: corpus BLEU, chrF and paired bootstrap resampling.
//! * [`tune`]: fitting the decoder's weights on a development set.
//! * [`quality`]: a table's translation quality on a test set, for compare, sweep and build.
//!
//! Around them:
//!
//! * [`pipeline`]: the only place that wires stages together over files (prune a file, prune
//!   into a pack, pack or repack a file, sweep, build from a [`recipe`]).
//! * [`recipe`]: the TOML build recipe, fully checked before any work.
//! * [`settings`]: every packing, resource and filter option, defined once; flags, recipe keys
//!   and sweep names derive from it.
//! * [`files`]: the one I/O layer (inputs, atomic outputs, temporary directories, removal on
//!   interrupt, line-parallel texts).
//! * [`synth`]: synthetic tables for benchmarks.
//! * [`Error`] and [`Result`]: the one error type (its module and `sort`, the one external
//!   sorter and k-way merge every stage uses, are internal).
//!
//! ```
//! # fn main() -> baler::Result<()> {
//! let dir = tempfile::tempdir().unwrap();
//! let tsv = "source\ttarget\tp_t_given_s\nel muelle\tthe pier\t0.75\nel muelle\tthe quay\t0.25\n";
//! let packed = dir.path().join("harbour.bale");
//! baler::pack::pack_tsv(tsv.as_bytes(), "harbour.tsv", &packed, &baler::pack::PackOptions::default())?;
//! let table = baler::Table::open(&packed)?;
//! let options: Vec<String> = table.lookup("el muelle")?.iter().map(|o| o.target().to_string()).collect();
//! assert_eq!(options, ["the pier", "the quay"]);
//! # Ok(()) }
//! ```
#![deny(missing_docs)]

pub mod decode;
mod error;
pub mod evaluate;
pub mod extract;
pub mod files;
pub mod format;
pub mod lm;
pub mod measure;
mod mmap;
pub mod pack;
pub mod pipeline;
pub mod prune;
pub mod quality;
mod quantize;
pub mod read;
pub mod recipe;
pub mod settings;
mod sort;
pub mod synth;
pub mod table;
pub mod tune;

pub use error::{Error, Result};
pub use read::Table;
