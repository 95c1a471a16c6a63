//! The filter pipeline over source groups.

use super::entropy::ProbabilityIndex;
use super::fisher::FisherTest;
use super::held::{Held, Item};
use super::stats::{FilterStats, Histogram, PruneStats};
use super::topk::{Column, ResolvedRanking};
use super::{CountSource, Filter, PruneOptions, SentenceCounts, NEG_LN_P};
use crate::error::{Error, Result};
use crate::table::{CountColumn, Header, PhrasePair};

enum Stage {
    Significance(f64),
    TopK(usize, ResolvedRanking),
    Bound(Column, bool, f64),
    Entropy(f64, usize),
    TestPhrases(super::testset::TestPhrases),
}

/// Where the three counts of the Fisher test are, and the test itself.
struct Significance {
    test: FisherTest,
    columns: [usize; 3],
    names: [&'static str; 3],
}

/// How input records are widened to the output schema.
struct Widen {
    /// For each input count, its index in the output counts.
    count_map: Vec<usize>,
    /// The `cooc`, `df_source`, `df_target` columns filled from the corpus.
    corpus: Option<CorpusColumns>,
    scores: usize,
    counts: usize,
}

/// Sentence-level counts taken from a corpus, and the output count columns they fill.
struct CorpusColumns {
    counts: SentenceCounts,
    cooc: usize,
    df_source: usize,
    df_target: usize,
}

impl CorpusColumns {
    /// Adds the `cooc`, `df_source` and `df_target` columns to `out` (refusing a table that
    /// has them already) and records the corpus's N as its `sentence_pairs`.
    fn add(out: &mut Header, file: &str, counts: SentenceCounts) -> Result<CorpusColumns> {
        for c in [
            CountColumn::Cooc,
            CountColumn::DfSource,
            CountColumn::DfTarget,
        ] {
            if out.schema.counts.contains(&c) {
                return Err(Error::invalid(
                    "--source",
                    format!(
                        "{file} already has the column {:?}; counting from a corpus would \
                         replace it (drop --source/--target to use the table's counts)",
                        c.name()
                    ),
                ));
            }
            out.schema.counts.push(c);
        }
        out.schema.counts.sort();
        out.metadata
            .set("sentence_pairs", counts.sentence_pairs().to_string());
        let at = |c| out.schema.count_index(c).expect("just added");
        Ok(CorpusColumns {
            cooc: at(CountColumn::Cooc),
            df_source: at(CountColumn::DfSource),
            df_target: at(CountColumn::DfTarget),
            counts,
        })
    }
}

/// The index of the `neg_ln_p` score column in `out`, added when absent.
fn annotation_column(out: &mut Header) -> usize {
    match out.schema.score_index(NEG_LN_P) {
        Some(i) => i,
        None => {
            out.schema.scores.push(NEG_LN_P.into());
            out.schema.scores.len() - 1
        }
    }
}

/// One stage per filter, resolved against the output schema, with its statistics; `total` is
/// the significance test's N (set when a filter needs it).
fn build_stages(
    filters: &[Filter],
    out: &Header,
    file: &str,
    total: Option<u64>,
) -> Result<(Vec<Stage>, Vec<FilterStats>)> {
    let mut stages = Vec::new();
    let mut filter_stats = Vec::new();
    for f in filters {
        let mut stats = FilterStats {
            filter: f.describe(),
            ..Default::default()
        };
        let stage = match f {
            Filter::Significance(t) => {
                let v = t.value(total.expect("significance set up"));
                stats.threshold = Some(v);
                stats.neg_ln_p = Some(Histogram::new());
                Stage::Significance(v)
            }
            Filter::TopK { k, by } => {
                if *k == 0 {
                    return Err(Error::invalid("--top-k", "must be at least 1"));
                }
                Stage::TopK(*k, by.resolve(&out.schema)?)
            }
            Filter::Bound {
                column,
                minimum,
                value,
            } => {
                let option = if *minimum { "--min" } else { "--max" };
                Stage::Bound(
                    Column::resolve(&out.schema, column, option)?,
                    *minimum,
                    *value,
                )
            }
            Filter::RelativeEntropy(v) => {
                if v.is_nan() {
                    return Err(Error::invalid("--relative-entropy", "not a number"));
                }
                let column = out.schema.score_index("p_t_given_s").ok_or_else(|| {
                    Error::invalid(
                        "--relative-entropy",
                        format!("{file} has no p_t_given_s column to compose"),
                    )
                })?;
                stats.threshold = Some(*v);
                Stage::Entropy(*v, column)
            }
            Filter::KeepTestPhrases(path) => {
                Stage::TestPhrases(super::testset::TestPhrases::from_path(path)?)
            }
        };
        stages.push(stage);
        filter_stats.push(stats);
    }
    Ok((stages, filter_stats))
}

/// Appends what this run does to the `# pruned_with` provenance (after ` | ` when the table
/// was pruned before).
fn record_provenance(out: &mut Header, options: &PruneOptions) {
    let mut value = options.describe();
    if !value.is_empty() {
        if let Some(earlier) = out.metadata.get("pruned_with") {
            value = format!("{earlier} | {value}"); // pruned before: keep the history
        }
        out.metadata.set("pruned_with", value);
    }
}

/// Applies [`Filter`]s to a stream of phrase pairs grouped by source, in byte order of source.
///
/// Construct it from the input's [`Header`]; [`Pruner::header`] is the header to write.
/// [`Pruner::run`] pulls `(pair, line)` records (the line only names the place in error
/// messages) and calls `emit` for every pair kept. See the [module docs](super) for an example.
pub struct Pruner {
    file: String,
    header: Header,
    stages: Vec<Stage>,
    stats: PruneStats,
    significance: Option<Significance>,
    annotate: Option<usize>,
    renormalize: Vec<usize>,
    widen: Widen,
    /// Index of the first relative-entropy stage (the stages before it stream).
    barrier: usize,
    held: Held,
    /// Bytes the relative-entropy index may take.
    index_budget: usize,
    keep: Vec<bool>,
}

/// Whether a run finished or stopped at a source out of byte order.
pub(crate) enum Outcome {
    Done,
    Unsorted {
        line: u64,
        previous: String,
        source: String,
    },
}

impl Pruner {
    /// A pruner for a table with `header`; `file` names the input in error messages.
    ///
    /// # Errors
    /// When a filter names a missing column, the significance test lacks its counts (or
    /// `# sentence_pairs`), or [`CountSource::Corpus`] / [`CountSource::PhraseCounts`] is asked
    /// for (those need [`Pruner::with_counts`]).
    pub fn new(header: &Header, file: &str, options: &PruneOptions) -> Result<Pruner> {
        Pruner::with_counts(header, file, options, None, None)
    }

