//! A sweep: prune and pack at every setting of a grid, measure each, write CSV and a plot.

use std::path::Path;

use super::{pack_file, prune_and_pack, prune_file, Packing};
use crate::error::{Error, Result};
use crate::files::{Output, TempDir};
use crate::measure::{
    self, Figure, MeasuredTable, Setting, SettingReport, SweepOptions, SweepReport,
    PROBABILITY_COLUMN,
};
use crate::prune::PruneOptions;
use crate::quality;
use crate::read::is_packed;

/// Prunes and packs `input` at every setting of `options.variations`' grid into
/// `out_dir/setting-NN.bale`, measures each against the unpruned input (as [`crate::measure::compare`]
/// does), and writes `out_dir/sweep.csv` (one line per setting) and `out_dir/sweep.svg`
/// ([`measure::plot_svg`] of `options.plot`). A TSV input not grouped by source is sorted once
/// first.
///
/// With `options.quality`, every table (the base included) also translates the test set and
/// gets BLEU and chrF ([`quality::measure_tables`]); decoding reads packed tables, so a TSV
/// input is first packed into `out_dir/base.bale`, which then stands for the base in every
/// figure (sizes are compared packed against packed).
pub fn sweep(input: &Path, options: &SweepOptions) -> Result<SweepReport> {
    if options.variations.is_empty() {
        return Err(Error::invalid("--vary", "give at least one NAME=VALUES"));
    }
    let settings = Setting::grid(&options.variations)?;
    check_plot(options)?;
    if let Some(q) = &options.quality {
        quality::check_setup(&q.lm, q.weights.as_deref(), &q.test, &q.reference)?;
    }
    let column = options.column.as_deref().unwrap_or(PROBABILITY_COLUMN);
    std::fs::create_dir_all(&options.out_dir)
        .map_err(|e| Error::io(&options.out_dir, "creating", e))?;
    let packed_base = options.out_dir.join("base.bale");
    let input = if options.quality.is_some() && !is_packed(input) {
        let packing = Packing {
            resources: options.resources.clone(),
            ..Packing::default()
        };
        pack_file(input, &packed_base, &packing)?;
        packed_base.as_path()
    } else {
        input
    };
    let base = MeasuredTable::open(input, column)?;
    let sorted_dir;
    let sorted_copy;
    let source: &Path = if base.is_sorted_by_source() {
        input
    } else {
        sorted_dir = TempDir::new(Some(&options.out_dir), ".baler-sweep-")?;
        sorted_copy = sorted_dir.path().join("sorted.tsv.zst");
        let copy = PruneOptions {
            memory: options.resources.memory,
            temp_dir: options.resources.temp_dir.clone(),
            ..Default::default()
        };
        let packing = Packing {
            resources: options.resources.clone(),
            ..Packing::default()
        };
        prune_file(input, &sorted_copy, &copy, &packing)?;
        &sorted_copy
    };
    let bar = if options.progress {
        indicatif::ProgressBar::new(settings.len() as u64)
    } else {
        indicatif::ProgressBar::hidden()
    };
    bar.set_style(
        indicatif::ProgressStyle::with_template("{bar:30} {pos}/{len} settings {msg}")
            .expect("a valid template"),
    );
    let baseline = measure::Baseline::new(
        &base,
        Some(&options.test),
        options.reference.as_deref(),
        &options.compare,
    )?;
    let mut reports = Vec::with_capacity(settings.len());
    for (i, setting) in settings.iter().enumerate() {
        bar.set_message(setting.label.clone());
        let path = options.out_dir.join(format!("setting-{:02}.bale", i + 1));
        let mut prune = setting.prune.clone();
        prune.memory = options.resources.memory;
        prune.temp_dir = options.resources.temp_dir.clone();
        let (stats, _) = prune_and_pack(source, &path, &prune, &setting.packing(options))?;
        let table = MeasuredTable::open(&path, column)?;
        let figures = baseline.measure(&table)?;
        reports.push(SettingReport {
            label: setting.label.clone(),
            path,
            prune: stats,
            figures,
        });
        bar.inc(1);
    }
    bar.finish_and_clear();
    let csv = options.out_dir.join("sweep.csv");
    let svg = options.out_dir.join("sweep.svg");
    let mut report = SweepReport {
        column: column.to_string(),
        base: baseline.report.clone(),
        max_length: baseline.max_length,
        settings: reports,
        csv,
        svg,
    };
    if let Some(q) = &options.quality {
        let paths: Vec<_> = report.settings.iter().map(|s| s.path.clone()).collect();
        let measured = quality::measure_tables(
            &q.lm,
            q.weights.as_deref(),
            &q.test,
            &q.reference,
            input,
            &paths,
            options.resources.threads,
        )?;
        let tables = std::iter::once(&mut report.base)
            .chain(report.settings.iter_mut().map(|s| &mut s.figures));
        for (table, figures) in tables.zip(measured.figures()) {
            table.quality = Some(figures);
        }
    }
    let mut out = Output::create(&report.csv)?;
    std::io::Write::write_all(&mut out, report.to_csv().as_bytes())
        .map_err(|e| Error::io(&report.csv, "writing", e))?;
    out.commit()?;
    let mut out = Output::create(&report.svg)?;
    std::io::Write::write_all(
        &mut out,
        measure::plot_svg(&report, &options.plot)?.as_bytes(),
    )
    .map_err(|e| Error::io(&report.svg, "writing", e))?;
    out.commit()?;
    Ok(report)
}

/// Refuses, before any work, a plotted figure this sweep will not measure.
fn check_plot(options: &SweepOptions) -> Result<()> {
    for figure in &options.plot {
        let missing = match figure {
            Figure::Bleu | Figure::Chrf if options.quality.is_none() => {
                "it needs a language model (--lm) and a reference"
            }
            Figure::Reachability if options.reference.is_none() => "it needs a reference",
            _ => continue,
        };
        return Err(Error::invalid(
            "--plot",
            format!("cannot plot {}: {missing}", figure.name()),
        ));
    }
    Ok(())
}

impl Setting {
    /// How this setting's table is packed within the sweep's resources.
    fn packing(&self, options: &SweepOptions) -> Packing {
        Packing {
            settings: self.pack_settings.clone(),
            resources: options.resources.clone(),
            progress: false,
            provenance: vec![("sweep_setting".into(), self.label.clone())],
        }
    }
}
