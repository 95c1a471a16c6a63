//! What pruning costs: sizes, held-out coverage, retained probability mass, divergence and
//! reachability of a reference, for one table against a base; sweeps over prune and pack
//! settings, with a plot.
//!
//! Tables are interchange TSV (loaded into memory) or packed (looked up in place); both are
//! seen through [`MeasuredTable`]. [`compare`] measures a base table and others side by side
//! ([`Comparison`]), which renders as a readable table ([`Comparison::to_text`]), CSV
//! ([`Comparison::to_csv`]) or JSON (serde). [`crate::pipeline::sweep`] prunes and packs at every setting of a
//! grid and measures each against the unpruned input.
//!
//! # Definitions
//!
//! * **Size**: file bytes, pairs, source phrases, options per source (mean, median, max),
//!   bytes per pair.
//! * **Coverage** of a held-out source text (tokens separated by white space): see
//!   [`coverage`] for the token share, the share of spans found per length, and the greedy
//!   longest-match segmentation.
//! * **Retained mass and divergence** per source phrase of the base: see
//!   [`source_agreement`] (Jensen–Shannon divergence in nats of the distributions normalized
//!   over each table's own options; ln 2 for a source that lost every option). They are
//!   averaged over every source phrase of the base, and again weighted by how often each
//!   occurs as a span of the test text.
//! * **Reachability** of a reference translation: see [`reachability`].
//!
//! # Examples
//! ```
//! use baler::measure::{compare, CompareOptions, MeasuredTable};
//! let base = "source\ttarget\tp_t_given_s\nla llave\tthe key\t0.6\nla llave\tthe wrench\t0.4\n\
//!             roja\tred\t1\n";
//! let pruned = "source\ttarget\tp_t_given_s\nla llave\tthe key\t0.6\nroja\tred\t1\n";
//! let base = MeasuredTable::from_tsv(base.as_bytes(), "base.tsv", "p_t_given_s")?;
//! let pruned = MeasuredTable::from_tsv(pruned.as_bytes(), "pruned.tsv", "p_t_given_s")?;
//! let words = |s: &str| s.split(' ').map(String::from).collect::<Vec<_>>();
//! let test = vec![words("la llave roja")];
//! let report = compare(&base, &[&pruned], Some(&test), None, &CompareOptions::default())?;
//! let other = &report.tables[1];
//! assert_eq!(other.size.pairs, 2);
//! assert_eq!(other.agreement.retained_mass, (0.6 + 1.0) / 2.0);
//! assert_eq!(other.coverage.as_ref().unwrap().token_coverage, 1.0);
//! assert!(report.to_text().contains("retained mass"));
//! # Ok::<(), baler::Error>(())
//! ```

mod coverage;
mod divergence;
mod plot;
mod sweep;
mod table;

pub use coverage::MAX_ORDER;
pub use coverage::{coverage, reachability, Coverage, OrderShare, Reachability, SpanShare};
pub use divergence::{source_agreement, SourceAgreement};
pub use plot::{default_figures, plot_panels, plot_svg, series_of, Figure, Panel, PlotPoint};
pub use sweep::{Setting, SettingReport, SweepOptions, SweepQuality, SweepReport, Variation};
pub use table::{is_packed, Choice, FoundSpan, MeasuredTable};

use std::fmt::Write as _;
use std::path::Path;

use serde::Serialize;

use crate::error::{Error, Result};
use crate::files;

/// The probability column measured unless told otherwise.
pub const PROBABILITY_COLUMN: &str = "p_t_given_s";

/// Settings of [`compare`].
#[derive(Clone, Debug, Default)]
pub struct CompareOptions {
    /// Longest test span looked up, in tokens (`None`: the base's longest source phrase).
    pub max_length: Option<usize>,
}

/// Size figures of one table.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Size {
    /// Bytes of the file.
    pub file_bytes: u64,
    /// Phrase pairs.
    pub pairs: u64,
    /// Distinct source phrases.
    pub sources: u64,
    /// Mean options per source phrase.
    pub options_mean: f64,
    /// Median options per source phrase (the mean of the middle two for an even count).
    pub options_median: f64,
    /// Most options of any source phrase.
    pub options_max: u64,
    /// `file_bytes / pairs`.
    pub bytes_per_pair: f64,
}

