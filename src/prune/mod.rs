//! Pruning filters over source-grouped phrase pairs.
//!
//! A [`Pruner`] applies a list of [`Filter`]s, in the order given, to every group of pairs that
//! share a source phrase, and records for each filter how many pairs and sources went in and
//! came out ([`PruneStats`]). [`crate::pipeline::prune_file`] runs it over a file: interchange TSV in any order
//! (streamed when sorted by source, sorted externally otherwise) or a packed `.bale` table, and
//! writes TSV or, by the output's extension, a packed table.
//!
//! # Filters
//!
//! * [`Filter::Significance`]: one-sided Fisher exact test ([`fisher`]) on the 2×2 table of
//!   sentence pairs built from `cooc`, `df_source`, `df_target` and N (`# sentence_pairs`);
//!   a pair is kept when `-ln p ≥ threshold`. [`Threshold::AlphaPlusEpsilon`] is `ln N + ε`
//!   and removes the pairs seen once whose phrases were each seen once (their `-ln p` is exactly
//!   `ln N`); [`Threshold::AlphaMinusEpsilon`] is `ln N − ε` and keeps them. ε is
//!   [`EPSILON`].
//! * [`Filter::TopK`]: the `k` best options of each source by a [`Ranking`]; ties go to the
//!   target that sorts first in byte order.
//! * [`Filter::Bound`]: a minimum or maximum on a score or count column.
//! * [`Filter::RelativeEntropy`]: removes pairs whose probability is well explained by
//!   composing shorter pairs of the same table ([`entropy`]).
//!
//! Counts and alignments pass through unchanged. Scores are only changed when
//! [`PruneOptions::renormalize`] names a column: after the last filter that column is divided,
//! within each source, by its sum over the options kept, so that it sums to 1 again.
//!
//! # Command line
//!
//! ```text
//! baler prune extracted.tsv.zst -o harbour.bale \
//!     --significance alpha+epsilon --top-k 30 --by p_t_given_s --stats prune.json
//! ```
//!
//! prunes before packing in one step: significance first, then the 30 best options of what
//! is left; `--stats` writes [`PruneStats`] as JSON and the same summary goes to stderr.
//!
//! # Examples
//! ```
//! use baler::prune::{Filter, PruneOptions, Pruner, Threshold};
//! use baler::table::TsvReader;
//! let tsv = "# sentence_pairs=1000\n\
//!            source\ttarget\tcooc\tdf_source\tdf_target\n\
//!            el faro\tthe lighthouse\t40\t42\t41\n\
//!            el faro\tthe rock\t1\t42\t1\n";
//! let reader = TsvReader::new(tsv.as_bytes(), "coast.tsv")?;
//! let options = PruneOptions {
//!     filters: vec![Filter::Significance(Threshold::AlphaPlusEpsilon)],
//!     ..Default::default()
//! };
//! let mut pruner = Pruner::new(reader.header(), "coast.tsv", &options)?;
//! let mut kept = Vec::new();
//! pruner.run(reader.map(|r| r.map(|p| (p, 0))), |pair| {
//!     kept.push(pair.target.clone());
//!     Ok(())
//! })?;
//! // "the rock" occurs in one sentence pair, in one of the 42 with "el faro": p = 42/1000
//! assert_eq!(kept, ["the lighthouse"]);
//! assert_eq!(pruner.stats().filters[0].pairs_after, 1);
//! # Ok::<(), baler::Error>(())
//! ```

mod corpus;
pub mod entropy;
pub mod fisher;
pub(crate) mod held;
pub(crate) mod pipeline;
mod stats;
pub mod testset;
mod topk;

pub use corpus::SentenceCounts;
pub use pipeline::Pruner;
pub use stats::{FilterStats, Histogram, PruneStats};
pub use topk::Ranking;

use std::path::PathBuf;

use crate::error::{Error, Result};

/// ε of the named significance thresholds `ln N ± ε`: 10^-9.
///
/// The 1-1-1 pairs have `-ln p = ln N`; [`fisher::neg_ln_p`] returns it to within a few ulps
/// (below `4·10^-14` absolute up to N = 10^9, checked in the tests), so any ε well above that
/// classifies them exactly. ε = 10^-9 keeps a margin of more than four orders of magnitude
/// above that error while staying far below the gap to the next small-count triples (1-1-2
/// and 1-2-1 give `ln N − ln 2`, 1-2-2 about `ln N − ln 4`, 2-2-2 about `2 ln N − ln 2`). For
/// comparison, the same `-ln p` from differences of `ln Γ` in doubles (statrs 0.17
/// `ln_gamma`, measured on the 1-1-1 case) is off by 1.5·10^-8 at N = 10^7 and 7.6·10^-7 at
/// N = 10^9, which would misclassify under this ε.
pub const EPSILON: f64 = 1e-9;

