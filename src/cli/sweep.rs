//! `baler sweep`: prune and pack at every setting of a grid, measure each, plot size against
//! coverage and reachability.

use std::path::PathBuf;
use std::process::ExitCode;

use baler::measure::{self, CompareOptions, Figure, SweepOptions, SweepQuality, Variation};
use baler::Error;

/// Arguments of `baler sweep`.
#[derive(clap::Args)]
#[command(after_help = "NAME is a prune filter (significance, top-k, min, max, \
    relative-entropy, keep-test-phrases) or a packing setting (bits, block-sources, group-targets, \
    compression; `baler pack --help` describes them). Several --vary make a grid; filters run in the order of the --vary flags. \
    Writes DIR/setting-NN.bale for each setting, DIR/sweep.csv and DIR/sweep.svg.")]
pub struct Args {
    /// The unpruned table: TSV (any order) or packed .bale.
    input: PathBuf,
    /// Held-out source text: one tokenized sentence per line.
    #[arg(long, value_name = "FILE")]
    test: PathBuf,
    /// Its reference translation: adds reachability to the figures and the plot.
    #[arg(long, value_name = "FILE")]
    reference: Option<PathBuf>,
    /// An option and its values: NAME=V1,V2,... (repeatable: a grid).
    #[arg(long, value_name = "NAME=V1,V2,...", required = true, action = clap::ArgAction::Append)]
    vary: Vec<String>,
    /// Output directory.
    #[arg(short, long, value_name = "DIR")]
    output: PathBuf,
    /// Longest test span looked up (default: the input's longest source phrase).
    #[arg(long, value_name = "N")]
    max_length: Option<usize>,
    /// Print the report as JSON on standard output instead of the readable table.
    #[arg(long)]
    json: bool,
    #[command(flatten)]
    quality: crate::cli::quality::QualityArgs,
    #[command(flatten)]
    column: crate::cli::flags::ColumnFlag,
    /// What DIR/sweep.svg plots against size, comma-separated: bleu, chrf, coverage, mass,
    /// divergence, reachability [default: bleu,chrf with --lm; coverage (and reachability with
    /// --reference) otherwise].
    #[arg(long, value_delimiter = ',', value_name = "NAME,...", value_parser = plot_figure)]
    plot: Vec<Figure>,
    #[command(flatten)]
    resources: crate::cli::flags::ResourceFlags,
}

fn plot_figure(text: &str) -> Result<Figure, String> {
    Figure::parse(text).map_err(|e| match e {
        Error::InvalidArgument { reason, .. } => reason,
        other => other.to_string(),
    })
}

pub fn run(args: Args) -> baler::Result<ExitCode> {
    if args.max_length == Some(0) {
        return Err(Error::invalid("--max-length", "must be at least 1"));
    }
    let variations = args
        .vary
        .iter()
        .map(|v| Variation::parse(v))
        .collect::<baler::Result<Vec<_>>>()?;
    let (test, reference) = measure::read_test_set(&args.test, args.reference.as_deref())?;
    let options = SweepOptions {
        variations,
        test,
        reference,
        out_dir: args.output.clone(),
        compare: CompareOptions {
            max_length: args.max_length,
        },
        resources: args.resources.resources.clone(),
        progress: !args.resources.quiet,
        column: Some(args.column.column.clone()),
        quality: match (&args.quality.lm, &args.reference) {
            (Some(lm), Some(reference)) => Some(SweepQuality {
                lm: lm.clone(),
                weights: args.quality.weights.clone(),
                test: args.test.clone(),
                reference: reference.clone(),
            }),
            _ => None,
        },
        plot: args.plot.clone(),
    };
    let quiet = args.resources.quiet;
    let report = baler::pipeline::sweep(&args.input, &options)?;
    if args.json {
        let mut text = serde_json::to_string_pretty(&report).expect("figures serialize");
        text.push('\n');
        super::print(&text)?;
    } else if !quiet {
        super::print(&summary(&report))?;
    }
    Ok(ExitCode::SUCCESS)
}

/// The readable summary: one line per table, the base first.
fn summary(report: &measure::SweepReport) -> String {
    use std::fmt::Write as _;
    let quality = report.base.quality.is_some();
    let mut out = String::new();
    let _ = write!(
        out,
        "{:<40} {:>10} {:>8} {:>9} {:>10} {:>9}",
        "setting", "bytes", "pairs", "coverage", "divergence", "reachable"
    );
    if quality {
        let _ = write!(
            out,
            " {:>7} {:>7} {:>8} {:>17}",
            "BLEU", "chrF", "ΔBLEU", "95% interval"
        );
    }
    out.push('\n');
    let rows = std::iter::once(("(base)", &report.base)).chain(
        report
            .settings
            .iter()
            .map(|s| (s.label.as_str(), &s.figures)),
    );
    for (label, f) in rows {
        let _ = write!(
            out,
            "{:<40} {:>10} {:>8} {:>9.4} {:>10.4} {:>9}",
            label,
            f.size.file_bytes,
            f.size.pairs,
            f.coverage.as_ref().map_or(0.0, |c| c.token_coverage),
            f.agreement.divergence,
            f.reachability
                .as_ref()
                .map_or("-".to_string(), |r| format!("{:.4}", r.share)),
        );
        if let Some(q) = &f.quality {
            let _ = write!(out, " {:>7.2} {:>7.2}", q.bleu, q.chrf);
            if let (Some(d), Some(lo), Some(hi)) =
                (q.bleu_delta, q.bleu_delta_low, q.bleu_delta_high)
            {
                let _ = write!(out, " {:>+8.2} {:>17}", d, format!("[{lo:+.2}, {hi:+.2}]"));
            }
        }
        out.push('\n');
    }
    if quality {
        out.push_str(
            "(ΔBLEU: against the base, with the 95% paired-bootstrap interval, 1000 samples)\n",
        );
    }
    let _ = writeln!(
        out,
        "wrote {} and {}",
        report.csv.display(),
        report.svg.display()
    );
    out
}
