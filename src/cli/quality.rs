//! The quality flags shared by `compare` and `sweep` (`--lm`, `--weights`), and what they add:
//! BLEU and chrF per table with the paired-bootstrap difference from the base.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use baler::measure::{Panel, PlotPoint, SweepReport};
use baler::quality::{self, QualityReport};
use baler::Error;

/// `--lm` and `--weights`.
#[derive(clap::Args, Clone)]
pub struct QualityArgs {
    /// Target-language model: decode the test set with each (packed) table and add BLEU and
    /// chrF against --reference.
    #[arg(long, value_name = "MODEL", requires = "reference")]
    pub lm: Option<PathBuf>,
    /// Decoder weights file (`baler tune`); defaults otherwise.
    #[arg(long, value_name = "FILE", requires = "lm")]
    pub weights: Option<PathBuf>,
}

/// `compare`'s quality block, when `--lm` is given.
pub fn for_tables(
    args: &QualityArgs,
    test: &Path,
    reference: Option<&Path>,
    base: &Path,
    others: &[PathBuf],
    threads: usize,
) -> baler::Result<Option<QualityReport>> {
    match (&args.lm, reference) {
        (Some(_), Some(r)) => quality::measure_tables(
            args.lm.as_ref().expect("checked"),
            args.weights.as_deref(),
            test,
            r,
            base,
            others,
            threads,
        )
        .map(Some),
        _ => Ok(None),
    }
}

/// `sweep`'s quality: DIR/quality.csv and DIR/quality.svg, when `--lm` is given.
#[allow(clippy::too_many_arguments)]
pub fn for_sweep(
    args: &QualityArgs,
    test: &Path,
    reference: Option<&Path>,
    input: &Path,
    report: &SweepReport,
    plot: &[String],
    out_dir: &Path,
    resources: &baler::settings::Resources,
    quiet: bool,
) -> baler::Result<Option<QualityReport>> {
    let (Some(_), Some(reference)) = (&args.lm, reference) else {
        return Ok(None);
    };
    for p in plot {
        if !["bleu", "chrf", "coverage", "mass", "divergence"].contains(&p.as_str()) {
            return Err(Error::invalid(
                "--plot",
                format!("{p:?} is none of bleu, chrf, coverage, mass, divergence"),
            ));
        }
    }
    // The base must be packed to be decoded: pack a TSV input once.
    let base = if baler::read::is_packed(input) {
        input.to_path_buf()
    } else {
        let packed = out_dir.join("base.bale");
        let name = input.to_string_lossy().into_owned();
        let reader = baler::files::open_input(input)?;
        let options = resources.pack_options(&Default::default());
        baler::pack::pack_tsv(reader, &name, &packed, &options)?;
        packed
    };
    let paths: Vec<PathBuf> = report.settings.iter().map(|s| s.path.clone()).collect();
    let q = quality::measure_tables(
        args.lm.as_ref().expect("checked"),
        args.weights.as_deref(),
        test,
        reference,
        &base,
        &paths,
        resources.threads,
    )?;
    let mut csv = String::from(
        "setting,table,file_bytes,bleu,chrf,bleu_delta,bleu_low,bleu_high,share_better\n",
    );
    let base_bytes = std::fs::metadata(&base)
        .map_err(|e| Error::io(&base, "reading", e))?
        .len();
    let _ = writeln!(
        csv,
        "base,{},{},{:.4},{:.4},,,,",
        base.display(),
        base_bytes,
        q.tables[0].1.bleu,
        q.tables[0].1.chrf
    );
    for (s, (_, t, d)) in report.settings.iter().zip(&q.tables[1..]) {
        let d = d.as_ref().expect("others have a delta");
        let _ = writeln!(
            csv,
            "{},{},{},{:.4},{:.4},{:.4},{:.4},{:.4},{:.4}",
            s.label,
            s.path.display(),
            s.figures.size.file_bytes,
            t.bleu,
            t.chrf,
            d.bleu,
            d.bleu_interval.0,
            d.bleu_interval.1,
            d.share_better
        );
    }
    let write = |name: &str, text: &str| -> baler::Result<()> {
        let path = out_dir.join(name);
        let mut out = baler::files::Output::create(&path)?;
        std::io::Write::write_all(&mut out, text.as_bytes())
            .map_err(|e| Error::io(&path, "writing", e))?;
        out.commit()
    };
    write("quality.csv", &csv)?;
    let panels: Vec<Panel> = plot
        .iter()
        .map(|what| {
            let value = |i: Option<usize>| -> f64 {
                match i {
                    None => match what.as_str() {
                        "bleu" => q.tables[0].1.bleu,
                        "chrf" => q.tables[0].1.chrf,
                        "coverage" => report
                            .base
                            .coverage
                            .as_ref()
                            .map_or(0.0, |c| c.token_coverage),
                        "mass" => report.base.agreement.retained_mass,
                        _ => report.base.agreement.divergence,
                    },
                    Some(i) => {
                        let f = &report.settings[i].figures;
                        match what.as_str() {
                            "bleu" => q.tables[i + 1].1.bleu,
                            "chrf" => q.tables[i + 1].1.chrf,
                            "coverage" => f.coverage.as_ref().map_or(0.0, |c| c.token_coverage),
                            "mass" => f.agreement.retained_mass,
                            _ => f.agreement.divergence,
                        }
                    }
                }
            };
            Panel {
                title: format!("Size against {what}"),
                y_label: what.clone(),
                base: Some((base_bytes, value(None))),
                points: report
                    .settings
                    .iter()
                    .enumerate()
                    .map(|(i, s)| PlotPoint {
                        label: s.label.clone(),
                        series: baler::measure::series_of(&s.label),
                        bytes: s.figures.size.file_bytes,
                        value: value(Some(i)),
                    })
                    .collect(),
            }
        })
        .collect();
    write("quality.svg", &baler::measure::plot_panels(&panels)?)?;
    if !quiet {
        print!("{}", q.to_text());
        println!(
            "wrote {} and {}",
            out_dir.join("quality.csv").display(),
            out_dir.join("quality.svg").display()
        );
    }
    Ok(Some(q))
}