/// Retained mass and divergence against the base, averaged (see [`source_agreement`]).
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Agreement {
    /// Source phrases of the base.
    pub sources: u64,
    /// Of those, how many have no option left.
    pub sources_emptied: u64,
    /// Mean retained mass over the base's source phrases.
    pub retained_mass: f64,
    /// Mean divergence (nats) over the base's source phrases.
    pub divergence: f64,
    /// Retained mass weighted by occurrences of the source as a test span (`None` without a
    /// test text or when no test span is a base source).
    pub test_retained_mass: Option<f64>,
    /// Divergence weighted the same way.
    pub test_divergence: Option<f64>,
}

/// Every figure for one table.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct TableReport {
    /// The table's name (its path).
    pub name: String,
    /// Size.
    pub size: Size,
    /// Coverage of the test text, when one was given.
    pub coverage: Option<Coverage>,
    /// Against the base (the base against itself: mass 1, divergence 0).
    pub agreement: Agreement,
    /// Reachability of the reference, when one was given.
    pub reachability: Option<Reachability>,
    /// Translation quality of a decoder using the table, when it was measured
    /// ([`crate::quality`]).
    pub quality: Option<QualityFigures>,
}

/// BLEU and chrF of one table's translations of the test text, and for a table other than the
/// base the paired-bootstrap difference from the base (Koehn 2004).
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct QualityFigures {
    /// Corpus BLEU (0–100).
    pub bleu: f64,
    /// Corpus chrF (0–100).
    pub chrf: f64,
    /// BLEU minus the base's (`None` for the base).
    pub bleu_delta: Option<f64>,
    /// Lower end of the 95% bootstrap interval of that difference.
    pub bleu_delta_low: Option<f64>,
    /// Upper end of the 95% bootstrap interval.
    pub bleu_delta_high: Option<f64>,
    /// Share of resampled test sets on which this table's BLEU is above the base's.
    pub share_better: Option<f64>,
}

/// The figures of a base table and others, side by side.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Comparison {
    /// The probability column compared.
    pub column: String,
    /// Longest test span looked up.
    pub max_length: usize,
    /// The base first, then the others in the order given.
    pub tables: Vec<TableReport>,
}

/// Reads a tokenized text: one sentence per line, tokens separated by white space
/// (`.gz`/`.zst` read transparently, `-` for standard input).
pub fn read_text(path: &Path) -> Result<Vec<Vec<String>>> {
    Ok(files::read_lines(path)?.iter().map(|l| tokens(l)).collect())
}

fn tokens(line: &str) -> Vec<String> {
    line.split_whitespace().map(String::from).collect()
}

/// Tokenized sentences, one per line of a text.
pub type Sentences = Vec<Vec<String>>;

/// Reads a test text and, optionally, its reference; they must have as many lines.
pub fn read_test_set(
    test: &Path,
    reference: Option<&Path>,
) -> Result<(Sentences, Option<Sentences>)> {
    let (source, reference) = match reference {
        None => (read_text(test)?, None),
        Some(path) => {
            let (s, r) = files::read_parallel(test, path)?;
            let tokenized = |lines: Vec<String>| lines.iter().map(|l| tokens(l)).collect();
            (tokenized(s), Some(tokenized(r)))
        }
    };
    Ok((source, reference))
}

/// The size figures of `table` (one pass over its pairs).
pub fn size(table: &MeasuredTable) -> Result<Size> {
    let mut per_source: Vec<u64> = Vec::new();
    table.for_each_source(|_, options| {
        per_source.push(options.len() as u64);
        Ok(())
    })?;
    Ok(size_from_counts(table.file_bytes(), per_source))
}

fn size_from_counts(file_bytes: u64, mut per_source: Vec<u64>) -> Size {
    per_source.sort_unstable();
    let pairs: u64 = per_source.iter().sum();
    let n = per_source.len();
    let median = match n {
        0 => 0.0,
        _ if n % 2 == 1 => per_source[n / 2] as f64,
        _ => (per_source[n / 2 - 1] + per_source[n / 2]) as f64 / 2.0,
    };
    Size {
        file_bytes,
        pairs,
        sources: n as u64,
        options_mean: if n == 0 { 0.0 } else { pairs as f64 / n as f64 },
        options_median: median,
        options_max: per_source.last().copied().unwrap_or(0),
        bytes_per_pair: if pairs == 0 {
            0.0
        } else {
            file_bytes as f64 / pairs as f64
        },
    }
}

