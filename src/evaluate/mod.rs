//! Translation quality metrics: corpus BLEU (Papineni et al. 2002), chrF (Popović 2015) and
//! paired bootstrap resampling (Koehn 2004).
//!
//! Both metrics work on the text as given: BLEU splits lines on whitespace and nothing else (no
//! re-tokenization), chrF compares character n-grams with whitespace removed. Statistics are
//! kept per sentence so that corpus scores of resampled test sets are cheap to compute.
//!
//! ```
//! use baler::evaluate::{CorpusStats, bleu, chrf};
//! let hyps = ["the pier is closed", "open the gate"];
//! let refs = ["the pier is closed", "open the gate now"];
//! let stats = CorpusStats::new(&hyps, &refs);
//! let b = bleu(&stats.bleu_sum(..));
//! assert!(b.score > 70.0 && b.score < 100.0);
//! assert!(b.brevity_penalty < 1.0);
//! assert!(chrf(&stats.chrf_sum(..)) > 80.0);
//! ```

use std::collections::HashMap;
use std::ops::RangeBounds;

use rand_xoshiro::rand_core::{RngCore, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;

/// Largest n-gram order of BLEU.
pub const BLEU_ORDER: usize = 4;
/// Character n-gram order of chrF.
pub const CHRF_ORDER: usize = 6;
/// chrF's β: recall counts β² times as much as precision.
pub const CHRF_BETA: f64 = 2.0;

/// Whitespace as Python's `str.split()` sees it (Unicode White_Space plus the four ASCII
/// information separators), so that splitting agrees with the reference implementations.
fn is_space(c: char) -> bool {
    c.is_whitespace() || ('\u{1c}'..='\u{1f}').contains(&c)
}

/// Splits a line into tokens on runs of whitespace.
pub fn tokens(line: &str) -> Vec<&str> {
    line.split(is_space).filter(|t| !t.is_empty()).collect()
}

/// BLEU sufficient statistics of one sentence or a sum of sentences.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct BleuStats {
    /// Clipped n-gram matches per order (index 0: unigrams).
    pub matches: [u64; BLEU_ORDER],
    /// Hypothesis n-grams per order.
    pub totals: [u64; BLEU_ORDER],
    /// Hypothesis length in tokens.
    pub hyp_len: u64,
    /// Reference length in tokens.
    pub ref_len: u64,
}

impl BleuStats {
    /// Statistics of one hypothesis against one reference.
    pub fn sentence(hyp: &str, reference: &str) -> BleuStats {
        let h = tokens(hyp);
        let r = tokens(reference);
        let mut s = BleuStats {
            hyp_len: h.len() as u64,
            ref_len: r.len() as u64,
            ..BleuStats::default()
        };
        for n in 1..=BLEU_ORDER {
            let mut ref_counts: HashMap<&[&str], u64> = HashMap::new();
            for g in r.windows(n) {
                *ref_counts.entry(g).or_default() += 1;
            }
            let mut hyp_counts: HashMap<&[&str], u64> = HashMap::new();
            for g in h.windows(n) {
                *hyp_counts.entry(g).or_default() += 1;
            }
            for (g, c) in hyp_counts {
                s.totals[n - 1] += c;
                s.matches[n - 1] += c.min(ref_counts.get(g).copied().unwrap_or(0));
            }
        }
        s
    }

    fn add(&mut self, o: &BleuStats) {
        for n in 0..BLEU_ORDER {
            self.matches[n] += o.matches[n];
            self.totals[n] += o.totals[n];
        }
        self.hyp_len += o.hyp_len;
        self.ref_len += o.ref_len;
    }
}

/// A corpus BLEU score with its parts.
#[derive(Clone, Debug, PartialEq)]
pub struct Bleu {
    /// BLEU on the 0–100 scale.
    pub score: f64,
    /// Modified n-gram precisions on the 0–100 scale.
    pub precisions: [f64; BLEU_ORDER],
    /// The brevity penalty.
    pub brevity_penalty: f64,
    /// Hypothesis length / reference length.
    pub length_ratio: f64,
}

/// Corpus BLEU from summed statistics: the geometric mean of the four modified precisions
/// times the brevity penalty, without smoothing (a zero precision gives BLEU 0).
pub fn bleu(s: &BleuStats) -> Bleu {
    let mut precisions = [0.0; BLEU_ORDER];
    for (p, (&m, &t)) in precisions.iter_mut().zip(s.matches.iter().zip(&s.totals)) {
        if t > 0 {
            *p = 100.0 * m as f64 / t as f64;
        }
    }
    let brevity_penalty = if s.hyp_len >= s.ref_len {
        1.0
    } else if s.hyp_len == 0 {
        0.0
    } else {
        (1.0 - s.ref_len as f64 / s.hyp_len as f64).exp()
    };
    let score = if precisions.contains(&0.0) {
        0.0
    } else {
        let mean = precisions.iter().map(|p| p.ln()).sum::<f64>() / BLEU_ORDER as f64;
        brevity_penalty * mean.exp()
    };
    Bleu {
        score,
        precisions,
        brevity_penalty,
        length_ratio: if s.ref_len == 0 {
            0.0
        } else {
            s.hyp_len as f64 / s.ref_len as f64
        },
    }
}

