//! Translation quality of a table: decode a test set with it and score the output (BLEU,
//! chrF), and compare two tables by paired bootstrap. The one function `compare`, `sweep` and
//! `build` call to put quality beside their other figures.
//!
//! ```
//! # fn main() -> baler::Result<()> {
//! let dir = tempfile::tempdir().unwrap();
//! let table_path = dir.path().join("t.bale");
//! let tsv = "source\ttarget\tp_t_given_s\nle ferry\tthe ferry\t0.9\npart\tleaves\t0.8\n\
//!            maintenant\tnow\t0.7\n";
//! baler::pack::pack_tsv(tsv.as_bytes(), "t.tsv", &table_path, &Default::default())?;
//! let lm_path = dir.path().join("en.balm");
//! baler::lm::build("the ferry leaves now\n".as_bytes(), "en.txt", &Default::default())?.write(&lm_path)?;
//! let lm = baler::lm::LanguageModel::open(&lm_path)?;
//! let test = baler::quality::TestSet {
//!     source: vec!["le ferry part maintenant".into()],
//!     reference: vec!["the ferry leaves now".into()],
//! };
//! let setup = baler::quality::QualitySetup::new(&lm, None);
//! let q = baler::quality::measure(&baler::Table::open(&table_path)?, &test, &setup)?;
//! assert!((q.bleu - 100.0).abs() < 1e-9);
//! # Ok(()) }
//! ```

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use serde::Serialize;

use crate::decode::{translate_all, DecodeSettings, Decoder, Weights};
use crate::error::{Error, Result};
use crate::evaluate::{paired_bootstrap, CorpusStats};
use crate::lm::LanguageModel;
use crate::measure::QualityFigures;
use crate::read::Table;

/// A test set: source sentences and their reference translations, line by line.
#[derive(Clone, Debug, Default)]
pub struct TestSet {
    /// Tokenized source sentences.
    pub source: Vec<String>,
    /// Tokenized references.
    pub reference: Vec<String>,
}

impl TestSet {
    /// Reads both files; their line counts must agree.
    pub fn read(source: &Path, reference: &Path) -> Result<TestSet> {
        let (s, r) = crate::files::read_parallel(source, reference)?;
        Ok(TestSet {
            source: s,
            reference: r,
        })
    }
}

/// What decoding needs besides the table.
#[derive(Clone)]
pub struct QualitySetup<'a> {
    /// The target-language model.
    pub lm: &'a LanguageModel,
    /// A weights file (defaults for the table's columns otherwise).
    pub weights: Option<PathBuf>,
    /// Search settings.
    pub search: DecodeSettings,
    /// Decoding threads (0: every core).
    pub threads: usize,
    /// Bootstrap samples for [`versus`].
    pub samples: usize,
}