/// Mean retained mass and divergence of `other` against `base` over the base's source
/// phrases; with `occurrences` (test-span counts of base sources) also the weighted means.
pub fn agreement(
    base: &MeasuredTable,
    other: &MeasuredTable,
    occurrences: Option<&std::collections::HashMap<String, u64>>,
) -> Result<Agreement> {
    let mut sources = 0u64;
    let mut emptied = 0u64;
    let (mut mass, mut divergence) = (0.0, 0.0);
    let (mut weight, mut test_mass, mut test_divergence) = (0u64, 0.0, 0.0);
    table_pairs(base, other, |source, a| {
        sources += 1;
        if a.retained_mass == 0.0 {
            emptied += 1;
        }
        mass += a.retained_mass;
        divergence += a.divergence;
        if let Some(w) = occurrences.and_then(|o| o.get(source)) {
            weight += w;
            test_mass += *w as f64 * a.retained_mass;
            test_divergence += *w as f64 * a.divergence;
        }
    })?;
    let mean = |x: f64, n: u64| if n == 0 { 0.0 } else { x / n as f64 };
    Ok(Agreement {
        sources,
        sources_emptied: emptied,
        retained_mass: if sources == 0 {
            1.0
        } else {
            mean(mass, sources)
        },
        divergence: mean(divergence, sources),
        test_retained_mass: (weight > 0).then(|| mean(test_mass, weight)),
        test_divergence: (weight > 0).then(|| mean(test_divergence, weight)),
    })
}

fn table_pairs<F>(base: &MeasuredTable, other: &MeasuredTable, mut visit: F) -> Result<()>
where
    F: FnMut(&str, SourceAgreement),
{
    base.for_each_source(|source, options| {
        let theirs = other.options(source)?;
        let a: Vec<(&str, f64)> = options
            .iter()
            .map(|c| (c.target.as_str(), c.probability))
            .collect();
        let b: Vec<(&str, f64)> = theirs
            .iter()
            .map(|c| (c.target.as_str(), c.probability))
            .collect();
        visit(source, source_agreement(&a, &b));
        Ok(())
    })
}

/// Measures `base` and every table of `others` (see the [module docs](self)). `test` is the
/// tokenized held-out source text and `reference` its translation, line by line.
///
/// # Errors
/// Read errors of the tables, or a reference whose sentence count differs from the test's.
pub fn compare(
    base: &MeasuredTable,
    others: &[&MeasuredTable],
    test: Option<&[Vec<String>]>,
    reference: Option<&[Vec<String>]>,
    options: &CompareOptions,
) -> Result<Comparison> {
    let baseline = Baseline::new(base, test, reference, options)?;
    let mut tables = Vec::with_capacity(others.len() + 1);
    tables.push(baseline.report.clone());
    for table in others {
        tables.push(baseline.measure(table)?);
    }
    Ok(Comparison {
        column: base.column().to_string(),
        max_length: baseline.max_length,
        tables,
    })
}

/// The base's figures and test-span occurrences, computed once and measured against many
/// tables (a sweep measures every setting against the same base).
pub(crate) struct Baseline<'a> {
    base: &'a MeasuredTable,
    test: Option<&'a [Vec<String>]>,
    reference: Option<&'a [Vec<String>]>,
    pub(crate) max_length: usize,
    occurrences: Option<std::collections::HashMap<String, u64>>,
    pub(crate) report: TableReport,
}

