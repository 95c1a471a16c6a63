//! Phrase-based translation: stack decoding with future-cost estimation (Koehn, Och & Marcu
//! 2003) under a log-linear model, reading options from a packed [`Table`] through
//! [`Table::spans`].
//!
//! Features (all summed over the phrases of a hypothesis, natural-log scale):
//!
//! | name | value |
//! |---|---|
//! | `table.<column>` | ln of the option's score in that column (floored at 1e-10) |
//! | `lm` | ln probability of the target words and the sentence end under the language model |
//! | `words` | number of target words |
//! | `phrases` | number of phrases |
//! | `jump` | minus the distance between a phrase's start and the previous phrase's end |
//! | `copied` | number of source words copied through because no option covers them |
//!
//! The model score is the dot product of the weights and the features.
//!
//! ```
//! # fn main() -> baler::Result<()> {
//! let dir = tempfile::tempdir().unwrap();
//! let table_path = dir.path().join("t.bale");
//! let tsv = "source\ttarget\tp_t_given_s\nle ferry\tthe ferry\t0.9\npart\tleaves\t0.8\n";
//! baler::pack::pack_tsv(tsv.as_bytes(), "t.tsv", &table_path, &Default::default())?;
//! let lm_path = dir.path().join("en.balm");
//! let text = "the ferry leaves\nthe ferry leaves at noon\n";
//! baler::lm::build(text.as_bytes(), "en.txt", &Default::default())?.write(&lm_path)?;
//! let table = baler::Table::open(&table_path)?;
//! let lm = baler::lm::LanguageModel::open(&lm_path)?;
//! let weights = baler::decode::Weights::defaults(table.schema());
//! let decoder = baler::decode::Decoder::new(&table, &lm, weights, Default::default());
//! let out = decoder.translate("le ferry part bientôt")?;
//! assert_eq!(out.text, "the ferry leaves bientôt");
//! assert_eq!(out.segments.len(), 3);
//! # Ok(()) }
//! ```

use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::path::Path;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::Mutex;

use rustc_hash::FxHashMap;

use crate::error::{Error, Result};
use crate::evaluate::tokens;
use crate::lm::{LanguageModel, BOS, EOS};
use crate::read::Table;
use crate::table::Schema;

/// Score columns weighted by default, each with weight 0.2.
pub const DEFAULT_TABLE_COLUMNS: [&str; 4] = [
    "p_t_given_s",
    "p_s_given_t",
    "lex_t_given_s",
    "lex_s_given_t",
];

/// Lowest score a table feature takes before its logarithm.
const SCORE_FLOOR: f64 = 1e-10;

/// Longest sentence decoded in one search; longer ones are decoded in consecutive pieces.
const MAX_SEARCH_TOKENS: usize = 128;

/// The weights of the log-linear model, by feature name.
#[derive(Clone, Debug, PartialEq)]
pub struct Weights {
    /// Weight per feature name (see the module documentation).
    pub values: BTreeMap<String, f64>,
}

impl Weights {
    /// Weights that work without tuning.
    pub fn defaults(schema: &Schema) -> Weights {
        let mut values = BTreeMap::new();
        for c in &schema.scores {
            let w = if DEFAULT_TABLE_COLUMNS.contains(&c.as_str()) {
                0.2
            } else {
                0.0
            };
            values.insert(format!("table.{c}"), w);
        }
        for (name, w) in [
            ("lm", 0.5),
            ("words", 0.6),
            ("phrases", -0.2),
            ("jump", 0.3),
            ("copied", -1.0),
        ] {
            values.insert(name.to_string(), w);
        }
        Weights { values }
    }

    /// The weight of `name` (0 when absent).
    pub fn get(&self, name: &str) -> f64 {
        self.values.get(name).copied().unwrap_or(0.0)
    }