    /// Like [`Pruner::new`], with the sentence-level counts of [`CountSource::Corpus`] or the
    /// number of phrase-pair occurrences (the sum of `count`) for [`CountSource::PhraseCounts`].
    pub fn with_counts(
        header: &Header,
        file: &str,
        options: &PruneOptions,
        corpus: Option<SentenceCounts>,
        phrase_occurrences: Option<u64>,
    ) -> Result<Pruner> {
        let mut out = header.clone();
        let needs_test = options.annotate
            || options
                .filters
                .iter()
                .any(|f| matches!(f, Filter::Significance(_)));
        // The schema widened: corpus counts, then the annotation column.
        let corpus = match (&options.counts, needs_test) {
            (CountSource::Corpus { .. }, true) => {
                let counts = corpus.ok_or(Error::Internal(
                    "corpus counts must be computed before pruning",
                ))?;
                Some(CorpusColumns::add(&mut out, file, counts)?)
            }
            _ => None,
        };
        let count_map = header
            .schema
            .counts
            .iter()
            .map(|&c| out.schema.count_index(c).expect("kept"))
            .collect();
        let annotate = options.annotate.then(|| annotation_column(&mut out));
        let significance = if needs_test {
            Some(significance_setup(
                &out,
                file,
                &options.counts,
                phrase_occurrences,
            )?)
        } else {
            None
        };
        let total = significance.as_ref().map(|s| s.test.total());
        let (stages, filter_stats) = build_stages(&options.filters, &out, file, total)?;
        let renormalize = options
            .renormalize
            .iter()
            .map(|name| {
                out.schema.score_index(name).ok_or_else(|| {
                    Error::invalid(
                        "--renormalize",
                        format!("{file} has no score column {name:?}"),
                    )
                })
            })
            .collect::<Result<Vec<_>>>()?;
        record_provenance(&mut out, options);
        let counts_label = match (&options.counts, needs_test) {
            (_, false) => "none",
            (CountSource::Table, _) => "table",
            (CountSource::Corpus { .. }, _) => "corpus",
            (CountSource::PhraseCounts, _) => "phrase-counts (approximation)",
        };
        let widen = Widen {
            count_map,
            corpus,
            scores: out.schema.scores.len(),
            counts: out.schema.counts.len(),
        };
        Ok(Pruner {
            file: file.to_string(),
            stats: PruneStats {
                input: file.to_string(),
                sentence_pairs: total,
                counts: counts_label.into(),
                filters: filter_stats,
                ..Default::default()
            },
            header: out,
            significance,
            annotate,
            renormalize,
            widen,
            barrier: stages
                .iter()
                .position(|s| matches!(s, Stage::Entropy(..)))
                .unwrap_or(stages.len()),
            stages,
            held: Held::new(half_budget(options) / 2, options.temp_dir.clone()),
            index_budget: half_budget(options),
            keep: Vec::new(),
        })
    }