/// A significance threshold on `-ln p`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Threshold {
    /// Keep pairs with `-ln p` at least this value.
    Value(f64),
    /// `ln N + ε`: removes the pairs seen once with phrases seen once.
    AlphaPlusEpsilon,
    /// `ln N − ε`: keeps them.
    AlphaMinusEpsilon,
}

impl Threshold {
    /// Parses `alpha+epsilon`, `alpha-epsilon` or a non-negative number.
    ///
    /// # Examples
    /// ```
    /// use baler::prune::Threshold;
    /// assert_eq!(Threshold::parse("alpha+epsilon").unwrap(), Threshold::AlphaPlusEpsilon);
    /// assert_eq!(Threshold::parse("12.5").unwrap(), Threshold::Value(12.5));
    /// assert!(Threshold::parse("beta").is_err());
    /// assert_eq!(Threshold::AlphaMinusEpsilon.value(1000), 1000f64.ln() - baler::prune::EPSILON);
    /// ```
    pub fn parse(text: &str) -> Result<Threshold> {
        match text {
            "alpha+epsilon" => Ok(Threshold::AlphaPlusEpsilon),
            "alpha-epsilon" => Ok(Threshold::AlphaMinusEpsilon),
            _ => match text.parse::<f64>() {
                Ok(v) if v.is_finite() && v >= 0.0 => Ok(Threshold::Value(v)),
                _ => Err(Error::invalid(
                    "--significance",
                    format!("{text:?} is not alpha+epsilon, alpha-epsilon or a number ≥ 0"),
                )),
            },
        }
    }

    /// The threshold on `-ln p` for a corpus of `sentence_pairs`.
    pub fn value(self, sentence_pairs: u64) -> f64 {
        match self {
            Threshold::Value(v) => v,
            Threshold::AlphaPlusEpsilon => (sentence_pairs as f64).ln() + EPSILON,
            Threshold::AlphaMinusEpsilon => (sentence_pairs as f64).ln() - EPSILON,
        }
    }
}

/// One filter of the pipeline.
#[derive(Clone, Debug, PartialEq)]
pub enum Filter {
    /// Keep pairs whose Fisher test gives `-ln p ≥` the threshold.
    Significance(Threshold),
    /// Keep the `k` best options of each source phrase.
    TopK {
        /// How many options to keep.
        k: usize,
        /// How options are ranked.
        by: Ranking,
    },
    /// Keep pairs whose `column` is at least (`minimum: true`) or at most `value`.
    Bound {
        /// A score or count column.
        column: String,
        /// Minimum (true) or maximum (false).
        minimum: bool,
        /// The bound, inclusive.
        value: f64,
    },
    /// Keep pairs whose relative-entropy score ([`entropy`]) is at least this value.
    RelativeEntropy(f64),
    /// Keep only sources that occur in this tokenized text ([`testset`]).
    KeepTestPhrases(std::path::PathBuf),
}

impl Filter {
    /// Parses `COLUMN=VALUE` for [`Filter::Bound`]; `option` names the flag in errors.
    ///
    /// # Examples
    /// ```
    /// let f = baler::prune::Filter::bound("--min", "p_t_given_s=0.01", true).unwrap();
    /// assert_eq!(f, baler::prune::Filter::Bound {
    ///     column: "p_t_given_s".into(), minimum: true, value: 0.01 });
    /// ```
    pub fn bound(option: &str, text: &str, minimum: bool) -> Result<Filter> {
        let bad = || Error::invalid(option, format!("{text:?} is not COLUMN=NUMBER"));
        let (column, value) = text.split_once('=').ok_or_else(bad)?;
        let value: f64 = value.trim().parse().map_err(|_| bad())?;
        if column.is_empty() || value.is_nan() {
            return Err(bad());
        }
        Ok(Filter::Bound {
            column: column.to_string(),
            minimum,
            value,
        })
    }