    /// Reads a weights file: one `name = value` per line; `#` starts a comment. Names not
    /// given keep the value in `base`.
    pub fn read(path: &Path, base: Weights) -> Result<Weights> {
        let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, "reading", e))?;
        let name = path.to_string_lossy();
        let mut w = base;
        for (i, line) in text.lines().enumerate() {
            let line = line.split('#').next().unwrap_or("").trim();
            if line.is_empty() {
                continue;
            }
            let (key, value) = line.split_once('=').ok_or_else(|| {
                Error::input(name.as_ref(), i as u64 + 1, "expected `feature = weight`")
            })?;
            let value: f64 = value.trim().parse().map_err(|_| {
                Error::input(
                    name.as_ref(),
                    i as u64 + 1,
                    format!("{:?} is not a number", value.trim()),
                )
            })?;
            if !value.is_finite() {
                return Err(Error::input(
                    name.as_ref(),
                    i as u64 + 1,
                    "weight is not finite",
                ));
            }
            w.values.insert(key.trim().to_string(), value);
        }
        Ok(w)
    }

    /// The weights file text for these weights.
    pub fn to_text(&self) -> String {
        let mut s = String::from("# baler translation weights: feature = weight\n");
        for (k, v) in &self.values {
            let _ = writeln!(s, "{k} = {v}");
        }
        s
    }
}

/// Search settings.
#[derive(Clone, Debug)]
pub struct DecodeSettings {
    /// Hypotheses kept per stack.
    pub beam: usize,
    /// Options kept per source span (best by their score in isolation).
    pub options_per_span: usize,
    /// Largest jump between a phrase's start and the previous phrase's end.
    pub distortion_limit: usize,
    /// Longest source phrase looked up.
    pub max_phrase: usize,
    /// Hypotheses whose score plus future cost falls more than this below the best of their
    /// stack are dropped (`f64::INFINITY`: histogram pruning only).
    pub threshold: f64,
}

impl Default for DecodeSettings {
    fn default() -> Self {
        DecodeSettings {
            beam: 100,
            options_per_span: 20,
            distortion_limit: 6,
            max_phrase: 7,
            threshold: 8.0,
        }
    }
}

/// One phrase of a translation.
#[derive(Clone, Debug, PartialEq)]
pub struct Segment {
    /// Source tokens `start..end`.
    pub source: std::ops::Range<usize>,
    /// The target phrase.
    pub target: String,
    /// Whether the source word was copied through (no option covered it).
    pub copied: bool,
}

/// A decoded sentence.
#[derive(Clone, Debug)]
pub struct Translation {
    /// The target sentence.
    pub text: String,
    /// The phrases in target order.
    pub segments: Vec<Segment>,
    /// Feature values, named.
    pub features: BTreeMap<String, f64>,
    /// The model score: weights · features.
    pub score: f64,
}

/// A scored option of one span, ready for the search.
struct Candidate {
    start: usize,
    end: usize,
    target: String,
    ids: Vec<u32>,
    copied: bool,
    /// Weighted table, word, phrase and copy features.
    local: f64,
    /// `local` plus the context-free LM estimate: the future-cost contribution.
    estimate: f64,
}

#[derive(Clone)]
struct Hyp {
    coverage: u128,
    last_end: usize,
    state: [u32; 8],
    state_len: u8,
    score: f64,
    future: f64,
    back: usize,
    candidate: usize,
}

const NO_BACK: usize = usize::MAX;

/// Hypotheses with equal coverage, last source end and LM history are recombined.
type RecombinationKey = (u128, usize, [u32; 8]);

/// An LM history, a candidate, and whether the phrase ends the sentence.
type LmKey = ([u32; 8], u8, u32, bool);

/// A decoder over one table and language model.
pub struct Decoder<'a> {
    table: &'a Table,
    lm: &'a LanguageModel,
    weights: Weights,
    table_weights: Vec<f64>,
    settings: DecodeSettings,
}