/// chrF statistics of one sentence or a sum: per order, hypothesis n-grams, reference n-grams
/// and matches.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct ChrfStats {
    /// `[hypothesis, reference, matched]` character n-gram counts per order (index 0: 1-grams).
    pub counts: [[u64; 3]; CHRF_ORDER],
}

impl ChrfStats {
    /// Statistics of one hypothesis against one reference (whitespace removed).
    pub fn sentence(hyp: &str, reference: &str) -> ChrfStats {
        let h: Vec<char> = hyp.chars().filter(|&c| !is_space(c)).collect();
        let r: Vec<char> = reference.chars().filter(|&c| !is_space(c)).collect();
        let mut s = ChrfStats::default();
        for n in 1..=CHRF_ORDER {
            let mut ref_counts: HashMap<&[char], u64> = HashMap::new();
            for g in r.windows(n) {
                *ref_counts.entry(g).or_default() += 1;
            }
            let (mut hyp_total, mut matched) = (0, 0);
            for g in h.windows(n) {
                hyp_total += 1;
                if let Some(c) = ref_counts.get_mut(g) {
                    if *c > 0 {
                        *c -= 1;
                        matched += 1;
                    }
                }
            }
            let ref_total = r.len().saturating_sub(n - 1) as u64;
            // A hypothesis n-gram counts only where the reference has n-grams of that order.
            let hyp_total = if ref_total > 0 { hyp_total } else { 0 };
            s.counts[n - 1] = [hyp_total, ref_total, matched];
        }
        s
    }

    fn add(&mut self, o: &ChrfStats) {
        for n in 0..CHRF_ORDER {
            for k in 0..3 {
                self.counts[n][k] += o.counts[n][k];
            }
        }
    }
}

/// chrF (0–100) from summed statistics: the F-β score of the precision and recall averaged
/// over the orders that occur on both sides.
pub fn chrf(s: &ChrfStats) -> f64 {
    let (mut prec, mut rec, mut orders) = (0.0, 0.0, 0);
    for &[hyp, reference, matched] in &s.counts {
        if hyp > 0 && reference > 0 {
            prec += matched as f64 / hyp as f64;
            rec += matched as f64 / reference as f64;
            orders += 1;
        }
    }
    if orders == 0 {
        return 0.0;
    }
    prec /= orders as f64;
    rec /= orders as f64;
    let b2 = CHRF_BETA * CHRF_BETA;
    if prec + rec == 0.0 {
        return 0.0;
    }
    100.0 * (1.0 + b2) * prec * rec / (b2 * prec + rec)
}

/// Per-sentence statistics of a whole test set.
#[derive(Clone, Debug, Default)]
pub struct CorpusStats {
    bleu: Vec<BleuStats>,
    chrf: Vec<ChrfStats>,
}

impl CorpusStats {
    /// Statistics of aligned hypothesis and reference lines (the caller checks that the counts
    /// agree; extra lines on either side are ignored).
    pub fn new<H: AsRef<str>, R: AsRef<str>>(hyps: &[H], refs: &[R]) -> CorpusStats {
        let mut out = CorpusStats::default();
        for (h, r) in hyps.iter().zip(refs) {
            out.bleu.push(BleuStats::sentence(h.as_ref(), r.as_ref()));
            out.chrf.push(ChrfStats::sentence(h.as_ref(), r.as_ref()));
        }
        out
    }

    /// Number of sentences.
    pub fn len(&self) -> usize {
        self.bleu.len()
    }

    /// Whether there are no sentences.
    pub fn is_empty(&self) -> bool {
        self.bleu.is_empty()
    }

    /// BLEU statistics summed over a range of sentences.
    pub fn bleu_sum(&self, range: impl RangeBounds<usize>) -> BleuStats {
        let mut s = BleuStats::default();
        for b in &self.bleu[(range.start_bound().cloned(), range.end_bound().cloned())] {
            s.add(b);
        }
        s
    }

    /// chrF statistics summed over a range of sentences.
    pub fn chrf_sum(&self, range: impl RangeBounds<usize>) -> ChrfStats {
        let mut s = ChrfStats::default();
        for c in &self.chrf[(range.start_bound().cloned(), range.end_bound().cloned())] {
            s.add(c);
        }
        s
    }