    /// The header of the output: the input's, widened by `neg_ln_p` and corpus counts where
    /// asked, with a `# pruned_with=` metadata line naming the filters (appended with ` | `
    /// to one already there).
    pub fn header(&self) -> &Header {
        &self.header
    }

    /// Hands back the corpus counts given to [`Pruner::with_counts`], for a second run.
    pub(crate) fn take_corpus(&mut self) -> Option<SentenceCounts> {
        self.widen.corpus.take().map(|c| c.counts)
    }

    /// The statistics so far (complete after [`Pruner::run`]).
    pub fn stats(&self) -> &PruneStats {
        &self.stats
    }

    /// Prunes `input`, which must be grouped by source in byte order (as a sorted TSV or a
    /// packed table's `pairs()` are), calling `emit` for each pair kept, in input order.
    ///
    /// # Errors
    /// Input errors (passed through), counts that cannot occur in N sentence pairs (naming the
    /// file and line), a source out of order, or whatever `emit` returns.
    pub fn run<I, F>(&mut self, input: I, mut emit: F) -> Result<()>
    where
        I: IntoIterator<Item = Result<(PhrasePair, u64)>>,
        F: FnMut(&PhrasePair) -> Result<()>,
    {
        match self.run_sorted(input, &mut emit)? {
            Outcome::Done => Ok(()),
            Outcome::Unsorted {
                line,
                previous,
                source,
            } => Err(Error::input(
                &self.file,
                line,
                format!(
                    "source {source:?} comes after {previous:?}: input must be sorted by source \
                     in byte order (`baler prune` sorts files itself)"
                ),
            )),
        }
    }

    pub(crate) fn run_sorted<I, F>(&mut self, input: I, emit: &mut F) -> Result<Outcome>
    where
        I: IntoIterator<Item = Result<(PhrasePair, u64)>>,
        F: FnMut(&PhrasePair) -> Result<()> + ?Sized,
    {
        let mut group: Vec<Item> = Vec::new();
        for record in input {
            let (pair, line) = record?;
            if let Some(first) = group.first() {
                if first.pair.source != pair.source {
                    if pair.source.as_bytes() < first.pair.source.as_bytes() {
                        return Ok(Outcome::Unsorted {
                            line,
                            previous: first.pair.source.clone(),
                            source: pair.source,
                        });
                    }
                    self.end_group(&mut group, emit)?;
                }
            }
            self.stats.pairs_in += 1;
            if group.is_empty() {
                self.stats.sources_in += 1;
            }
            let item = self.widen(pair, line)?;
            group.push(item);
        }
        if !group.is_empty() {
            self.end_group(&mut group, emit)?;
        }
        self.finish(emit)?;
        Ok(Outcome::Done)
    }

    fn widen(&self, mut pair: PhrasePair, line: u64) -> Result<Item> {
        let w = &self.widen;
        if pair.counts.len() != w.counts {
            let mut counts = vec![0; w.counts];
            for (i, &c) in pair.counts.iter().enumerate() {
                counts[w.count_map[i]] = c;
            }
            if let Some(corpus) = &w.corpus {
                let (c, ds, dt) =
                    (corpus.counts.get(&pair.source, &pair.target)).ok_or_else(|| {
                        Error::input(&self.file, line, "pair was not counted in the corpus")
                    })?;
                counts[corpus.cooc] = c;
                counts[corpus.df_source] = ds;
                counts[corpus.df_target] = dt;
            }
            pair.counts = counts;
        }
        pair.scores.resize(w.scores, 0.0);
        Ok(Item {
            pair,
            line,
            neg_ln_p: None,
        })
    }