impl<'a> QualitySetup<'a> {
    /// Default search settings, every core, 1000 bootstrap samples.
    pub fn new(lm: &'a LanguageModel, weights: Option<PathBuf>) -> QualitySetup<'a> {
        QualitySetup {
            lm,
            weights,
            search: DecodeSettings::default(),
            threads: 0,
            samples: 1000,
        }
    }
}

/// A table's quality on a test set.
#[derive(Clone, Debug, Serialize)]
pub struct Quality {
    /// Corpus BLEU (0–100).
    pub bleu: f64,
    /// Corpus chrF (0–100).
    pub chrf: f64,
    /// Per-sentence statistics, for the bootstrap.
    #[serde(skip)]
    pub stats: CorpusStats,
}

/// A table's quality difference from a base, by paired bootstrap (Koehn 2004).
#[derive(Clone, Debug, Serialize)]
pub struct QualityDelta {
    /// BLEU of the other table minus the base's.
    pub bleu: f64,
    /// 95% interval of that difference.
    pub bleu_interval: (f64, f64),
    /// Share of resampled test sets where the other table's BLEU is above the base's.
    pub share_better: f64,
    /// chrF difference.
    pub chrf: f64,
}

/// Decodes `test` with `table` and scores the output.
pub fn measure(table: &Table, test: &TestSet, setup: &QualitySetup<'_>) -> Result<Quality> {
    let mut weights = Weights::defaults(table.schema());
    if let Some(w) = &setup.weights {
        weights = Weights::read(w, weights)?;
    }
    let decoder = Decoder::new(table, setup.lm, weights, setup.search.clone());
    let out = translate_all(&decoder, &test.source, setup.threads, false)?;
    let hyps: Vec<&str> = out.iter().map(|t| t.text.as_str()).collect();
    let stats = CorpusStats::new(&hyps, &test.reference);
    let (b, c) = stats.scores();
    Ok(Quality {
        bleu: b.score,
        chrf: c,
        stats,
    })
}

/// Opens a packed table and measures it (quality needs a packed table: decoding reads it
/// through [`Table::spans`]).
pub fn measure_path(path: &Path, test: &TestSet, setup: &QualitySetup<'_>) -> Result<Quality> {
    if !crate::read::is_packed(path) {
        return Err(Error::invalid(
            "--lm",
            format!(
                "{}: translation quality needs a packed table (baler pack)",
                path.display()
            ),
        ));
    }
    measure(&Table::open(path)?, test, setup)
}

/// The paired bootstrap of `other` against `base`.
pub fn versus(base: &Quality, other: &Quality, samples: usize) -> QualityDelta {
    let r = paired_bootstrap(&base.stats, &other.stats, samples, 1);
    QualityDelta {
        bleu: other.bleu - base.bleu,
        bleu_interval: r.bleu_delta,
        share_better: 1.0 - r.bleu_p,
        chrf: other.chrf - base.chrf,
    }
}

/// Quality of every table, the base first.
#[derive(Clone, Debug, Serialize)]
pub struct QualityReport {
    /// (table, quality, difference from the base)
    pub tables: Vec<(String, Quality, Option<QualityDelta>)>,
}

impl QualityReport {
    /// The figures of each table in order, the base first, as [`TableReport::quality`]
    /// holds them.
    ///
    /// [`TableReport::quality`]: crate::measure::TableReport::quality
    pub fn figures(&self) -> Vec<QualityFigures> {
        self.tables
            .iter()
            .map(|(_, q, d)| QualityFigures {
                bleu: q.bleu,
                chrf: q.chrf,
                bleu_delta: d.as_ref().map(|d| d.bleu),
                bleu_delta_low: d.as_ref().map(|d| d.bleu_interval.0),
                bleu_delta_high: d.as_ref().map(|d| d.bleu_interval.1),
                share_better: d.as_ref().map(|d| d.share_better),
            })
            .collect()
    }

    /// The readable block: one line per table.
    pub fn to_text(&self) -> String {
        let mut s = String::from(
            "\ntranslation quality (paired bootstrap against the base, 1000 samples)\n",
        );
        let _ = writeln!(
            s,
            "{:<40} {:>7} {:>7} {:>8} {:>18} {:>8}",
            "table", "BLEU", "chrF", "ΔBLEU", "95% interval", "better"
        );
        for (name, q, d) in &self.tables {
            match d {
                None => {
                    let _ = writeln!(s, "{name:<40} {:>7.2} {:>7.2}", q.bleu, q.chrf);
                }
                Some(d) => {
                    let _ = writeln!(
                        s,
                        "{name:<40} {:>7.2} {:>7.2} {:>+8.2} {:>18} {:>8.3}",
                        q.bleu,
                        q.chrf,
                        d.bleu,
                        format!("[{:+.2}, {:+.2}]", d.bleu_interval.0, d.bleu_interval.1),
                        d.share_better
                    );
                }
            }
        }
        s
    }
}

/// Checks, before any work, what [`measure_tables`] will read: opens the model (verifying
/// its checksum), parses the weights file and reads the test set (source and reference must
/// have as many lines).
///
/// # Errors
/// The first problem found, naming its file.
pub fn check_setup(lm: &Path, weights: Option<&Path>, test: &Path, reference: &Path) -> Result<()> {
    LanguageModel::open(lm)?;
    if let Some(w) = weights {
        Weights::read(
            w,
            Weights {
                values: Default::default(),
            },
        )?;
    }
    TestSet::read(test, reference)?;
    Ok(())
}

/// Decodes the test set with `base` and each of `others` (packed tables) using the model at
/// `lm` and the weights file `weights` (defaults otherwise), and scores each against
/// `reference`, with the paired-bootstrap difference of each other table from the base.
/// Sentences are decoded on `threads` threads (0: every core).
pub fn measure_tables(
    lm: &Path,
    weights: Option<&Path>,
    test: &Path,
    reference: &Path,
    base: &Path,
    others: &[PathBuf],
    threads: usize,
) -> Result<QualityReport> {
    let lm = LanguageModel::open(lm)?;
    let set = TestSet::read(test, reference)?;
    let mut setup = QualitySetup::new(&lm, weights.map(Path::to_path_buf));
    setup.threads = threads;
    let base_q = measure_path(base, &set, &setup)?;
    let mut tables = vec![(base.display().to_string(), base_q.clone(), None)];
    for p in others {
        let q = measure_path(p, &set, &setup)?;
        let d = versus(&base_q, &q, setup.samples);
        tables.push((p.display().to_string(), q, Some(d)));
    }
    Ok(QualityReport { tables })
}
