//! Relative-entropy pruning: how much probability is lost when a pair is left to be composed
//! from shorter pairs of the same table.
//!
//! After removing a pair `(s, t)`, a decoder can still produce `t` from `s` by translating
//! pieces of `s` with shorter phrase pairs. This module models that as follows:
//!
//! * A *composition* of `(s, t)` splits the source tokens into `m ≥ 2` consecutive non-empty
//!   spans `s_1 … s_m` and the target tokens into `m` consecutive non-empty spans `t_1 … t_m`,
//!   in the same order (monotone: `s_i` translates to `t_i`), such that every `(s_i, t_i)` is
//!   in the table. Reordered or unaligned pieces are not considered, so the estimate of what
//!   survives a removal is conservative (pairs that need reordering are never explained).
//! * Its probability is the product `Π p(t_i | s_i)`; `p'(t | s)` is the **best** (largest)
//!   such product over all compositions (the one a decoder would find), found by dynamic
//!   programming over prefix pairs in `O(|s|² |t|²)` lookups. With no composition, `p' = 0`.
//! * The score is the pair's contribution to the relative entropy between the conditional
//!   distributions with and without it: `D = p(t|s) · (ln p(t|s) − ln p'(t|s))`, +∞ when
//!   `p' = 0` (the pair cannot be explained), and negative when the composition is more likely
//!   than the pair itself. The filter keeps a pair when `D ≥ threshold`.
//! * All pairs reaching the filter are scored against the table as it reached the filter
//!   (before any of them is removed), so the result does not depend on the order of pairs.
//!
//! The probabilities are the table's `p_t_given_s` column. The filter holds the source, target
//! and `p_t_given_s` of every pair that reaches it in a compact index (about 40 bytes per pair
//! plus its target's text), which must fit in half of the memory budget; the pairs themselves
//! wait in a temporary file once they outgrow a quarter of it.

/// `p'(t|s)`: the best product of `p(t_i|s_i)` over monotone compositions of `(source, target)`
/// into at least two shorter pairs for which `lookup` has a probability (see the module docs).
///
/// # Examples
/// ```
/// use baler::prune::entropy::composed_probability;
/// let table = [("el", "the", 0.8), ("barco", "boat", 0.5), ("barco", "ship", 0.4)];
/// let lookup = |s: &str, t: &str| table.iter().find(|e| e.0 == s && e.1 == t).map(|e| e.2);
/// assert!((composed_probability("el barco", "the boat", lookup) - 0.4).abs() < 1e-15);
/// assert_eq!(composed_probability("el barco", "boat", lookup), 0.0);
/// ```
pub fn composed_probability<F>(source: &str, target: &str, lookup: F) -> f64
where
    F: Fn(&str, &str) -> Option<f64>,
{
    let lookup = &lookup;
    compose(source, target, |s| Some(move |t: &str| lookup(s, t)))
}

