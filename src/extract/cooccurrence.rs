//! The one counter of sentence-level co-occurrences: `cooc`, `df_source` and `df_target`.
//!
//! **Definition** (extraction in memory, its map/reduce steps, and `prune --source/--target`
//! all count by it): the sentence pairs counted are those [`super::corpus::kept`] keeps (both
//! sides have a token, neither is longer than the maximum sentence length), and their number
//! is N, the table's `sentence_pairs`; tokens are as [`super::corpus::tokenize`] splits them.
//! A phrase occurs in a sentence when its tokens appear there consecutively. `df_source` of a
//! source phrase is the number of sentence pairs whose source side contains it (once per
//! sentence pair, however often it occurs there), `df_target` likewise on the target side, and
//! `cooc` of a pair the number of sentence pairs whose source side contains its source and
//! whose target side contains its target, wherever they are.
//!
//! Each caller finds its table's phrases in a sentence its own way (the phrase index's fst,
//! the prefix tree of the in-memory path, a map of phrases) and hands their ids to
//! [`Cooccurrence::add_sentence`], which does the counting.

use std::ops::Range;
use std::sync::atomic::{AtomicU32, Ordering};

/// The counts of a set of phrase pairs: sources numbered `0..`, targets `0..`, each source's
/// options (the targets it is paired with) a sorted list; pairs numbered by source, then by
/// target id. Counting may run on several threads at once.
pub(crate) struct Cooccurrence {
    /// `offsets[s]..offsets[s + 1]`: source `s`'s pairs, in `targets` and in `cooc`.
    offsets: Vec<usize>,
    targets: Vec<u32>,
    counts: Counts,
}

fn zeros(n: usize) -> Vec<AtomicU32> {
    (0..n).map(|_| AtomicU32::new(0)).collect()
}

impl Cooccurrence {
    /// Counts for the pairs whose targets are `targets` (source `s`'s, ascending, at
    /// `offsets[s]..offsets[s + 1]`) among `n_targets` targets.
    pub(crate) fn new(offsets: Vec<usize>, targets: Vec<u32>, n_targets: usize) -> Cooccurrence {
        debug_assert!(offsets.last() == Some(&targets.len()));
        debug_assert!(
            (0..offsets.len() - 1).all(|s| targets[offsets[s]..offsets[s + 1]]
                .windows(2)
                .all(|w| w[0] < w[1]))
        );
        Cooccurrence {
            counts: Counts {
                cooc: zeros(targets.len()),
                df_source: zeros(offsets.len() - 1),
                df_target: zeros(n_targets),
            },
            offsets,
            targets,
        }
    }

    /// Bytes taken per source and per pair beside the target counts.
    pub(crate) const BYTES_PER_SOURCE: usize = 12;
    /// See [`Cooccurrence::BYTES_PER_SOURCE`].
    pub(crate) const BYTES_PER_PAIR: usize = 8;

    /// Counts one sentence pair, given the ids of the sources and targets found in it (in any
    /// order, with repeats: both are sorted and deduplicated here).
    pub(crate) fn add_sentence(&self, sources: &mut Vec<u32>, targets: &mut Vec<u32>) {
        targets.sort_unstable();
        targets.dedup();
        for &t in targets.iter() {
            self.counts.df_target[t as usize].fetch_add(1, Ordering::Relaxed);
        }
        sources.sort_unstable();
        sources.dedup();
        for &s in sources.iter() {
            self.counts.df_source[s as usize].fetch_add(1, Ordering::Relaxed);
            let pairs = self.pairs(s as usize);
            let options = &self.targets[pairs.clone()];
            // Binary search from the smaller side.
            if options.len() <= targets.len() {
                for (k, t) in options.iter().enumerate() {
                    if targets.binary_search(t).is_ok() {
                        self.counts.cooc[pairs.start + k].fetch_add(1, Ordering::Relaxed);
                    }
                }
            } else {
                for t in targets.iter() {
                    if let Ok(k) = options.binary_search(t) {
                        self.counts.cooc[pairs.start + k].fetch_add(1, Ordering::Relaxed);
                    }
                }
            }
        }
    }

    /// The pair numbers of source `s`.
    pub(crate) fn pairs(&self, s: usize) -> Range<usize> {
        self.offsets[s]..self.offsets[s + 1]
    }

    /// The target id of pair `p`.
    pub(crate) fn target(&self, p: usize) -> u32 {
        self.targets[p]
    }

    /// Number of sources.
    pub(crate) fn sources(&self) -> usize {
        self.offsets.len() - 1
    }

    /// The counts so far.
    pub(crate) fn counts(&self) -> &Counts {
        &self.counts
    }

    /// The counts alone, the option lists freed (for a caller that keeps the counts while it
    /// writes its table).
    pub(crate) fn into_counts(self) -> Counts {
        self.counts
    }
}

/// The counts of a [`Cooccurrence`].
pub(crate) struct Counts {
    cooc: Vec<AtomicU32>,
    df_source: Vec<AtomicU32>,
    df_target: Vec<AtomicU32>,
}

impl Counts {
    /// `cooc` of pair `p`.
    pub(crate) fn cooc(&self, p: usize) -> u32 {
        self.cooc[p].load(Ordering::Relaxed)
    }

    /// `df_source` of source `s`.
    pub(crate) fn df_source(&self, s: usize) -> u32 {
        self.df_source[s].load(Ordering::Relaxed)
    }

    /// Replaces every `df_target` (by target id) with one counted elsewhere.
    pub(crate) fn set_df_target(&mut self, df: &[u32]) {
        debug_assert_eq!(df.len(), self.df_target.len());
        for (a, &b) in self.df_target.iter_mut().zip(df) {
            *a.get_mut() = b;
        }
    }

    /// `df_target` of target `t`.
    pub(crate) fn df_target(&self, t: usize) -> u32 {
        self.df_target[t].load(Ordering::Relaxed)
    }
}

#[cfg(test)]
mod tests {
    use super::Cooccurrence;

    #[test]
    fn counts_each_sentence_pair_once() {
        // Sources 0 and 1; source 0 pairs with targets 0 and 2, source 1 with target 1.
        let counts = Cooccurrence::new(vec![0, 2, 3], vec![0, 2, 1], 3);
        // Source 0 twice, targets 2 and 1: pair (0, 2) co-occurs once.
        counts.add_sentence(&mut vec![0, 0], &mut vec![2, 1, 2]);
        // Source 1, target 0 and 1.
        counts.add_sentence(&mut vec![1], &mut vec![0, 1]);
        let counts = counts.into_counts();
        assert_eq!((counts.df_source(0), counts.df_source(1)), (1, 1));
        let df_target: Vec<u32> = (0..3).map(|t| counts.df_target(t)).collect();
        assert_eq!(df_target, [1, 2, 1]);
        let cooc: Vec<u32> = (0..3).map(|p| counts.cooc(p)).collect();
        assert_eq!(cooc, [0, 1, 1]);
    }
}
