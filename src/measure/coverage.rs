//! How much of a held-out text a table covers, and how much of its reference it can reach.

use std::collections::{HashMap, HashSet};

use serde::Serialize;

use super::table::MeasuredTable;
use crate::error::Result;

/// Spans of one length in the test text, and how many of them the table has as sources.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct SpanShare {
    /// Span length in tokens.
    pub length: usize,
    /// Spans of this length in the test text (occurrences, not distinct).
    pub spans: u64,
    /// How many of them are source phrases of the table.
    pub found: u64,
    /// `found / spans` (0 when there are none).
    pub share: f64,
}

/// Coverage of a tokenized test text by the source side of a table.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Coverage {
    /// Sentences (lines) read.
    pub sentences: u64,
    /// Tokens (separated by white space).
    pub tokens: u64,
    /// Tokens inside at least one span the table has.
    pub tokens_covered: u64,
    /// `tokens_covered / tokens`.
    pub token_coverage: f64,
    /// Per span length 1..=max: spans of the text found as source phrases.
    pub spans_by_length: Vec<SpanShare>,
    /// Segments of the greedy longest-match segmentation (see [`coverage`]).
    pub segments: u64,
    /// `tokens / segments`.
    pub mean_segment_length: f64,
}

/// Reference n-grams of one order, and how many of them the table can produce.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct OrderShare {
    /// n.
    pub order: usize,
    /// n-grams in the reference (occurrences).
    pub ngrams: u64,
    /// How many are reachable (see [`reachability`]).
    pub reachable: u64,
    /// `reachable / ngrams`.
    pub share: f64,
}

/// Reachability of a reference translation (see [`reachability`]).
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Reachability {
    /// Orders 1..=4.
    pub by_order: Vec<OrderShare>,
    /// Reachable over all reference n-grams of orders 1..=4 together.
    pub share: f64,
}

fn ratio(a: u64, b: u64) -> f64 {
    if b == 0 {
        0.0
    } else {
        a as f64 / b as f64
    }
}

/// Everything one pass over the test text gives: coverage, the occurrences of the table's
/// source phrases in it, and (with a reference) reachability.
pub(crate) struct TestPass {
    pub coverage: Coverage,
    pub occurrences: HashMap<String, u64>,
    pub reachability: Option<Reachability>,
}

/// The highest reference n-gram order measured.
pub const MAX_ORDER: usize = 4;

pub(crate) fn test_pass(
    table: &MeasuredTable,
    test: &[Vec<String>],
    reference: Option<&[Vec<String>]>,
    max_len: usize,
    count_occurrences: bool,
) -> Result<TestPass> {
    let mut tokens_total = 0u64;
    let mut covered_total = 0u64;
    let mut segments = 0u64;
    let mut spans = vec![0u64; max_len];
    let mut found = vec![0u64; max_len];
    let mut occurrences: HashMap<String, u64> = HashMap::new();
    let mut ngrams = [0u64; MAX_ORDER];
    let mut reachable = [0u64; MAX_ORDER];
    for (i, sentence) in test.iter().enumerate() {
        let tokens: Vec<&str> = sentence.iter().map(String::as_str).collect();
        let n = tokens.len();
        tokens_total += n as u64;
        for (len, count) in spans.iter_mut().enumerate() {
            *count += (n + 1).saturating_sub(len + 1) as u64;
        }
        let hits = table.spans(&tokens, max_len, reference.is_some())?;
        let mut covered = vec![false; n];
        let mut longest = vec![0usize; n];
        for h in &hits {
            found[h.end - h.start - 1] += 1;
            covered[h.start..h.end].iter_mut().for_each(|c| *c = true);
            longest[h.start] = longest[h.start].max(h.end - h.start);
            if count_occurrences {
                *occurrences
                    .entry(tokens[h.start..h.end].join(" "))
                    .or_insert(0) += 1;
            }
        }
        covered_total += covered.iter().filter(|&&c| c).count() as u64;
        let mut at = 0;
        while at < n {
            at += longest[at].max(1);
            segments += 1;
        }
        if let Some(reference) = reference {
            let mut producible: HashSet<&str> = HashSet::new();
            let mut pieces: Vec<&str> = Vec::new();
            for h in &hits {
                for target in &h.targets {
                    ngram_slices(target, &mut pieces);
                    producible.extend(pieces.iter().copied());
                }
            }
            let words: Vec<&str> = reference[i].iter().map(String::as_str).collect();
            let mut key = String::new();
            for order in 1..=MAX_ORDER {
                for window in words.windows(order) {
                    ngrams[order - 1] += 1;
                    key.clear();
                    key.push_str(&window.join(" "));
                    if producible.contains(key.as_str()) {
                        reachable[order - 1] += 1;
                    }
                }
            }
        }
    }
    let coverage = Coverage {
        sentences: test.len() as u64,
        tokens: tokens_total,
        tokens_covered: covered_total,
        token_coverage: ratio(covered_total, tokens_total),
        spans_by_length: (0..max_len)
            .map(|l| SpanShare {
                length: l + 1,
                spans: spans[l],
                found: found[l],
                share: ratio(found[l], spans[l]),
            })
            .collect(),
        segments,
        mean_segment_length: ratio(tokens_total, segments),
    };
    let reachability = reference.map(|_| Reachability {
        by_order: (0..MAX_ORDER)
            .map(|o| OrderShare {
                order: o + 1,
                ngrams: ngrams[o],
                reachable: reachable[o],
                share: ratio(reachable[o], ngrams[o]),
            })
            .collect(),
        share: ratio(reachable.iter().sum(), ngrams.iter().sum()),
    });
    Ok(TestPass {
        coverage,
        occurrences,
        reachability,
    })
}