impl<'a> Decoder<'a> {
    /// A decoder with the given weights and search settings.
    pub fn new(
        table: &'a Table,
        lm: &'a LanguageModel,
        weights: Weights,
        settings: DecodeSettings,
    ) -> Decoder<'a> {
        let table_weights = table
            .schema()
            .scores
            .iter()
            .map(|c| weights.get(&format!("table.{c}")))
            .collect();
        Decoder {
            table,
            lm,
            weights,
            table_weights,
            settings,
        }
    }

    /// The weights in use.
    pub fn weights(&self) -> &Weights {
        &self.weights
    }

    fn ln_lm(&self, context: &[u32], word: u32) -> f64 {
        f64::from(self.lm.log10_prob(context, word)) * std::f64::consts::LN_10
    }

    fn candidates(&self, words: &[&str]) -> Result<Vec<Candidate>> {
        let n = words.len();
        let spans = self.table.spans(words, self.settings.max_phrase)?;
        let (w_words, w_phrases, w_copied, w_lm) = (
            self.weights.get("words"),
            self.weights.get("phrases"),
            self.weights.get("copied"),
            self.weights.get("lm"),
        );
        let mut out = Vec::new();
        let mut single = vec![false; n];
        for span in &spans {
            if span.end - span.start == 1 {
                single[span.start] = true;
            }
            let mut here: Vec<Candidate> = span
                .options
                .iter()
                .map(|o| {
                    let target = o.target().to_string();
                    let ids: Vec<u32> = tokens(&target).iter().map(|t| self.lm.id(t)).collect();
                    let table: Vec<f64> = o
                        .scores()
                        .iter()
                        .map(|&s| s.max(SCORE_FLOOR).ln())
                        .collect();
                    let local = table
                        .iter()
                        .zip(&self.table_weights)
                        .map(|(f, w)| f * w)
                        .sum::<f64>()
                        + w_words * ids.len() as f64
                        + w_phrases;
                    let estimate = local + w_lm * self.phrase_lm(&ids);
                    Candidate {
                        start: span.start,
                        end: span.end,
                        target,
                        ids,
                        copied: false,
                        local,
                        estimate,
                    }
                })
                .collect();
            here.sort_by(|a, b| b.estimate.total_cmp(&a.estimate));
            here.truncate(self.settings.options_per_span);
            out.extend(here);
        }
        for (i, covered) in single.iter().enumerate() {
            if !covered {
                let ids = vec![self.lm.id(words[i])];
                let local = w_words + w_phrases + w_copied;
                let estimate = local + w_lm * self.phrase_lm(&ids);
                out.push(Candidate {
                    start: i,
                    end: i + 1,
                    target: words[i].to_string(),
                    ids,
                    copied: true,
                    local,
                    estimate,
                });
            }
        }
        Ok(out)
    }

    /// ln probability of a phrase on its own (no context before its first word).
    fn phrase_lm(&self, ids: &[u32]) -> f64 {
        (0..ids.len()).map(|i| self.ln_lm(&ids[..i], ids[i])).sum()
    }

    /// Translates one tokenized sentence.
    pub fn translate(&self, sentence: &str) -> Result<Translation> {
        let words = tokens(sentence);
        let mut segments = Vec::new();
        for (piece, chunk) in words.chunks(MAX_SEARCH_TOKENS).enumerate() {
            let offset = piece * MAX_SEARCH_TOKENS;
            for mut s in self.search(chunk)? {
                s.source = s.source.start + offset..s.source.end + offset;
                segments.push(s);
            }
        }
        Ok(self.explain(&words, segments))
    }

    /// Beam search over one piece of at most [`MAX_SEARCH_TOKENS`] tokens.
    fn search(&self, words: &[&str]) -> Result<Vec<Segment>> {
        let n = words.len();
        if n == 0 {
            return Ok(Vec::new());
        }
        let cands = self.candidates(words)?;
        // Future cost of every span: best estimate of covering it by phrases.
        let mut future = vec![vec![f64::NEG_INFINITY; n + 1]; n + 1];
        for c in &cands {
            if c.estimate > future[c.start][c.end] {
                future[c.start][c.end] = c.estimate;
            }
        }
        for len in 2..=n {
            for i in 0..=n - len {
                let j = i + len;
                for k in i + 1..j {
                    let v = future[i][k] + future[k][j];
                    if v > future[i][j] {
                        future[i][j] = v;
                    }
                }
            }
        }
        let future_of = |coverage: u128| -> f64 {
            let mut total = 0.0;
            let mut i = 0;
            while i < n {
                if coverage >> i & 1 == 1 {
                    i += 1;
                    continue;
                }
                let mut j = i;
                while j < n && coverage >> j & 1 == 0 {
                    j += 1;
                }
                total += future[i][j];
                i = j;
            }
            total
        };
        // Candidates grouped by span, each group best estimate first.
        let mut by_start: Vec<Vec<std::ops::Range<usize>>> = vec![Vec::new(); n];
        let mut k = 0;
        while k < cands.len() {
            let (start, end) = (cands[k].start, cands[k].end);
            let mut j = k;
            while j < cands.len() && cands[j].start == start && cands[j].end == end {
                j += 1;
            }
            by_start[start].push(k..j);
            k = j;
        }
        let full: u128 = if n == 128 {
            u128::MAX
        } else {
            (1u128 << n) - 1
        };
        let keep = self.lm.order().saturating_sub(1).min(8);
        let (w_lm, w_jump) = (self.weights.get("lm"), self.weights.get("jump"));
        let limit = self.settings.distortion_limit;
        let threshold = self.settings.threshold;
        let mut arena: Vec<Hyp> = Vec::new();
        let mut stacks: Vec<Vec<usize>> = vec![Vec::new(); n + 1];
        // Best score + future cost seen in each stack, for threshold pruning.
        let mut best_total = vec![f64::NEG_INFINITY; n + 1];
        let mut state0 = [0u32; 8];
        state0[0] = BOS;
        arena.push(Hyp {
            coverage: 0,
            last_end: 0,
            state: state0,
            state_len: u8::from(keep > 0),
            score: 0.0,
            future: future_of(0),
            back: NO_BACK,
            candidate: 0,
        });
        stacks[0].push(0);
        let mut seen: Vec<FxHashMap<RecombinationKey, usize>> = vec![FxHashMap::default(); n + 1];
        let mut context: Vec<u32> = Vec::with_capacity(16);
        let mut lm_cache: FxHashMap<LmKey, (f64, [u32; 8], u8)> = FxHashMap::default();
        for covered in 0..n {
            let mut stack = std::mem::take(&mut stacks[covered]);
            stack.sort_by(|&a, &b| {
                let (x, y) = (&arena[a], &arena[b]);
                (y.score + y.future).total_cmp(&(x.score + x.future))
            });
            stack.truncate(self.settings.beam);
            if let Some(&top) = stack.first() {
                let floor = arena[top].score + arena[top].future - threshold;
                stack.retain(|&h| arena[h].score + arena[h].future >= floor);
            }
            for &h in &stack {
                let hyp = arena[h].clone();
                for (start, groups) in by_start.iter().enumerate() {
                    if hyp.coverage >> start & 1 == 1 || start.abs_diff(hyp.last_end) > limit {
                        continue;
                    }
                    let jump = -(start.abs_diff(hyp.last_end) as f64);
                    for group in groups {
                        let mask = span_mask(cands[group.start].start, cands[group.start].end);
                        if hyp.coverage & mask != 0 {
                            continue;
                        }
                        let coverage = hyp.coverage | mask;
                        let covered_now = coverage.count_ones() as usize;
                        let future = future_of(coverage);
                        for k in group.clone() {
                            let c = &cands[k];
                            // Early discard: with the phrase's context-free LM estimate in
                            // place of the real one, it would fall below the threshold.
                            let guess = hyp.score + c.estimate + w_jump * jump + future;
                            if guess < best_total[covered_now] - threshold {
                                break;
                            }
                            // The LM score of a phrase depends only on the history and the
                            // phrase: shared by every hypothesis with the same history.
                            let key = (hyp.state, hyp.state_len, k as u32, coverage == full);
                            let (lm, state, len) = match lm_cache.get(&key) {
                                Some(&v) => v,
                                None => {
                                    context.clear();
                                    context.extend_from_slice(&hyp.state[..hyp.state_len as usize]);
                                    let mut lm = 0.0;
                                    for &w in &c.ids {
                                        lm += self.ln_lm(&context, w);
                                        context.push(w);
                                    }
                                    if coverage == full {
                                        lm += self.ln_lm(&context, EOS);
                                    }
                                    let mut state = [0u32; 8];
                                    let len = context.len().min(keep);
                                    state[..len].copy_from_slice(&context[context.len() - len..]);
                                    lm_cache.insert(key, (lm, state, len as u8));
                                    (lm, state, len as u8)
                                }
                            };
                            let score = hyp.score + c.local + w_lm * lm + w_jump * jump;
                            if score + future > best_total[covered_now] {
                                best_total[covered_now] = score + future;
                            }
                            let new = Hyp {
                                coverage,
                                last_end: c.end,
                                state,
                                state_len: len,
                                score,
                                future,
                                back: h,
                                candidate: k,
                            };
                            let key = (coverage, c.end, state);
                            match seen[covered_now].get(&key) {
                                Some(&old) if arena[old].score >= score => {}
                                Some(&old) => arena[old] = new,
                                None => {
                                    seen[covered_now].insert(key, arena.len());
                                    stacks[covered_now].push(arena.len());
                                    arena.push(new);
                                }
                            }
                        }
                    }
                }
            }
        }
        let best = stacks[n]
            .iter()
            .copied()
            .max_by(|&a, &b| arena[a].score.total_cmp(&arena[b].score));
        let Some(mut at) = best else {
            // Every hypothesis died in the beam: fall back to the monotone greedy path.
            return self.greedy_segments(words, 0);
        };
        let mut path = Vec::new();
        while arena[at].back != NO_BACK {
            let c = &cands[arena[at].candidate];
            path.push(Segment {
                source: c.start..c.end,
                target: c.target.clone(),
                copied: c.copied,
            });
            at = arena[at].back;
        }
        path.reverse();
        Ok(path)
    }

    /// Recomputes the features and score of a segmentation (used for `--explain`, and the
    /// source of [`Translation::features`]).
    fn explain(&self, words: &[&str], segments: Vec<Segment>) -> Translation {
        let schema = self.table.schema();
        let mut features: BTreeMap<String, f64> = BTreeMap::new();
        for c in &schema.scores {
            features.insert(format!("table.{c}"), 0.0);
        }
        let (mut lm, mut n_words, mut jump, mut copied) = (0.0, 0usize, 0.0, 0usize);
        let mut context = vec![BOS];
        let mut last_end = 0usize;
        let mut text: Vec<&str> = Vec::new();
        for s in &segments {
            if s.copied {
                copied += 1;
            } else if let Ok(options) = self.table.lookup(&words[s.source.clone()].join(" ")) {
                if let Some(o) = options.iter().find(|o| o.target() == s.target) {
                    for (name, &v) in schema.scores.iter().zip(o.scores()) {
                        *features
                            .get_mut(&format!("table.{name}"))
                            .expect("inserted") += v.max(SCORE_FLOOR).ln();
                    }
                }
            }
            let offset = s.source.start / MAX_SEARCH_TOKENS * MAX_SEARCH_TOKENS;
            let (start, prev) = (s.source.start - offset, last_end);
            let prev = prev.saturating_sub(offset);
            jump -= start.abs_diff(prev) as f64;
            last_end = s.source.end;
            for t in tokens(&s.target) {
                let id = self.lm.id(t);
                lm += self.ln_lm(&context, id);
                context.push(id);
                n_words += 1;
                text.push(t);
            }
        }
        lm += self.ln_lm(&context, EOS);
        features.insert("lm".into(), lm);
        features.insert("words".into(), n_words as f64);
        features.insert("phrases".into(), segments.len() as f64);
        features.insert("jump".into(), jump);
        features.insert("copied".into(), copied as f64);
        let score = features.iter().map(|(k, v)| self.weights.get(k) * v).sum();
        Translation {
            text: text.join(" "),
            segments,
            features,
            score,
        }
    }

    /// The baseline: monotone, greedy longest match, each phrase's option best by
    /// `p_t_given_s` (first stored option when the column is absent), unknown words copied.
    pub fn greedy(&self, sentence: &str) -> Result<Translation> {
        let words = tokens(sentence);
        let segments = self.greedy_segments(&words, 0)?;
        Ok(self.explain(&words, segments))
    }

    fn greedy_segments(&self, words: &[&str], offset: usize) -> Result<Vec<Segment>> {
        let spans = self.table.spans(words, self.settings.max_phrase)?;
        let column = self.table.schema().score_index("p_t_given_s");
        let mut longest: Vec<Option<usize>> = vec![None; words.len()];
        for (k, s) in spans.iter().enumerate() {
            let better = longest[s.start].is_none_or(|j| spans[j].end < s.end);
            if better {
                longest[s.start] = Some(k);
            }
        }
        let mut out = Vec::new();
        let mut i = 0;
        while i < words.len() {
            match longest[i] {
                Some(k) => {
                    let s = &spans[k];
                    let best = s
                        .options
                        .iter()
                        .max_by(|a, b| {
                            let key = |o: &crate::read::TranslationOption<'_>| {
                                column.and_then(|c| o.score(c)).unwrap_or(0.0)
                            };
                            key(a).total_cmp(&key(b)).then(std::cmp::Ordering::Greater)
                        })
                        .expect("a found phrase has options");
                    out.push(Segment {
                        source: s.start + offset..s.end + offset,
                        target: best.target().to_string(),
                        copied: false,
                    });
                    i = s.end;
                }
                None => {
                    out.push(Segment {
                        source: i + offset..i + 1 + offset,
                        target: words[i].to_string(),
                        copied: true,
                    });
                    i += 1;
                }
            }
        }
        Ok(out)
    }
}

