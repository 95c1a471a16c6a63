//! Sentence-level counts for the significance test, computed from a sentence-aligned corpus.
//!
//! `baler prune --source --target` finds a table's phrases in each sentence pair here and
//! counts them with the one counter extraction uses (`extract::cooccurrence`, where
//! the definition of the counts and of N is documented).

use std::collections::HashMap;
use std::io::BufRead;

use crate::error::{Error, Result};
use crate::extract::cooccurrence::Cooccurrence;
use crate::extract::corpus::{kept, tokenize, Kept};
use crate::files;

/// `cooc`, `df_source`, `df_target` of a set of phrase pairs, and N, counted over a corpus.
///
/// Sentences are tokenized and kept as extraction does (tokens separated by spaces and tabs;
/// a sentence pair counts when both sides have a token and, given a maximum sentence length,
/// neither is longer), so N is the extraction's `sentence_pairs`. A phrase "occurs" in a
/// sentence when its tokens appear there consecutively. Each sentence pair counts at most once per phrase (document
/// frequency), and `cooc` counts the sentence pairs whose source side contains the source
/// phrase and whose target side contains the target phrase, wherever they are.
///
/// # Examples
/// ```
/// use baler::prune::SentenceCounts;
/// let source = "el faro\nel faro y el puerto\n\nel puerto\n";
/// let target = "the lighthouse\nthe lighthouse and the port\n\nthe port\n";
/// let pairs = [("el faro", "the lighthouse"), ("el", "the port")];
/// let counts = SentenceCounts::count(pairs, source.as_bytes(), "es.txt",
///                                    target.as_bytes(), "en.txt").unwrap();
/// assert_eq!(counts.sentence_pairs(), 3); // the empty line is not a sentence pair
/// assert_eq!(counts.get("el faro", "the lighthouse"), Some((2, 2, 2)));
/// assert_eq!(counts.get("el", "the port"), Some((2, 3, 2)));
/// ```
pub struct SentenceCounts {
    sources: HashMap<String, u32>,
    targets: HashMap<String, u32>,
    /// Each pair's number in `counts`.
    pairs: HashMap<(u32, u32), usize>,
    counts: Cooccurrence,
    sentence_pairs: u64,
}