    /// Runs the streaming filters on `group` and emits or holds what survives; `group` is left
    /// empty (its buffer reused for the next source).
    fn end_group<F>(&mut self, group: &mut Vec<Item>, emit: &mut F) -> Result<()>
    where
        F: FnMut(&PhrasePair) -> Result<()> + ?Sized,
    {
        let barrier = self.barrier;
        for s in 0..barrier {
            self.apply(s, group)?;
        }
        if barrier < self.stages.len() {
            return self.held.push(std::mem::take(group));
        }
        self.emit_group(group, emit)?;
        group.clear();
        Ok(())
    }

    fn finish<F>(&mut self, emit: &mut F) -> Result<()>
    where
        F: FnMut(&PhrasePair) -> Result<()> + ?Sized,
    {
        let mut current = std::mem::replace(&mut self.held, Held::new(0, None));
        current.finish()?;
        // Each relative-entropy stage scores the table as it reached it: one pass builds the
        // index, a second filters, then runs the stages up to the next relative entropy.
        let mut s = self.barrier;
        while s < self.stages.len() {
            let Stage::Entropy(threshold, column) = self.stages[s] else {
                unreachable!("the barrier and its successors start at relative entropy")
            };
            let mut index = ProbabilityIndex::default();
            current.for_each(|g| {
                index.insert_group(
                    &g[0].pair.source,
                    g.iter()
                        .map(|i| (i.pair.target.as_str(), i.pair.scores[column])),
                );
                if index.bytes() > self.index_budget {
                    return Err(Error::invalid(
                        "memory",
                        format!(
                            "the relative-entropy filter needs more than {} bytes (half the \
                             memory budget) for the pairs reaching it; raise --memory or run a \
                             cheaper filter before it",
                            self.index_budget
                        ),
                    ));
                }
                Ok(())
            })?;
            let next = (s + 1..self.stages.len())
                .find(|&k| matches!(self.stages[k], Stage::Entropy(..)))
                .unwrap_or(self.stages.len());
            let mut kept = current.empty_like();
            let last = next == self.stages.len();
            current.drain(|mut g| {
                let before = g.len();
                let source = g[0].pair.source.clone();
                g.retain(|i| {
                    index.score(&i.pair.source, &i.pair.target, i.pair.scores[column]) >= threshold
                });
                self.stats.filters[s].record_group(&source, before, g.len());
                for k in s + 1..next {
                    self.apply(k, &mut g)?;
                }
                if last {
                    self.emit_group(&mut g, emit)
                } else {
                    kept.push(g)
                }
            })?;
            kept.finish()?;
            current = kept;
            s = next;
        }
        if let Some(sig) = &self.significance {
            self.stats.memo_hits = sig.test.hits();
            self.stats.memo_misses = sig.test.misses();
        }
        self.stats.sources_lost_all = self.stats.sources_in - self.stats.sources_out;
        for f in self.stats.filters.iter_mut() {
            if let Some(h) = f.neg_ln_p.as_mut() {
                h.finish();
            }
        }
        Ok(())
    }

    fn emit_group<F>(&mut self, group: &mut [Item], emit: &mut F) -> Result<()>
    where
        F: FnMut(&PhrasePair) -> Result<()> + ?Sized,
    {
        if group.is_empty() {
            return Ok(());
        }
        if let Some(column) = self.annotate {
            for item in group.iter_mut() {
                let v = self.neg_ln_p(item)?;
                item.pair.scores[column] = v;
            }
        }
        for &column in &self.renormalize {
            let sum: f64 = group.iter().map(|i| i.pair.scores[column]).sum();
            if sum > 0.0 {
                for item in group.iter_mut() {
                    item.pair.scores[column] /= sum;
                }
            }
        }
        self.stats.sources_out += 1;
        self.stats.pairs_out += group.len() as u64;
        for item in group.iter() {
            emit(&item.pair)?;
        }
        Ok(())
    }

