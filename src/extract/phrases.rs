//! Phrase pairs consistent with a word alignment, found in time proportional to the output.
//!
//! A source span and a target span form a consistent pair when at least one link lies inside
//! the box they span and no link leaves it in either direction: every link from a word inside
//! the source span ends inside the target span, and every link from a word inside the target
//! span starts inside the source span. Unaligned words at the edges of a target span may be
//! added to it (the common practice); unaligned words at the edges of a source span are covered
//! by enumerating every source span. With [`PhraseLimits::unaligned_edges`] off, all four edge
//! words must be aligned.

/// A phrase pair within one sentence pair: half-open token ranges `start..end`.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct SpanPair {
    /// First source token of the phrase.
    pub source_start: usize,
    /// One past the last source token.
    pub source_end: usize,
    /// First target token of the phrase.
    pub target_start: usize,
    /// One past the last target token.
    pub target_end: usize,
}

/// Which phrase pairs to extract.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct PhraseLimits {
    /// Longest phrase, in tokens, on either side.
    pub max_length: usize,
    /// Whether unaligned words at the span edges extend a pair.
    pub unaligned_edges: bool,
}

impl Default for PhraseLimits {
    fn default() -> Self {
        PhraseLimits {
            max_length: 7,
            unaligned_edges: true,
        }
    }
}

const NONE: usize = usize::MAX;

/// Reusable scratch space for [`PhraseFinder::find`], so that extraction allocates nothing per
/// sentence.
///
/// # Examples
/// ```
/// use baler::extract::phrases::{PhraseFinder, PhraseLimits};
/// // "das Haus" / "the house", aligned monotonically.
/// let mut finder = PhraseFinder::default();
/// let mut found = Vec::new();
/// finder.find(2, 2, &[(0, 0), (1, 1)], PhraseLimits::default(), |p| {
///     found.push((p.source_start, p.source_end, p.target_start, p.target_end))
/// });
/// found.sort();
/// assert_eq!(found, [(0, 1, 0, 1), (0, 2, 0, 2), (1, 2, 1, 2)]);
/// ```
#[derive(Default, Debug)]
pub struct PhraseFinder {
    // For each source word, the lowest and highest linked target word (NONE if unaligned).
    source_low: Vec<usize>,
    source_high: Vec<usize>,
    // For each target word, the lowest and highest linked source word.
    target_low: Vec<usize>,
    target_high: Vec<usize>,
}

impl PhraseFinder {
    /// Calls `emit` once for every consistent phrase pair of a sentence pair with
    /// `source_len` and `target_len` tokens and the given `(source, target)` links, which must
    /// be in range. Duplicate links are harmless.
    ///
    /// Work is O(source_len × max_length²) plus the number of pairs emitted: source spans are
    /// grown one word at a time while the target projection is kept incrementally, and a span
    /// whose projection is already wider than `max_length` stops the growth.
    pub fn find(
        &mut self,
        source_len: usize,
        target_len: usize,
        links: &[(u16, u16)],
        limits: PhraseLimits,
        mut emit: impl FnMut(SpanPair),
    ) {
        let max = limits.max_length;
        if max == 0 {
            return;
        }
        reset(&mut self.source_low, source_len, NONE);
        reset(&mut self.source_high, source_len, NONE);
        reset(&mut self.target_low, target_len, NONE);
        reset(&mut self.target_high, target_len, NONE);
        for &(i, j) in links {
            let (i, j) = (usize::from(i), usize::from(j));
            widen(&mut self.source_low[i], &mut self.source_high[i], j);
            widen(&mut self.target_low[j], &mut self.target_high[j], i);
        }
        let source_aligned = |i: usize| self.source_low[i] != NONE;
        let target_aligned = |j: usize| self.target_low[j] != NONE;
        for s1 in 0..source_len {
            if !limits.unaligned_edges && !source_aligned(s1) {
                continue;
            }
            let mut t_low = NONE;
            let mut t_high = 0;
            'grow: for s2 in s1..source_len.min(s1 + max) {
                if source_aligned(s2) {
                    t_low = t_low.min(self.source_low[s2]);
                    t_high = t_high.max(self.source_high[s2]);
                } else if !limits.unaligned_edges {
                    continue;
                }
                if t_low == NONE {
                    continue; // no link inside the box yet
                }
                if t_high - t_low + 1 > max {
                    break; // the projection only widens as the span grows
                }
                for j in t_low..=t_high {
                    if self.target_low[j] == NONE {
                        continue;
                    }
                    if self.target_low[j] < s1 {
                        break 'grow; // a link leaves to the left: no longer span can fix it
                    }
                    if self.target_high[j] > s2 {
                        continue 'grow; // a link leaves to the right: a longer span may fix it
                    }
                }
                if !limits.unaligned_edges {
                    emit(SpanPair {
                        source_start: s1,
                        source_end: s2 + 1,
                        target_start: t_low,
                        target_end: t_high + 1,
                    });
                    continue;
                }
                // Extend over unaligned target words on both edges.
                let mut t1 = t_low;
                loop {
                    let mut t2 = t_high;
                    loop {
                        emit(SpanPair {
                            source_start: s1,
                            source_end: s2 + 1,
                            target_start: t1,
                            target_end: t2 + 1,
                        });
                        t2 += 1;
                        if t2 >= target_len || target_aligned(t2) || t2 - t1 + 1 > max {
                            break;
                        }
                    }
                    if t1 == 0 || target_aligned(t1 - 1) || t_high - (t1 - 1) + 1 > max {
                        break;
                    }
                    t1 -= 1;
                }
            }
        }
    }
}

fn reset(v: &mut Vec<usize>, len: usize, value: usize) {
    v.clear();
    v.resize(len, value);
}

fn widen(low: &mut usize, high: &mut usize, x: usize) {
    if *low == NONE {
        *low = x;
        *high = x;
    } else {
        *low = (*low).min(x);
        *high = (*high).max(x);
    }
}

/// Appends the links inside `pair`, relative to its corner, sorted and deduplicated, as
/// space-separated `i-j` text.
///
/// # Examples
/// ```
/// use baler::extract::phrases::{internal_alignment, SpanPair};
/// let pair = SpanPair { source_start: 1, source_end: 3, target_start: 0, target_end: 2 };
/// let mut text = String::new();
/// internal_alignment(&[(2, 0), (1, 1), (0, 0), (2, 0)], pair, &mut text);
/// assert_eq!(text, "0-1 1-0");
/// ```
pub fn internal_alignment(links: &[(u16, u16)], pair: SpanPair, out: &mut String) {
    let mut sorted = links.to_vec();
    sorted.sort_unstable();
    sorted.dedup();
    write_inside(&sorted, pair, out);
}

/// [`internal_alignment`] for links already sorted and deduplicated.
pub(crate) fn write_inside(sorted_links: &[(u16, u16)], pair: SpanPair, out: &mut String) {
    let mut first = true;
    for &(i, j) in sorted_links {
        let (i, j) = (usize::from(i), usize::from(j));
        if i < pair.source_start {
            continue;
        }
        if i >= pair.source_end {
            break;
        }
        if (pair.target_start..pair.target_end).contains(&j) {
            if !first {
                out.push(' ');
            }
            first = false;
            push_number(out, i - pair.source_start);
            out.push('-');
            push_number(out, j - pair.target_start);
        }
    }
}

fn push_number(out: &mut String, n: usize) {
    if n < 10 {
        out.push(char::from(b'0' + n as u8));
    } else {
        use std::fmt::Write;
        let _ = write!(out, "{n}");
    }
}
