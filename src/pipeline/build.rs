//! `baler build`: a whole build from one recipe.

use std::path::Path;

use super::{prune_and_pack, Packing};
use crate::error::{Error, Result};
use crate::extract::ExtractSummary;
use crate::files::{Output, TempDir};
use crate::measure::{self, CompareOptions, Comparison, MeasuredTable};
use crate::pack::PackReport;
use crate::prune::PruneStats;
use crate::quality::{self, QualityReport};
use crate::recipe::Recipe;

/// What [`build`] did.
#[derive(Clone, Debug)]
pub struct BuildReport {
    /// Extraction.
    pub extract: ExtractSummary,
    /// Pruning.
    pub prune: PruneStats,
    /// Packing.
    pub pack: PackReport,
    /// The unpruned table against the packed one (on the held-out set when there is one).
    pub comparison: Comparison,
    /// BLEU and chrF of both on the held-out set, when the recipe has `[quality]`.
    pub quality: Option<QualityReport>,
}

impl BuildReport {
    /// The report as JSON: the comparison, with a `quality` key when quality was measured.
    pub fn to_json(&self) -> serde_json::Value {
        let mut value = serde_json::to_value(&self.comparison).expect("figures serialize");
        if let Some(q) = &self.quality {
            value["quality"] = serde_json::to_value(q).expect("figures serialize");
        }
        value
    }

    /// The readable report: the comparison (with quality rows when measured).
    pub fn to_text(&self) -> String {
        self.comparison.to_text()
    }
}

/// Runs `recipe`: extracts the corpus into the unpruned table (kept at `extracted`, or in a
/// temporary folder beside the output), prunes it and packs the kept pairs straight into the
/// output ([`prune_and_pack`], no intermediate pruned file), recording the recipe's
/// file name and text and the tool's version in the packed table's provenance, then compares
/// the unpruned table with the packed one. `progress` draws progress bars on stderr.
pub fn build(recipe: &Recipe, progress: bool) -> Result<BuildReport> {
    for path in [
        Some(&recipe.table),
        recipe.extracted.as_ref(),
        recipe.stats.as_ref(),
        recipe.report.as_ref(),
    ]
    .into_iter()
    .flatten()
    {
        if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
            std::fs::create_dir_all(dir).map_err(|e| Error::io(dir, "creating", e))?;
        }
    }
    let mut extract_options = recipe.extract.clone();
    extract_options.shard.progress = progress;
    let beside = recipe
        .table
        .parent()
        .filter(|d| !d.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let work = TempDir::new(Some(beside), ".baler-build-")?;
    if extract_options.shard.temp_dir.is_none() {
        extract_options.shard.temp_dir = Some(work.path().to_path_buf());
    }
    let extracted = recipe
        .extracted
        .clone()
        .unwrap_or_else(|| work.path().join("extracted.tsv"));
    let summary = super::extract_file(&recipe.corpus, &extract_options, &extracted)?;
    let mut pack = Packing {
        settings: recipe.pack.clone(),
        resources: recipe.pack_resources.clone(),
        progress,
        provenance: Vec::new(),
    };
    pack.resources
        .temp_dir
        .get_or_insert_with(|| work.path().to_path_buf());
    if recipe.extracted.is_none() {
        // the unpruned table is temporary: name what it was made from instead
        let c = &recipe.corpus;
        let alignment = c
            .alignment
            .as_ref()
            .map_or(String::new(), |a| a.display().to_string());
        pack.provenance.push((
            "input".into(),
            format!(
                "extracted from {}, {}, {}",
                c.source.display(),
                c.target.display(),
                alignment
            ),
        ));
    }
    pack.provenance.push((
        "built_by".into(),
        format!("baler build {}", env!("CARGO_PKG_VERSION")),
    ));
    pack.provenance
        .push(("recipe_file".into(), recipe.file.display().to_string()));
    pack.provenance.push(("recipe".into(), recipe.text.clone()));
    let mut prune = recipe.prune.clone();
    prune.progress = progress;
    let (stats, packed) = prune_and_pack(&extracted, &recipe.table, &prune, &pack)?;
    if let Some(path) = &recipe.stats {
        write_json(path, &stats)?;
    }
    let mut base = MeasuredTable::open(&extracted, measure::PROBABILITY_COLUMN)?;
    if recipe.extracted.is_none() {
        base = base.with_name("extracted (not kept)");
    }
    let table = MeasuredTable::open(&recipe.table, measure::PROBABILITY_COLUMN)?;
    let test = match &recipe.held_out {
        Some(h) => Some(measure::read_test_set(&h.source, h.reference.as_deref())?),
        None => None,
    };
    let options = CompareOptions {
        max_length: recipe.held_out.as_ref().and_then(|h| h.max_length),
    };
    let mut comparison = measure::compare(
        &base,
        &[&table],
        test.as_ref().map(|t| t.0.as_slice()),
        test.as_ref().and_then(|t| t.1.as_deref()),
        &options,
    )?;
    let quality = match (&recipe.quality, &recipe.held_out) {
        (Some(q), Some(h)) => {
            let reference = h.reference.as_deref().expect("checked by the recipe");
            // decoding reads packed tables: pack the unpruned table once, in the work folder
            let base = work.path().join("unpruned.bale");
            let unpruned = Packing {
                settings: recipe.pack.clone(),
                resources: pack.resources.clone(),
                ..Packing::default()
            };
            super::pack_file(&extracted, &base, &unpruned)?;
            let mut report = quality::measure_tables(
                &q.lm,
                q.weights.as_deref(),
                &h.source,
                reference,
                &base,
                std::slice::from_ref(&recipe.table),
                recipe.pack_resources.threads,
            )?;
            report.tables[0].0 = if recipe.extracted.is_some() {
                extracted.display().to_string()
            } else {
                "extracted (not kept)".to_string()
            };
            Some(report)
        }
        _ => None,
    };
    if let Some(q) = &quality {
        let figures = q.figures();
        // the comparison's base is the extracted table; its quality is the unpruned packing's
        for (table, f) in comparison.tables.iter_mut().zip(figures) {
            table.quality = Some(f);
        }
    }
    let report = BuildReport {
        extract: summary,
        prune: stats,
        pack: packed,
        comparison,
        quality,
    };
    if let Some(path) = &recipe.report {
        write_json(path, &report.to_json())?;
    }
    Ok(report)
}

fn write_json<T: serde::Serialize>(path: &Path, value: &T) -> Result<()> {
    let mut out = Output::create(path)?;
    serde_json::to_writer_pretty(&mut out, value)
        .map_err(|e| Error::io(path, "writing", e.into()))?;
    std::io::Write::write_all(&mut out, b"\n").map_err(|e| Error::io(path, "writing", e))?;
    out.commit()
}