impl SentenceCounts {
    /// Counts the `pairs` over the line-aligned corpus `source` / `target`.
    ///
    /// # Errors
    /// An input error when a side cannot be read or the two sides differ in length.
    pub fn count<'a, P, S, T>(
        pairs: P,
        source: S,
        source_name: &str,
        target: T,
        target_name: &str,
    ) -> Result<SentenceCounts>
    where
        P: IntoIterator<Item = (&'a str, &'a str)>,
        S: BufRead,
        T: BufRead,
    {
        Self::count_up_to(pairs, source, source_name, target, target_name, usize::MAX)
    }

    /// [`SentenceCounts::count`], skipping sentence pairs with more than
    /// `max_sentence_length` tokens on a side (as the extraction that made the table did:
    /// its `# max_sentence_length`).
    ///
    /// # Errors
    /// As [`SentenceCounts::count`].
    pub fn count_up_to<'a, P, S, T>(
        pairs: P,
        source: S,
        source_name: &str,
        target: T,
        target_name: &str,
        max_sentence_length: usize,
    ) -> Result<SentenceCounts>
    where
        P: IntoIterator<Item = (&'a str, &'a str)>,
        S: BufRead,
        T: BufRead,
    {
        let mut sources: HashMap<String, u32> = HashMap::new();
        let mut targets: HashMap<String, u32> = HashMap::new();
        let mut options: Vec<Vec<u32>> = Vec::new();
        let (mut longest_source, mut longest_target) = (0, 0);
        for (s, t) in pairs {
            let next = sources.len() as u32;
            let sid = *sources.entry(s.to_string()).or_insert(next);
            if sid as usize == options.len() {
                options.push(Vec::new());
                longest_source = longest_source.max(s.split(' ').count());
            }
            let next = targets.len() as u32;
            let tid = *targets.entry(t.to_string()).or_insert(next);
            if tid == next {
                longest_target = longest_target.max(t.split(' ').count());
            }
            options[sid as usize].push(tid);
        }
        // Each source's targets sorted, numbered in that order.
        let mut offsets = vec![0];
        let mut flat = Vec::new();
        let mut numbers = HashMap::new();
        for (sid, mut tids) in options.into_iter().enumerate() {
            tids.sort_unstable();
            tids.dedup();
            for tid in tids {
                numbers.insert((sid as u32, tid), flat.len());
                flat.push(tid);
            }
            offsets.push(flat.len());
        }
        let mut counts = SentenceCounts {
            counts: Cooccurrence::new(offsets, flat, targets.len()),
            sources,
            targets,
            pairs: numbers,
            sentence_pairs: 0,
        };
        let (mut source_line, mut target_line) = (String::new(), String::new());
        let (mut found_sources, mut found_targets) = (Vec::new(), Vec::new());
        let (mut source_tokens, mut target_tokens) = (String::new(), String::new());
        let (mut source_starts, mut target_starts) = (Vec::new(), Vec::new());
        let mut source = source;
        let mut target = target;
        let mut line_no = 0;
        loop {
            line_no += 1;
            let more_s = files::read_line(&mut source, &mut source_line, source_name, line_no)?;
            let more_t = files::read_line(&mut target, &mut target_line, target_name, line_no)?;
            match (more_s, more_t) {
                (false, false) => break,
                (true, false) | (false, true) => {
                    let (short, long) = if more_s {
                        (target_name, source_name)
                    } else {
                        (source_name, target_name)
                    };
                    return Err(Error::input(
                        short,
                        line_no,
                        format!("ends after {} lines, but {long} goes on", line_no - 1),
                    ));
                }
                (true, true) => {}
            }
            let ns = tokenize(&source_line, &mut source_tokens, &mut source_starts);
            let nt = tokenize(&target_line, &mut target_tokens, &mut target_starts);
            if kept(ns, nt, max_sentence_length) != Kept::Yes {
                continue;
            }
            counts.sentence_pairs += 1;
            found_sources.clear();
            each_phrase(&source_tokens, &source_starts, longest_source, |p| {
                found_sources.extend(counts.sources.get(p));
            });
            found_targets.clear();
            each_phrase(&target_tokens, &target_starts, longest_target, |p| {
                found_targets.extend(counts.targets.get(p));
            });
            counts
                .counts
                .add_sentence(&mut found_sources, &mut found_targets);
        }
        Ok(counts)
    }

    /// N: the number of sentence pairs read.
    pub fn sentence_pairs(&self) -> u64 {
        self.sentence_pairs
    }

    /// `(cooc, df_source, df_target)` of a pair given to [`SentenceCounts::count`].
    pub fn get(&self, source: &str, target: &str) -> Option<(u64, u64, u64)> {
        let sid = *self.sources.get(source)?;
        let tid = *self.targets.get(target)?;
        let pair = *self.pairs.get(&(sid, tid))?;
        let counts = self.counts.counts();
        Some((
            u64::from(counts.cooc(pair)),
            u64::from(counts.df_source(sid as usize)),
            u64::from(counts.df_target(tid as usize)),
        ))
    }
}

/// Calls `f` with every run of 1..=`longest` consecutive tokens of `text` (tokens joined by
/// single spaces, starting at `starts`, as [`tokenize`] leaves them).
fn each_phrase(text: &str, starts: &[u32], longest: usize, mut f: impl FnMut(&str)) {
    let tokens = starts.len() - 1;
    for start in 0..tokens {
        for end in start + 1..=tokens.min(start + longest) {
            f(&text[starts[start] as usize..starts[end] as usize - 1]);
        }
    }
}