impl<'a> Baseline<'a> {
    pub(crate) fn new(
        base: &'a MeasuredTable,
        test: Option<&'a [Vec<String>]>,
        reference: Option<&'a [Vec<String>]>,
        options: &CompareOptions,
    ) -> Result<Baseline<'a>> {
        if let (Some(t), Some(r)) = (test, reference) {
            if t.len() != r.len() {
                return Err(Error::invalid(
                    "--reference",
                    format!("{} sentences for {} test sentences", r.len(), t.len()),
                ));
            }
        }
        let reference = if test.is_some() { reference } else { None };
        let max_length = options.max_length.unwrap_or(base.longest_source()).max(1);
        let pass = match test {
            Some(t) => Some(coverage::test_pass(base, t, reference, max_length, true)?),
            None => None,
        };
        let occurrences = pass.as_ref().map(|p| p.occurrences.clone());
        let report = TableReport {
            name: base.name().to_string(),
            size: size(base)?,
            coverage: pass.as_ref().map(|p| p.coverage.clone()),
            agreement: agreement(base, base, occurrences.as_ref())?,
            reachability: pass.and_then(|p| p.reachability),
            quality: None,
        };
        Ok(Baseline {
            base,
            test,
            reference,
            max_length,
            occurrences,
            report,
        })
    }

    /// The figures of `table` against the base.
    pub(crate) fn measure(&self, table: &MeasuredTable) -> Result<TableReport> {
        let pass = match self.test {
            Some(t) => Some(coverage::test_pass(
                table,
                t,
                self.reference,
                self.max_length,
                false,
            )?),
            None => None,
        };
        Ok(TableReport {
            name: table.name().to_string(),
            size: size(table)?,
            coverage: pass.as_ref().map(|p| p.coverage.clone()),
            agreement: agreement(self.base, table, self.occurrences.as_ref())?,
            reachability: pass.and_then(|p| p.reachability),
            quality: None,
        })
    }
}

/// One value of the rendered report.
#[derive(Clone, Copy)]
enum Cell {
    Whole(u64),
    Real(f64),
    Missing,
}

impl Cell {
    fn of(x: Option<f64>) -> Cell {
        x.map_or(Cell::Missing, Cell::Real)
    }
    /// Four decimals for reading.
    fn text(self) -> String {
        match self {
            Cell::Whole(n) => n.to_string(),
            Cell::Real(x) => format!("{x:.4}"),
            Cell::Missing => "-".into(),
        }
    }
    /// Every digit (the shortest form that reads back the same) for scripts.
    fn csv(self) -> String {
        match self {
            Cell::Whole(n) => n.to_string(),
            Cell::Real(x) if x != 0.0 && x.abs() < 1e-4 => format!("{x:e}"),
            Cell::Real(x) => format!("{x}"),
            Cell::Missing => String::new(),
        }
    }
}

/// One row of the rendered report: a name and a value per table.
type Row = (String, Vec<Cell>);

impl Comparison {
    fn rows(&self) -> Vec<Row> {
        use Cell::{Real, Whole};
        let mut rows: Vec<Row> = Vec::new();
        let t = &self.tables;
        let mut add = |name: &str, f: &dyn Fn(&TableReport) -> Cell| {
            rows.push((name.to_string(), t.iter().map(f).collect()));
        };
        add("file_bytes", &|r| Whole(r.size.file_bytes));
        add("pairs", &|r| Whole(r.size.pairs));
        add("sources", &|r| Whole(r.size.sources));
        add("options_mean", &|r| Real(r.size.options_mean));
        add("options_median", &|r| Real(r.size.options_median));
        add("options_max", &|r| Whole(r.size.options_max));
        add("bytes_per_pair", &|r| Real(r.size.bytes_per_pair));
        add("retained_mass", &|r| Real(r.agreement.retained_mass));
        add("divergence", &|r| Real(r.agreement.divergence));
        add("sources_emptied", &|r| Whole(r.agreement.sources_emptied));
        if t.iter().any(|r| r.coverage.is_some()) {
            add("test_retained_mass", &|r| {
                Cell::of(r.agreement.test_retained_mass)
            });
            add("test_divergence", &|r| {
                Cell::of(r.agreement.test_divergence)
            });
            add("token_coverage", &|r| {
                Cell::of(r.coverage.as_ref().map(|c| c.token_coverage))
            });
            for l in 0..self.max_length {
                add(&format!("span_share_{}", l + 1), &|r| {
                    Cell::of(r.coverage.as_ref().map(|c| c.spans_by_length[l].share))
                });
            }
            add("mean_segment_length", &|r| {
                Cell::of(r.coverage.as_ref().map(|c| c.mean_segment_length))
            });
        }
        if t.iter().any(|r| r.reachability.is_some()) {
            for o in 0..MAX_ORDER {
                add(&format!("reachable_{}", o + 1), &|r| {
                    Cell::of(r.reachability.as_ref().map(|x| x.by_order[o].share))
                });
            }
            add("reachable", &|r| {
                Cell::of(r.reachability.as_ref().map(|x| x.share))
            });
        }
        if t.iter().any(|r| r.quality.is_some()) {
            let q = |f: fn(&QualityFigures) -> Option<f64>| {
                move |r: &TableReport| Cell::of(r.quality.as_ref().and_then(f))
            };
            add("bleu", &q(|q| Some(q.bleu)));
            add("chrf", &q(|q| Some(q.chrf)));
            add("bleu_delta", &q(|q| q.bleu_delta));
            add("bleu_delta_low", &q(|q| q.bleu_delta_low));
            add("bleu_delta_high", &q(|q| q.bleu_delta_high));
            add("share_better", &q(|q| q.share_better));
        }
        rows
    }

