//! What each filter removed: counts of pairs and sources, and the distribution of `-ln p`.

use serde::Serialize;

/// Counts for one filter of the pipeline.
#[derive(Clone, Debug, Default, Serialize, PartialEq)]
pub struct FilterStats {
    /// The filter as on the command line, e.g. `--top-k 20 --by p_t_given_s`.
    pub filter: String,
    /// The resolved threshold, for significance and relative-entropy filters.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub threshold: Option<f64>,
    /// Pairs that reached the filter.
    pub pairs_before: u64,
    /// Pairs it kept.
    pub pairs_after: u64,
    /// Sources with at least one option when the filter started on them.
    pub sources_before: u64,
    /// Sources with at least one option after it.
    pub sources_after: u64,
    /// Sources that lost every option in this filter.
    pub sources_emptied: u64,
    /// Up to [`FilterStats::SAMPLE`] of those sources, in input order.
    pub sources_emptied_sample: Vec<String>,
    /// `-ln p` of the pairs that reached a significance filter.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub neg_ln_p: Option<Histogram>,
}

impl FilterStats {
    /// How many emptied sources are named in [`FilterStats::sources_emptied_sample`].
    pub const SAMPLE: usize = 10;

    pub(crate) fn record_group(&mut self, source: &str, before: usize, after: usize) {
        if before == 0 {
            return;
        }
        self.pairs_before += before as u64;
        self.pairs_after += after as u64;
        self.sources_before += 1;
        if after > 0 {
            self.sources_after += 1;
        } else {
            self.sources_emptied += 1;
            if self.sources_emptied_sample.len() < FilterStats::SAMPLE {
                self.sources_emptied_sample.push(source.to_string());
            }
        }
    }
}

/// A histogram of `-ln p` in bins of one nat, with the extremes, the mean and how many pairs
/// sit exactly at `ln N` (the 1-1-1 pairs).
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct Histogram {
    /// Width of a bin (1 nat).
    pub bin_width: f64,
    /// `counts[i]` pairs have `i ≤ -ln p < i + 1`.
    pub counts: Vec<u64>,
    /// Pairs with `-ln p ≥ counts.len()`.
    pub overflow: u64,
    /// Pairs counted.
    pub pairs: u64,
    /// Smallest value (0 when empty).
    pub min: f64,
    /// Largest value (0 when empty).
    pub max: f64,
    /// Mean value (0 when empty; set by `Histogram::finish`).
    pub mean: f64,
    /// Pairs with `cooc = df_source = df_target = 1`.
    pub one_one_one: u64,
    #[serde(skip)]
    sum: f64,
}

impl Histogram {
    /// Bins below the overflow bin.
    pub const BINS: usize = 100;

    pub(crate) fn new() -> Histogram {
        Histogram {
            bin_width: 1.0,
            counts: vec![0; Histogram::BINS],
            overflow: 0,
            pairs: 0,
            min: 0.0,
            max: 0.0,
            mean: 0.0,
            one_one_one: 0,
            sum: 0.0,
        }
    }

    pub(crate) fn add(&mut self, value: f64, one_one_one: bool) {
        let bin = value.floor();
        if bin < self.counts.len() as f64 {
            self.counts[bin.max(0.0) as usize] += 1;
        } else {
            self.overflow += 1;
        }
        if self.pairs == 0 {
            self.min = value;
            self.max = value;
        } else {
            self.min = self.min.min(value);
            self.max = self.max.max(value);
        }
        self.pairs += 1;
        self.sum += value;
        self.one_one_one += u64::from(one_one_one);
    }

    /// Sets the mean from the running sum.
    pub(crate) fn finish(&mut self) {
        if self.pairs > 0 {
            self.mean = self.sum / self.pairs as f64;
        }
    }
}

/// The report of a whole run.
#[derive(Clone, Debug, Default, Serialize, PartialEq)]
pub struct PruneStats {
    /// The input as given.
    pub input: String,
    /// N: sentence pairs (or phrase-pair occurrences under the phrase-count approximation)
    /// used by the significance test, when one ran.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub sentence_pairs: Option<u64>,
    /// `table`, `corpus` or `phrase-counts (approximation)`.
    pub counts: String,
    /// Pairs read.
    pub pairs_in: u64,
    /// Distinct sources read.
    pub sources_in: u64,
    /// Pairs written.
    pub pairs_out: u64,
    /// Sources written.
    pub sources_out: u64,
    /// Sources read that have no option left.
    pub sources_lost_all: u64,
    /// Whether the input had to be sorted by source first.
    pub sorted_externally: bool,
    /// Lookups of `-ln p` answered by the memo, and computed.
    pub memo_hits: u64,
    /// See [`PruneStats::memo_hits`].
    pub memo_misses: u64,
    /// One entry per filter, in the order they ran.
    pub filters: Vec<FilterStats>,
}

impl PruneStats {
    /// A plain-text summary for stderr: one line per filter.
    ///
    /// # Examples
    /// ```
    /// let stats = baler::prune::PruneStats { pairs_in: 10, pairs_out: 4, ..Default::default() };
    /// assert!(stats.summary().contains("10 pairs"));
    /// ```
    pub fn summary(&self) -> String {
        use std::fmt::Write;
        let mut s = String::new();
        let pct = |a: u64, b: u64| {
            if b == 0 {
                0.0
            } else {
                100.0 * a as f64 / b as f64
            }
        };
        let _ = writeln!(
            s,
            "prune: read {} pairs, {} sources{}",
            self.pairs_in,
            self.sources_in,
            if self.sorted_externally {
                " (sorted by source first)"
            } else {
                ""
            }
        );
        for (i, f) in self.filters.iter().enumerate() {
            let _ = write!(
                s,
                "  {}. {}: pairs {} -> {} ({:.1}% kept), sources {} -> {}, {} lost every option",
                i + 1,
                f.filter,
                f.pairs_before,
                f.pairs_after,
                pct(f.pairs_after, f.pairs_before),
                f.sources_before,
                f.sources_after,
                f.sources_emptied
            );
            if let Some(t) = f.threshold {
                let _ = write!(s, "; threshold {t:.6}");
            }
            s.push('\n');
            if let Some(h) = &f.neg_ln_p {
                let _ = writeln!(
                    s,
                    "     -ln p: min {:.3}, mean {:.3}, max {:.3}; {} pairs are 1-1-1",
                    h.min, h.mean, h.max, h.one_one_one
                );
            }
        }
        let _ = writeln!(
            s,
            "prune: wrote {} pairs ({:.1}%), {} sources; {} sources lost every option",
            self.pairs_out,
            pct(self.pairs_out, self.pairs_in),
            self.sources_out,
            self.sources_lost_all
        );
        s
    }
}
