//! Shape statistics of a sorted phrase table, to check that a generated table looks real.

use std::collections::hash_map::DefaultHasher;
use std::collections::HashSet;
use std::fmt;
use std::hash::{Hash, Hasher};

use crate::table::PhrasePair;

/// Counts what a table looks like from its pairs, fed in source order (as every sorted table,
/// and the generator's output, is): sources, distinct targets, options per source, phrase
/// lengths in tokens.
///
/// Distinct targets are counted by 64-bit hash, so memory grows with their number (8 bytes
/// each plus the set's overhead); everything else is constant.
///
/// # Examples
/// ```
/// use baler::synth::ShapeStats;
/// use baler::table::PhrasePair;
/// let mut stats = ShapeStats::new();
/// for (s, t) in [("a b", "x"), ("a b", "y z"), ("c", "x")] {
///     stats.add(&PhrasePair { source: s.into(), target: t.into(), ..Default::default() });
/// }
/// assert_eq!((stats.pairs(), stats.sources(), stats.distinct_targets()), (3, 2, 2));
/// assert_eq!((stats.max_options(), stats.mean_options()), (2, 1.5));
/// assert_eq!(stats.source_lengths()[2], 1); // one distinct source of two tokens
/// assert_eq!(stats.target_lengths()[1], 2); // two pairs with a one-token target
/// assert_eq!(stats.options_histogram()[..2], [1, 1]); // 1 option; 2–3 options
/// ```
#[derive(Clone, Debug, Default)]
pub struct ShapeStats {
    pairs: u64,
    sources: u64,
    targets: HashSet<u64>,
    last_source: String,
    current_options: u64,
    max_options: u64,
    /// `histogram[b]`: sources with `2^b ..= 2^(b+1) - 1` options.
    histogram: Vec<u64>,
    /// `source_lengths[n]`: distinct sources of `n` tokens.
    source_lengths: Vec<u64>,
    /// `target_lengths[n]`: pairs whose target has `n` tokens.
    target_lengths: Vec<u64>,
}

fn bucket(options: u64) -> usize {
    63 - options.leading_zeros() as usize
}

fn bump(v: &mut Vec<u64>, i: usize) {
    if v.len() <= i {
        v.resize(i + 1, 0);
    }
    v[i] += 1;
}

fn tokens(phrase: &str) -> usize {
    phrase.split(' ').count()
}

impl ShapeStats {
    /// An empty tally.
    pub fn new() -> ShapeStats {
        ShapeStats::default()
    }

    /// Adds one pair; pairs of one source must come together.
    pub fn add(&mut self, pair: &PhrasePair) {
        self.pairs += 1;
        if self.sources == 0 || pair.source != self.last_source {
            self.sources += 1;
            self.last_source.clear();
            self.last_source.push_str(&pair.source);
            self.current_options = 1;
            bump(&mut self.histogram, 0);
            bump(&mut self.source_lengths, tokens(&pair.source));
        } else {
            let before = bucket(self.current_options);
            self.current_options += 1;
            let after = bucket(self.current_options);
            if after != before {
                self.histogram[before] -= 1;
                bump(&mut self.histogram, after);
            }
        }
        self.max_options = self.max_options.max(self.current_options);
        let mut h = DefaultHasher::new();
        pair.target.hash(&mut h);
        self.targets.insert(h.finish());
        bump(&mut self.target_lengths, tokens(&pair.target));
    }

    /// Pairs added.
    pub fn pairs(&self) -> u64 {
        self.pairs
    }

    /// Distinct source phrases.
    pub fn sources(&self) -> u64 {
        self.sources
    }

    /// Distinct target phrases.
    pub fn distinct_targets(&self) -> u64 {
        self.targets.len() as u64
    }

    /// Most options of one source.
    pub fn max_options(&self) -> u64 {
        self.max_options
    }

    /// Pairs per source.
    pub fn mean_options(&self) -> f64 {
        self.pairs as f64 / self.sources.max(1) as f64
    }

    /// Sources by number of options in powers of two: entry `b` counts sources with
    /// `2^b` to `2^(b+1) - 1` options.
    pub fn options_histogram(&self) -> &[u64] {
        &self.histogram
    }

    /// Distinct sources by length in tokens (entry 0 is always 0).
    pub fn source_lengths(&self) -> &[u64] {
        &self.source_lengths
    }

    /// Pairs by target length in tokens (entry 0 is always 0).
    pub fn target_lengths(&self) -> &[u64] {
        &self.target_lengths
    }
}

fn shares(
    f: &mut fmt::Formatter<'_>,
    counts: &[u64],
    label: impl Fn(usize) -> String,
) -> fmt::Result {
    let total: u64 = counts.iter().sum();
    for (i, &c) in counts.iter().enumerate() {
        if c > 0 {
            write!(f, " {}:{:.1}%", label(i), 100.0 * c as f64 / total as f64)?;
        }
    }
    writeln!(f)
}

impl fmt::Display for ShapeStats {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let per_pair = |n: u64| n as f64 / self.pairs.max(1) as f64;
        writeln!(f, "pairs            {}", self.pairs)?;
        writeln!(
            f,
            "sources          {} ({:.3} per pair)",
            self.sources,
            per_pair(self.sources)
        )?;
        writeln!(
            f,
            "distinct targets {} ({:.3} per pair)",
            self.distinct_targets(),
            per_pair(self.distinct_targets())
        )?;
        writeln!(
            f,
            "options/source   mean {:.2}, max {}",
            self.mean_options(),
            self.max_options
        )?;
        write!(f, "options (sources)")?;
        shares(f, &self.histogram, |b| {
            let (lo, hi) = (1u64 << b, (1u64 << (b + 1)) - 1);
            if lo == hi {
                format!("{lo}")
            } else {
                format!("{lo}-{hi}")
            }
        })?;
        write!(f, "source tokens    ")?;
        shares(f, &self.source_lengths, |n| n.to_string())?;
        write!(f, "target tokens    ")?;
        shares(f, &self.target_lengths, |n| n.to_string())
    }
}
