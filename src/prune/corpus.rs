//! Sentence-level counts for the significance test, computed from a sentence-aligned corpus.
//!
//! This is a self-contained counter for `baler prune --source --target`; extraction writes the
//! same columns when it has the corpus at hand.

use std::collections::HashMap;
use std::io::BufRead;

use crate::error::{Error, Result};
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
    pairs: HashMap<(u32, u32), usize>,
    cooc: Vec<u64>,
    df_source: Vec<u64>,
    df_target: Vec<u64>,
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
        let mut counts = SentenceCounts {
            sources: HashMap::new(),
            targets: HashMap::new(),
            pairs: HashMap::new(),
            cooc: Vec::new(),
            df_source: Vec::new(),
            df_target: Vec::new(),
            sentence_pairs: 0,
        };
        let mut options: Vec<Vec<(u32, usize)>> = Vec::new();
        let (mut longest_source, mut longest_target) = (0, 0);
        for (s, t) in pairs {
            let next = counts.sources.len() as u32;
            let sid = *counts.sources.entry(s.to_string()).or_insert(next);
            if sid as usize == options.len() {
                options.push(Vec::new());
                longest_source = longest_source.max(s.split(' ').count());
            }
            let next = counts.targets.len() as u32;
            let tid = *counts.targets.entry(t.to_string()).or_insert(next);
            if tid as usize == counts.df_target.len() {
                counts.df_target.push(0);
                longest_target = longest_target.max(t.split(' ').count());
            }
            let next = counts.cooc.len();
            let slot = *counts.pairs.entry((sid, tid)).or_insert(next);
            if slot == next {
                counts.cooc.push(0);
                options[sid as usize].push((tid, slot));
            }
        }
        counts.df_source = vec![0; options.len()];
        let mut seen_target = vec![u64::MAX; counts.targets.len()];
        let mut seen_source = vec![u64::MAX; options.len()];
        let (mut source_line, mut target_line) = (String::new(), String::new());
        let mut found_sources = Vec::new();
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
            let sentence = counts.sentence_pairs;
            counts.sentence_pairs += 1;
            found_sources.clear();
            each_phrase(&source_tokens, &source_starts, longest_source, |p| {
                if let Some(&id) = counts.sources.get(p) {
                    if seen_source[id as usize] != sentence {
                        seen_source[id as usize] = sentence;
                        found_sources.push(id);
                    }
                }
            });
            each_phrase(&target_tokens, &target_starts, longest_target, |p| {
                if let Some(&id) = counts.targets.get(p) {
                    if seen_target[id as usize] != sentence {
                        seen_target[id as usize] = sentence;
                        counts.df_target[id as usize] += 1;
                    }
                }
            });
            for &sid in &found_sources {
                counts.df_source[sid as usize] += 1;
                for &(tid, slot) in &options[sid as usize] {
                    if seen_target[tid as usize] == sentence {
                        counts.cooc[slot] += 1;
                    }
                }
            }
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
        let slot = *self.pairs.get(&(sid, tid))?;
        Some((
            self.cooc[slot],
            self.df_source[sid as usize],
            self.df_target[tid as usize],
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
