//! Sentence-level counts for the significance test, computed from a sentence-aligned corpus.
//!
//! This is a self-contained counter for `baler prune --source --target`; extraction writes the
//! same columns when it has the corpus at hand.

use std::collections::HashMap;
use std::io::BufRead;

use crate::error::{Error, Result};
use crate::files;

/// `cooc`, `df_source`, `df_target` of a set of phrase pairs, and N, counted over a corpus.
///
/// Sentences are split on whitespace; a phrase "occurs" in a sentence when its tokens appear
/// there consecutively. Each sentence pair counts at most once per phrase (document
/// frequency), and `cooc` counts the sentence pairs whose source side contains the source
/// phrase and whose target side contains the target phrase, wherever they are.
///
/// # Examples
/// ```
/// use baler::prune::SentenceCounts;
/// let source = "el faro\nel faro y el puerto\nel puerto\n";
/// let target = "the lighthouse\nthe lighthouse and the port\nthe port\n";
/// let pairs = [("el faro", "the lighthouse"), ("el", "the port")];
/// let counts = SentenceCounts::count(pairs, source.as_bytes(), "es.txt",
///                                    target.as_bytes(), "en.txt").unwrap();
/// assert_eq!(counts.sentence_pairs(), 3);
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
        let (mut found_sources, mut buf) = (Vec::new(), String::new());
        let mut source = source;
        let mut target = target;
        loop {
            let line_no = counts.sentence_pairs + 1;
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
            let sentence = counts.sentence_pairs;
            counts.sentence_pairs += 1;
            found_sources.clear();
            each_phrase(&source_line, longest_source, &mut buf, |p| {
                if let Some(&id) = counts.sources.get(p) {
                    if seen_source[id as usize] != sentence {
                        seen_source[id as usize] = sentence;
                        found_sources.push(id);
                    }
                }
            });
            each_phrase(&target_line, longest_target, &mut buf, |p| {
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

/// Calls `f` with every run of 1..=`longest` consecutive tokens of `line`, joined by spaces.
fn each_phrase(line: &str, longest: usize, buf: &mut String, mut f: impl FnMut(&str)) {
    let tokens: Vec<&str> = line.split_whitespace().collect();
    for start in 0..tokens.len() {
        buf.clear();
        for (k, token) in tokens[start..].iter().take(longest).enumerate() {
            if k > 0 {
                buf.push(' ');
            }
            buf.push_str(token);
            f(buf);
        }
    }
}