/// The dynamic programme behind [`composed_probability`]; `options_of(s)` looks a source span
/// up once and returns a lookup of its targets.
fn compose<'s, S, O>(source: &'s str, target: &str, options_of: S) -> f64
where
    S: Fn(&'s str) -> Option<O>,
    O: Fn(&str) -> Option<f64>,
{
    let s = token_bounds(source);
    let t = token_bounds(target);
    let (ns, nt) = (s.len(), t.len());
    if ns < 2 || nt < 2 {
        return 0.0;
    }
    // best[i][j]: best product covering source tokens ..i and target tokens ..j
    let width = nt + 1;
    let mut best = vec![0.0f64; (ns + 1) * width];
    best[0] = 1.0;
    for i in 0..ns {
        if (0..nt).all(|j| best[i * width + j] == 0.0) {
            continue;
        }
        for i2 in i + 1..=ns {
            let Some(options) = options_of(&source[s[i].0..s[i2 - 1].1]) else {
                continue;
            };
            for j in 0..nt {
                let here = best[i * width + j];
                if here == 0.0 {
                    continue;
                }
                for j2 in j + 1..=nt {
                    if i == 0 && j == 0 && i2 == ns && j2 == nt {
                        continue; // the pair itself
                    }
                    if let Some(p) = options(&target[t[j].0..t[j2 - 1].1]) {
                        let cell = &mut best[i2 * width + j2];
                        *cell = cell.max(here * p);
                    }
                }
            }
        }
    }
    best[ns * width + nt]
}

/// `p · (ln p − ln p')`, +∞ when `p' = 0` and `p > 0`, 0 when `p = 0`.
///
/// # Examples
/// ```
/// let d = baler::prune::entropy::divergence(0.6, 0.56);
/// assert!((d - 0.6 * (0.6f64 / 0.56).ln()).abs() < 1e-15);
/// assert_eq!(baler::prune::entropy::divergence(0.3, 0.0), f64::INFINITY);
/// ```
pub fn divergence(p: f64, composed: f64) -> f64 {
    if p <= 0.0 {
        0.0
    } else if composed <= 0.0 {
        f64::INFINITY
    } else {
        p * (p.ln() - composed.ln())
    }
}

fn token_bounds(phrase: &str) -> Vec<(usize, usize)> {
    let mut bounds = Vec::new();
    let mut start = 0;
    for (i, b) in phrase.bytes().enumerate() {
        if b == b' ' {
            bounds.push((start, i));
            start = i + 1;
        }
    }
    bounds.push((start, phrase.len()));
    bounds
}

/// The probabilities of every pair reaching the filter, by source then target, compactly:
/// the targets of all pairs in one text arena, each source's options a sorted run of
/// `(target offset, length, probability)` entries found by binary search.
#[derive(Default)]
pub(crate) struct ProbabilityIndex {
    sources: rustc_hash::FxHashMap<Box<str>, (usize, usize)>,
    entries: Vec<(u64, u32, f64)>,
    targets: String,
    bytes: usize,
}

impl ProbabilityIndex {
    /// Adds the options of one source (each source once).
    pub(crate) fn insert_group<'a>(
        &mut self,
        source: &str,
        options: impl Iterator<Item = (&'a str, f64)>,
    ) {
        let start = self.entries.len();
        for (target, p) in options {
            self.entries
                .push((self.targets.len() as u64, target.len() as u32, p));
            self.targets.push_str(target);
        }
        let targets = &self.targets;
        let text = |e: &(u64, u32, f64)| &targets[e.0 as usize..e.0 as usize + e.1 as usize];
        self.entries[start..].sort_unstable_by(|a, b| text(a).cmp(text(b)));
        self.bytes += source.len() + 16; // the key's text and its allocation
        self.sources
            .insert(source.into(), (start, self.entries.len()));
    }

    /// Bytes held, counting the capacity of every buffer.
    pub(crate) fn bytes(&self) -> usize {
        self.bytes
            + self.targets.capacity()
            + self.entries.capacity() * std::mem::size_of::<(u64, u32, f64)>()
            + self.sources.capacity() * (std::mem::size_of::<(Box<str>, (usize, usize))>() + 1)
    }

    fn options(&self, source: &str) -> Option<&[(u64, u32, f64)]> {
        self.sources.get(source).map(|&(a, b)| &self.entries[a..b])
    }

    fn probability(&self, options: &[(u64, u32, f64)], target: &str) -> Option<f64> {
        let text = |e: &(u64, u32, f64)| &self.targets[e.0 as usize..e.0 as usize + e.1 as usize];
        options
            .binary_search_by(|e| text(e).cmp(target))
            .ok()
            .map(|i| options[i].2)
    }

    pub(crate) fn score(&self, source: &str, target: &str, p: f64) -> f64 {
        let composed = compose(source, target, |s| {
            self.options(s)
                .map(|options| move |t: &str| self.probability(options, t))
        });
        divergence(p, composed)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bounds_of_tokens() {
        assert_eq!(token_bounds("a bc d"), [(0, 1), (2, 4), (5, 6)]);
        assert_eq!(token_bounds("x"), [(0, 1)]);
    }

    #[test]
    fn best_of_several_compositions() {
        // "a b c" -> "x y z": via (a,x)(b c,y z) = 0.5·0.4 = 0.2, or (a,x)(b,y)(c,z) = 0.5·0.6·0.5
        // = 0.15, or (a b,x y)(c,z) = 0.3·0.5 = 0.15: the best is 0.2
        let entries = [
            ("a", "x", 0.5),
            ("b c", "y z", 0.4),
            ("b", "y", 0.6),
            ("c", "z", 0.5),
            ("a b", "x y", 0.3),
            ("a b c", "x y z", 0.9),
        ];
        let lookup = |s: &str, t: &str| entries.iter().find(|e| e.0 == s && e.1 == t).map(|e| e.2);
        assert!((composed_probability("a b c", "x y z", lookup) - 0.2).abs() < 1e-15);
    }
}