    /// A readable table: one row per figure, one column per table, the base first.
    pub fn to_text(&self) -> String {
        let rows: Vec<(String, Vec<String>)> = self
            .rows()
            .into_iter()
            .map(|(n, cells)| (n, cells.into_iter().map(Cell::text).collect()))
            .collect();
        let labels: Vec<String> = rows.iter().map(|(n, _)| n.replace('_', " ")).collect();
        let names: Vec<String> = self
            .tables
            .iter()
            .enumerate()
            .map(|(i, t)| {
                let file = Path::new(&t.name)
                    .file_name()
                    .map_or(t.name.clone(), |f| f.to_string_lossy().into_owned());
                if i == 0 {
                    format!("{file} (base)")
                } else {
                    file
                }
            })
            .collect();
        let first = labels.iter().map(|l| l.chars().count()).max().unwrap_or(0);
        let widths: Vec<usize> = (0..names.len())
            .map(|c| {
                rows.iter()
                    .map(|r| r.1[c].chars().count())
                    .chain([names[c].chars().count()])
                    .max()
                    .unwrap_or(0)
            })
            .collect();
        let mut out = String::new();
        let _ = write!(out, "{:first$}", "");
        for (c, n) in names.iter().enumerate() {
            let _ = write!(out, "  {:>w$}", n, w = widths[c]);
        }
        out.push('\n');
        for (label, (_, values)) in labels.iter().zip(&rows) {
            let _ = write!(out, "{label:first$}");
            for (c, v) in values.iter().enumerate() {
                let _ = write!(out, "  {:>w$}", v, w = widths[c]);
            }
            out.push('\n');
        }
        let _ = writeln!(
            out,
            "(divergence: the mean Jensen-Shannon divergence in nats of {} against the \
             base, ln 2 = 0.6931 for a source that lost every option; spans up to {} tokens)",
            self.column, self.max_length
        );
        if self.tables.iter().any(|t| t.quality.is_some()) {
            out.push_str(
                "(translation quality: bleu and chrf of a decoder's translations of the test text \
                 with each table; bleu \
                 delta low/high: the 95% interval of the difference from the base by paired \
                 bootstrap, 1000 samples; share better: of resampled test sets)\n",
            );
        }
        out
    }

    /// CSV (RFC 4180): a header line `table,<figure>,...`, then one line per table.
    pub fn to_csv(&self) -> String {
        let rows = self.rows();
        let mut out = String::from("table");
        for (name, _) in &rows {
            out.push(',');
            out.push_str(name);
        }
        out.push_str("\r\n");
        for (i, t) in self.tables.iter().enumerate() {
            out.push_str(&csv_field(&t.name));
            for (_, values) in &rows {
                out.push(',');
                out.push_str(&values[i].csv());
            }
            out.push_str("\r\n");
        }
        out
    }
}

/// A CSV field, quoted when it holds a comma, quote or line break (RFC 4180).
pub(crate) fn csv_field(text: &str) -> String {
    if text.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", text.replace('"', "\"\""))
    } else {
        text.to_string()
    }
}