/// Every contiguous run of 1..=[`MAX_ORDER`] words of `phrase` (words separated by single
/// spaces, as in tables), as slices of it.
fn ngram_slices<'a>(phrase: &'a str, out: &mut Vec<&'a str>) {
    out.clear();
    let mut starts = vec![0usize];
    let mut ends = Vec::new();
    for (i, b) in phrase.bytes().enumerate() {
        if b == b' ' {
            ends.push(i);
            starts.push(i + 1);
        }
    }
    ends.push(phrase.len());
    for s in 0..starts.len() {
        for e in s..(s + MAX_ORDER).min(ends.len()) {
            out.push(&phrase[starts[s]..ends[e]]);
        }
    }
}

/// Coverage of `test` (tokenized sentences) by `table`'s source phrases of at most `max_len`
/// tokens.
///
/// * A token is covered when some span containing it is a source phrase of the table.
/// * Spans of each length are counted as occurrences in the text (a sentence of n tokens has
///   n − l + 1 spans of length l).
/// * The greedy longest-match segmentation goes left to right and at each position takes the
///   longest span starting there that the table has, or a single token when it has none (an
///   uncovered token is a segment of length 1); the mean segment length is tokens over
///   segments.
///
/// # Examples
/// ```
/// use baler::measure::{coverage, MeasuredTable};
/// let tsv = "source\ttarget\tp_t_given_s\nla\tthe\t1\nla llave\tthe key\t1\nroja\tred\t1\n";
/// let table = MeasuredTable::from_tsv(tsv.as_bytes(), "t.tsv", "p_t_given_s")?;
/// let test = vec![vec!["la".to_string(), "llave".into(), "roja".into(), "nueva".into()]];
/// let c = coverage(&table, &test, 2)?;
/// assert_eq!((c.tokens, c.tokens_covered), (4, 3));
/// assert_eq!(c.segments, 3); // [la llave] [roja] [nueva]
/// assert_eq!(c.spans_by_length[0].found, 2); // "la", "roja" of 4 unigrams
/// assert_eq!(c.spans_by_length[1].found, 1); // "la llave" of 3 bigrams
/// # Ok::<(), baler::Error>(())
/// ```
pub fn coverage(table: &MeasuredTable, test: &[Vec<String>], max_len: usize) -> Result<Coverage> {
    Ok(test_pass(table, test, None, max_len, false)?.coverage)
}

/// The share of reference n-grams (orders 1..=4) that some test span can produce as a target:
/// an n-gram of reference sentence i is reachable when it is a contiguous run of words of a
/// target of some span of test sentence i that the table has (spans of at most `max_len`
/// tokens). N-grams are counted as occurrences. It bounds from above what a decoder using the
/// table could match of the reference, ignoring reordering and how phrases join.
///
/// # Examples
/// ```
/// use baler::measure::{reachability, MeasuredTable};
/// let tsv = "source\ttarget\tp_t_given_s\nla llave\tthe key\t1\nroja\tred\t1\n";
/// let table = MeasuredTable::from_tsv(tsv.as_bytes(), "t.tsv", "p_t_given_s")?;
/// let words = |s: &str| s.split(' ').map(String::from).collect::<Vec<_>>();
/// let r = reachability(&table, &[words("la llave roja")], &[words("the red key")], 7)?;
/// // unigrams: the, red, key all reachable; bigrams: "the red", "red key" are not
/// assert_eq!((r.by_order[0].reachable, r.by_order[0].ngrams), (3, 3));
/// assert_eq!((r.by_order[1].reachable, r.by_order[1].ngrams), (0, 2));
/// # Ok::<(), baler::Error>(())
/// ```
pub fn reachability(
    table: &MeasuredTable,
    test: &[Vec<String>],
    reference: &[Vec<String>],
    max_len: usize,
) -> Result<Reachability> {
    let pass = test_pass(table, test, Some(reference), max_len, false)?;
    Ok(pass.reachability.expect("a reference was given"))
}