/// Translates `lines` with `threads` workers (0: every core); results in input order.
pub fn translate_all(
    decoder: &Decoder<'_>,
    lines: &[String],
    threads: usize,
    greedy: bool,
) -> Result<Vec<Translation>> {
    let threads = if threads == 0 {
        std::thread::available_parallelism().map_or(1, |n| n.get())
    } else {
        threads
    };
    let next = AtomicUsize::new(0);
    let results: Mutex<Vec<Option<Result<Translation>>>> =
        Mutex::new((0..lines.len()).map(|_| None).collect());
    std::thread::scope(|scope| {
        for _ in 0..threads.min(lines.len()).max(1) {
            scope.spawn(|| loop {
                let i = next.fetch_add(1, Ordering::Relaxed);
                if i >= lines.len() {
                    break;
                }
                let t = if greedy {
                    decoder.greedy(&lines[i])
                } else {
                    decoder.translate(&lines[i])
                };
                results.lock().expect("no worker panics")[i] = Some(t);
            });
        }
    });
    results
        .into_inner()
        .expect("no worker panics")
        .into_iter()
        .map(|r| r.expect("every line decoded"))
        .collect()
}

fn span_mask(start: usize, end: usize) -> u128 {
    let len = end - start;
    let ones = if len == 128 {
        u128::MAX
    } else {
        (1u128 << len) - 1
    };
    ones << start
}

/// A readable account of a translation: segmentation and weighted features.
pub fn explanation(t: &Translation, weights: &Weights, line: usize) -> String {
    let mut s = format!("sentence {line}: model score {:.6}\n", t.score);
    for seg in &t.segments {
        let _ = writeln!(
            s,
            "  [{},{}) {}{}",
            seg.source.start,
            seg.source.end,
            seg.target,
            if seg.copied { "  (copied)" } else { "" }
        );
    }
    for (k, v) in &t.features {
        let w = weights.get(k);
        let _ = writeln!(
            s,
            "  feature {k} value {v:.6} weight {w} contribution {:.6}",
            v * w
        );
    }
    s
}
