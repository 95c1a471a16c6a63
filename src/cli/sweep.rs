//! `baler sweep`: prune and pack at every setting of a grid, measure each, plot size against
//! coverage and reachability.

use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

use baler::measure::{self, CompareOptions, SweepOptions, Variation};
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
    /// What to plot against size in DIR/quality.svg (with --lm): bleu, chrf, coverage, mass,
    /// divergence, comma-separated.
    #[arg(
        long,
        value_name = "NAME,...",
        value_delimiter = ',',
        default_value = "bleu,chrf"
    )]
    plot: Vec<String>,
    #[command(flatten)]
    resources: crate::cli::flags::ResourceFlags,
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
    };
    let quiet = args.resources.quiet;
    let report = baler::pipeline::sweep(&args.input, &options)?;
    let quality = crate::cli::quality::for_sweep(
        &args.quality,
        &args.test,
        args.reference.as_deref(),
        &args.input,
        &report,
        &args.plot,
        &args.output,
        &args.resources.resources,
        quiet || args.json,
    )?;
    if args.json {
        let mut value = serde_json::to_value(&report).expect("figures serialize");
        if let Some(q) = &quality {
            value["quality"] = serde_json::to_value(q).expect("figures serialize");
        }
        let mut text = serde_json::to_string_pretty(&value).expect("figures serialize");
        text.push('\n');
        super::print(&text)?;
    } else if !quiet {
        let mut out = std::io::stdout().lock();
        let werr = |e| Error::io("-", "writing", e);
        writeln!(
            out,
            "{:<40} {:>10} {:>8} {:>9} {:>10} {:>9}",
            "setting", "bytes", "pairs", "coverage", "divergence", "reachable"
        )
        .map_err(werr)?;
        for s in &report.settings {
            let f = &s.figures;
            writeln!(
                out,
                "{:<40} {:>10} {:>8} {:>9.4} {:>10.4} {:>9}",
                s.label,
                f.size.file_bytes,
                f.size.pairs,
                f.coverage.as_ref().map_or(0.0, |c| c.token_coverage),
                f.agreement.divergence,
                f.reachability
                    .as_ref()
                    .map_or("-".to_string(), |r| format!("{:.4}", r.share)),
            )
            .map_err(werr)?;
        }
        writeln!(
            out,
            "wrote {} and {}",
            report.csv.display(),
            report.svg.display()
        )
        .map_err(werr)?;
        out.flush().map_err(werr)?;
    }
    Ok(ExitCode::SUCCESS)
}