    fn neg_ln_p(&mut self, item: &mut Item) -> Result<f64> {
        if let Some(v) = item.neg_ln_p {
            return Ok(v);
        }
        let sig = self
            .significance
            .as_mut()
            .expect("set up when a test is needed");
        let [a, b, c] = sig.columns;
        let counts = &item.pair.counts;
        let (cooc, ds, dt) = (counts[a], counts[b], counts[c]);
        let v = sig.test.neg_ln_p(cooc, ds, dt).map_err(|e| {
            Error::input(
                &self.file,
                item.line,
                format!(
                    "{e} ({}={cooc}, {}={ds}, {}={dt}, N={})",
                    sig.names[0],
                    sig.names[1],
                    sig.names[2],
                    sig.test.total()
                ),
            )
        })?;
        item.neg_ln_p = Some(v);
        Ok(v)
    }

    fn is_one_one_one(&self, item: &Item) -> bool {
        let sig = self.significance.as_ref().expect("set up");
        sig.columns.iter().all(|&i| item.pair.counts[i] == 1)
    }

    fn apply(&mut self, s: usize, group: &mut Vec<Item>) -> Result<()> {
        let before = group.len();
        if before == 0 {
            return Ok(());
        }
        let mut keep = std::mem::take(&mut self.keep);
        keep.clear();
        match &self.stages[s] {
            Stage::Significance(threshold) => {
                let threshold = *threshold;
                for item in group.iter_mut() {
                    let v = self.neg_ln_p(item)?;
                    let one = self.is_one_one_one(item);
                    let hist = self.stats.filters[s].neg_ln_p.as_mut().expect("set up");
                    hist.add(v, one);
                    keep.push(v >= threshold);
                }
            }
            Stage::TopK(k, ranking) => {
                let after = before.min(*k);
                self.stats.filters[s].record_group(&group[0].pair.source, before, after);
                ranking.keep_top(group, *k, |i| &i.pair);
                self.keep = keep;
                return Ok(());
            }
            Stage::Bound(column, minimum, value) => keep.extend(group.iter().map(|i| {
                let v = column.value(&i.pair);
                if *minimum {
                    v >= *value
                } else {
                    v <= *value
                }
            })),
            Stage::TestPhrases(phrases) => {
                let found = phrases.contains(&group[0].pair.source);
                keep.extend(group.iter().map(|_| found));
            }
            Stage::Entropy(..) => unreachable!("entropy runs over the whole table"),
        };
        let after = keep.iter().filter(|&&k| k).count();
        self.stats.filters[s].record_group(&group[0].pair.source, before, after);
        if after < before {
            let mut k = keep.iter();
            group.retain(|_| *k.next().expect("one flag per item"));
        }
        self.keep = keep;
        Ok(())
    }
}

/// Half of the memory budget (0: the default budget).
fn half_budget(options: &PruneOptions) -> usize {
    let memory = if options.memory == 0 {
        crate::settings::DEFAULT_MEMORY
    } else {
        options.memory
    };
    (memory / 2) as usize
}

fn significance_setup(
    header: &Header,
    file: &str,
    counts: &CountSource,
    phrase_occurrences: Option<u64>,
) -> Result<Significance> {
    let schema = &header.schema;
    let (wanted, total) = match counts {
        CountSource::Table | CountSource::Corpus { .. } => (
            [
                CountColumn::Cooc,
                CountColumn::DfSource,
                CountColumn::DfTarget,
            ],
            header.metadata.sentence_pairs(),
        ),
        CountSource::PhraseCounts => (
            [
                CountColumn::Count,
                CountColumn::CountSource,
                CountColumn::CountTarget,
            ],
            phrase_occurrences,
        ),
    };
    let mut columns = [0; 3];
    for (k, c) in wanted.iter().enumerate() {
        columns[k] = schema.count_index(*c).ok_or_else(|| {
            Error::Unsupported(match counts {
                CountSource::PhraseCounts => format!(
                    "{file} has no {:?} column; the phrase-count approximation needs count, \
                     count_source and count_target",
                    c.name()
                ),
                _ => format!(
                    "{file} has no {:?} column, which the significance test needs; give the \
                     corpus with --source/--target to count it, or approximate with \
                     phrase-level counts (--phrase-counts)",
                    c.name()
                ),
            })
        })?;
    }
    let total = match total {
        Some(n) if n > 0 => n,
        _ => {
            return Err(Error::Unsupported(match counts {
                CountSource::PhraseCounts => {
                    "the phrase-count approximation needs the number of phrase-pair occurrences"
                        .to_string()
                }
                _ => format!(
                    "{file} has no `# sentence_pairs=N` metadata line (N > 0), which the \
                     significance test needs; give the corpus with --source/--target"
                ),
            }))
        }
    };
    Ok(Significance {
        test: FisherTest::new(total),
        columns,
        names: [wanted[0].name(), wanted[1].name(), wanted[2].name()],
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::prune::{Ranking, Threshold};
    use crate::table::TsvReader;

    fn run(text: &str, options: &PruneOptions) -> Result<(Vec<String>, PruneStats)> {
        let reader = TsvReader::new(text.as_bytes(), "t.tsv")?;
        let mut pruner = Pruner::new(reader.header(), "t.tsv", options)?;
        let mut kept = Vec::new();
        let input = reader.map(|r| r.map(|p| (p, 0)));
        pruner.run(input, |p| {
            kept.push(format!("{}|{}", p.source, p.target));
            Ok(())
        })?;
        Ok((kept, pruner.stats().clone()))
    }

    const TABLE: &str = "# sentence_pairs=100\n\
        source\ttarget\tp_t_given_s\tcooc\tdf_source\tdf_target\n\
        a\tx\t0.5\t1\t1\t1\n\
        a\ty\t0.5\t3\t4\t3\n\
        b\tz\t0.2\t5\t5\t9\n";

    #[test]
    fn out_of_order_sources_are_reported_by_run() {
        let text = "source\ttarget\nb\tx\na\ty\n";
        let err = run(text, &PruneOptions::default()).unwrap_err().to_string();
        assert!(
            err.starts_with("t.tsv: source \"a\" comes after \"b\""),
            "{err}"
        );
    }

    #[test]
    fn top_k_result_does_not_depend_on_option_order() {
        let options = PruneOptions {
            filters: vec![Filter::TopK {
                k: 2,
                by: Ranking::default(),
            }],
            ..Default::default()
        };
        let forward = "source\ttarget\tp_t_given_s\ns\tb\t0.3\ns\ta\t0.3\ns\tc\t0.3\ns\td\t0.5\n";
        let backward = "source\ttarget\tp_t_given_s\ns\td\t0.5\ns\tc\t0.3\ns\ta\t0.3\ns\tb\t0.3\n";
        let (mut f, _) = run(forward, &options).unwrap();
        let (mut b, _) = run(backward, &options).unwrap();
        f.sort();
        b.sort();
        assert_eq!(f, ["s|a", "s|d"]);
        assert_eq!(f, b);
    }

    #[test]
    fn stats_count_pairs_and_sources_per_filter() {
        let options = PruneOptions {
            filters: vec![
                Filter::Bound {
                    column: "p_t_given_s".into(),
                    minimum: true,
                    value: 0.5,
                },
                Filter::Significance(Threshold::AlphaPlusEpsilon),
            ],
            ..Default::default()
        };
        let (kept, stats) = run(TABLE, &options).unwrap();
        assert_eq!(kept, ["a|y"]);
        let f = &stats.filters;
        assert_eq!((f[0].pairs_before, f[0].pairs_after), (3, 2));
        assert_eq!(
            (
                f[0].sources_before,
                f[0].sources_after,
                f[0].sources_emptied
            ),
            (2, 1, 1)
        );
        assert_eq!(f[0].sources_emptied_sample, ["b"]);
        assert_eq!(
            (f[1].pairs_before, f[1].pairs_after, f[1].sources_emptied),
            (2, 1, 0)
        );
        let h = f[1].neg_ln_p.as_ref().unwrap();
        assert_eq!((h.pairs, h.one_one_one), (2, 1));
        assert!((h.min - 100f64.ln()).abs() < 1e-12);
        assert!((h.mean - (h.min + h.max) / 2.0).abs() < 1e-12);
        assert_eq!(
            (stats.pairs_in, stats.pairs_out, stats.sources_lost_all),
            (3, 1, 1)
        );
    }

    #[test]
    fn a_missing_column_or_metadata_is_a_clear_error() {
        let no_n = TABLE.replace("# sentence_pairs=100\n", "");
        let options = PruneOptions {
            filters: vec![Filter::Significance(Threshold::Value(1.0))],
            ..Default::default()
        };
        let err = run(&no_n, &options).unwrap_err().to_string();
        assert!(err.contains("# sentence_pairs=N"), "{err}");
        let options = PruneOptions {
            filters: vec![Filter::TopK {
                k: 0,
                by: Ranking::default(),
            }],
            ..Default::default()
        };
        assert!(run(TABLE, &options).is_err());
    }
}