    /// Corpus BLEU and chrF.
    pub fn scores(&self) -> (Bleu, f64) {
        (bleu(&self.bleu_sum(..)), chrf(&self.chrf_sum(..)))
    }
}

/// The outcome of paired bootstrap resampling of two systems on one test set.
#[derive(Clone, Debug, PartialEq)]
pub struct Bootstrap {
    /// Resampled test sets drawn.
    pub samples: usize,
    /// 95% interval of system A's BLEU over the samples.
    pub bleu_a: (f64, f64),
    /// 95% interval of system B's BLEU.
    pub bleu_b: (f64, f64),
    /// 95% interval of B − A in BLEU.
    pub bleu_delta: (f64, f64),
    /// Share of samples where B's BLEU is not above A's: a one-sided p-value for "B is better".
    pub bleu_p: f64,
    /// 95% interval of B − A in chrF.
    pub chrf_delta: (f64, f64),
    /// Share of samples where B's chrF is not above A's.
    pub chrf_p: f64,
}

/// Paired bootstrap resampling (Koehn 2004): draws `samples` test sets of the same size with
/// replacement, the same sentences for both systems, and scores both on each.
///
/// ```
/// use baler::evaluate::{CorpusStats, paired_bootstrap};
/// let refs = ["a b c d", "e f g h", "i j k l"];
/// let a = CorpusStats::new(&["a b c d", "e f g x", "i j x l"], &refs);
/// let b = CorpusStats::new(&refs, &refs);
/// let r = paired_bootstrap(&a, &b, 200, 1);
/// assert!(r.bleu_delta.0 >= 0.0 && r.bleu_p < 0.5);
/// ```
pub fn paired_bootstrap(a: &CorpusStats, b: &CorpusStats, samples: usize, seed: u64) -> Bootstrap {
    let n = a.len().min(b.len());
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed);
    let (mut ba, mut bb, mut bd, mut cd) = (vec![], vec![], vec![], vec![]);
    let (mut bleu_not_better, mut chrf_not_better) = (0usize, 0usize);
    for _ in 0..samples.max(1) {
        let (mut sa, mut sb) = (BleuStats::default(), BleuStats::default());
        let (mut ca, mut cb) = (ChrfStats::default(), ChrfStats::default());
        for _ in 0..n {
            let i = (rng.next_u64() % n as u64) as usize;
            sa.add(&a.bleu[i]);
            sb.add(&b.bleu[i]);
            ca.add(&a.chrf[i]);
            cb.add(&b.chrf[i]);
        }
        let (x, y) = (bleu(&sa).score, bleu(&sb).score);
        let (u, v) = (chrf(&ca), chrf(&cb));
        ba.push(x);
        bb.push(y);
        bd.push(y - x);
        cd.push(v - u);
        bleu_not_better += usize::from(y <= x);
        chrf_not_better += usize::from(v <= u);
    }
    let total = ba.len() as f64;
    Bootstrap {
        samples: ba.len(),
        bleu_a: interval(&mut ba),
        bleu_b: interval(&mut bb),
        bleu_delta: interval(&mut bd),
        bleu_p: bleu_not_better as f64 / total,
        chrf_delta: interval(&mut cd),
        chrf_p: chrf_not_better as f64 / total,
    }
}

/// The central 95% of `values` (2.5th and 97.5th percentiles, nearest rank).
fn interval(values: &mut [f64]) -> (f64, f64) {
    values.sort_by(f64::total_cmp);
    let at = |q: f64| values[((q * values.len() as f64) as usize).min(values.len() - 1)];
    (at(0.025), at(0.975))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn perfect_match_is_100() {
        let s = CorpusStats::new(&["a b c d e"], &["a b c d e"]);
        let (b, c) = s.scores();
        assert!((b.score - 100.0).abs() < 1e-9);
        assert!((c - 100.0).abs() < 1e-9);
    }

    #[test]
    fn brevity_penalty_follows_the_definition() {
        // 4 hypothesis tokens against 8 reference tokens: BP = exp(1 - 8/4) (Papineni et al.).
        let s = BleuStats::sentence("a b c d", "a b c d e f g h");
        assert!((bleu(&s).brevity_penalty - (-1.0f64).exp()).abs() < 1e-12);
        assert!((bleu(&s).score - 100.0 * (-1.0f64).exp()).abs() < 1e-9);
    }

    #[test]
    fn clipping_limits_repeated_words() {
        // Papineni et al.'s example of clipping: "the" 7 times against a reference with 2.
        let s = BleuStats::sentence("the the the the the the the", "the cat is on the mat");
        assert_eq!((s.matches[0], s.totals[0]), (2, 7));
    }
}