    /// A short description, as on the command line.
    pub fn describe(&self) -> String {
        match self {
            Filter::Significance(Threshold::Value(v)) => format!("--significance {v}"),
            Filter::Significance(Threshold::AlphaPlusEpsilon) => {
                "--significance alpha+epsilon".into()
            }
            Filter::Significance(Threshold::AlphaMinusEpsilon) => {
                "--significance alpha-epsilon".into()
            }
            Filter::TopK { k, by } => format!("--top-k {k} --by {}", by.describe()),
            Filter::Bound {
                column,
                minimum,
                value,
            } => format!(
                "--{} {column}={value}",
                if *minimum { "min" } else { "max" }
            ),
            Filter::RelativeEntropy(v) => format!("--relative-entropy {v}"),
            Filter::KeepTestPhrases(p) => format!("--keep-test-phrases {}", p.display()),
        }
    }
}

/// Where the significance test takes its counts from.
#[derive(Clone, Debug, Default, PartialEq)]
pub enum CountSource {
    /// The table's `cooc`, `df_source` and `df_target` columns and `# sentence_pairs`.
    #[default]
    Table,
    /// Sentence-level counts computed from a sentence-aligned corpus, one sentence per line,
    /// tokens separated by spaces (see [`SentenceCounts`]). The output gains the `cooc`,
    /// `df_source` and `df_target` columns and `# sentence_pairs`.
    Corpus {
        /// Source side.
        source: PathBuf,
        /// Target side, line-aligned with `source`.
        target: PathBuf,
    },
    /// An approximation: the 2×2 table over extracted phrase-pair occurrences instead of sentence
    /// pairs, from `count`, `count_source`, `count_target`, with N the sum of `count` over the
    /// table (a first pass). Prints a warning.
    PhraseCounts,
}

/// Everything [`Pruner`] and [`crate::pipeline::prune_file`] need besides the data.
#[derive(Clone, Debug, Default)]
pub struct PruneOptions {
    /// The filters, applied in order.
    pub filters: Vec<Filter>,
    /// Add the score column `neg_ln_p` (replacing one already present).
    pub annotate: bool,
    /// Where the significance counts come from.
    pub counts: CountSource,
    /// Score columns to renormalise per source after the last filter (see the module docs).
    pub renormalize: Vec<String>,
    /// Memory budget in bytes for the external sort of unsorted input and for packing
    /// (0: the default, [`crate::settings::DEFAULT_MEMORY`]). Relative-entropy pruning keeps
    /// its index within half of it.
    pub memory: u64,
    /// Show a progress bar on stderr (when it is a terminal).
    pub progress: bool,
    /// Parent of temporary directories (pairs waiting for relative entropy; the system's when
    /// `None`).
    pub temp_dir: Option<PathBuf>,
}

impl PruneOptions {
    /// Everything that changed the table, as command-line flags: the filters in order, then
    /// the count source, `--annotate` and `--renormalize`. This is the provenance recorded as
    /// `# pruned_with`; empty when nothing was asked.
    ///
    /// # Examples
    /// ```
    /// use baler::prune::{CountSource, Filter, PruneOptions, Threshold};
    /// let options = PruneOptions {
    ///     filters: vec![Filter::Significance(Threshold::AlphaPlusEpsilon)],
    ///     counts: CountSource::PhraseCounts,
    ///     annotate: true,
    ///     renormalize: vec!["p_t_given_s".into()],
    ///     ..Default::default()
    /// };
    /// assert_eq!(options.describe(), "--significance alpha+epsilon --phrase-counts --annotate \
    ///                                 --renormalize p_t_given_s");
    /// ```
    pub fn describe(&self) -> String {
        let mut parts: Vec<String> = self.filters.iter().map(Filter::describe).collect();
        let tested = self.annotate
            || self
                .filters
                .iter()
                .any(|f| matches!(f, Filter::Significance(_)));
        if tested {
            match &self.counts {
                CountSource::Table => {}
                CountSource::Corpus { source, target } => parts.push(format!(
                    "--source {} --target {}",
                    source.display(),
                    target.display()
                )),
                CountSource::PhraseCounts => parts.push("--phrase-counts".into()),
            }
        }
        if self.annotate {
            parts.push("--annotate".into());
        }
        for column in &self.renormalize {
            parts.push(format!("--renormalize {column}"));
        }
        parts.join(" ")
    }
}

/// The name of the column [`PruneOptions::annotate`] adds.
pub const NEG_LN_P: &str = "neg_ln_p";
