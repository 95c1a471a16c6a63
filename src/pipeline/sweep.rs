//! A sweep: prune and pack at every setting of a grid, measure each, write CSV and a plot.

use std::path::Path;

use super::{prune_and_pack, prune_file, Packing};
use crate::error::{Error, Result};
use crate::files::{Output, TempDir};
use crate::measure::{
    self, MeasuredTable, Setting, SettingReport, SweepOptions, SweepReport, PROBABILITY_COLUMN,
};
use crate::prune::PruneOptions;

/// Prunes and packs `input` at every setting of `options.variations`' grid into
/// `out_dir/setting-NN.bale`, measures each against the unpruned input (as [`crate::measure::compare`]
/// does), and writes `out_dir/sweep.csv` (one line per setting) and `out_dir/sweep.svg`
/// ([`measure::plot_svg`]). A TSV input not grouped by source is sorted once first.
pub fn sweep(input: &Path, options: &SweepOptions) -> Result<SweepReport> {
    if options.variations.is_empty() {
        return Err(Error::invalid("--vary", "give at least one NAME=VALUES"));
    }
    let settings = Setting::grid(&options.variations)?;
    std::fs::create_dir_all(&options.out_dir)
        .map_err(|e| Error::io(&options.out_dir, "creating", e))?;
    let base = MeasuredTable::open(input, PROBABILITY_COLUMN)?;
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
        let table = MeasuredTable::open(&path, PROBABILITY_COLUMN)?;
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
    let report = SweepReport {
        base: baseline.report.clone(),
        max_length: baseline.max_length,
        settings: reports,
        csv,
        svg,
    };
    let mut out = Output::create(&report.csv)?;
    std::io::Write::write_all(&mut out, report.to_csv().as_bytes())
        .map_err(|e| Error::io(&report.csv, "writing", e))?;
    out.commit()?;
    let mut out = Output::create(&report.svg)?;
    std::io::Write::write_all(&mut out, measure::plot_svg(&report)?.as_bytes())
        .map_err(|e| Error::io(&report.svg, "writing", e))?;
    out.commit()?;
    Ok(report)
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
