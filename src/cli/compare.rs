//! `baler compare`: sizes, held-out coverage, retained mass, divergence and reachability of
//! tables side by side with a base.

use std::path::PathBuf;
use std::process::ExitCode;

use baler::measure::{self, CompareOptions, MeasuredTable};
use baler::Error;

/// Arguments of `baler compare`.
#[derive(clap::Args)]
#[command(
    after_help = "Divergence: per source phrase of BASE, the Jensen-Shannon divergence \
    (nats) between its p_t_given_s and OTHER's, each normalized over its own options; ln 2 for \
    a source with no option left. Coverage segments the test text greedily, longest match \
    first."
)]
pub struct Args {
    /// The base table (TSV or packed .bale).
    base: PathBuf,
    /// Tables to compare with it (TSV or packed).
    #[arg(required = true, value_name = "OTHER")]
    others: Vec<PathBuf>,
    /// Held-out source text: one tokenized sentence per line.
    #[arg(long, value_name = "FILE")]
    test: PathBuf,
    /// Its reference translation, line by line: adds the reachability of reference n-grams.
    #[arg(long, value_name = "FILE")]
    reference: Option<PathBuf>,
    /// Longest test span looked up (default: the base's longest source phrase).
    #[arg(long, value_name = "N")]
    max_length: Option<usize>,
    /// Print JSON instead of the readable table.
    #[arg(long, conflicts_with = "csv")]
    json: bool,
    /// Print CSV (one line per table) instead of the readable table.
    #[arg(long)]
    csv: bool,
    #[command(flatten)]
    quality: crate::cli::quality::QualityArgs,
    #[command(flatten)]
    column: crate::cli::flags::ColumnFlag,
    #[command(flatten)]
    threads: crate::cli::flags::ThreadFlags,
}

pub fn run(args: Args) -> baler::Result<ExitCode> {
    if args.max_length == Some(0) {
        return Err(Error::invalid("--max-length", "must be at least 1"));
    }
    if let (Some(lm), Some(reference)) = (&args.quality.lm, &args.reference) {
        baler::quality::check_setup(lm, args.quality.weights.as_deref(), &args.test, reference)?;
    }
    let (test, reference) = measure::read_test_set(&args.test, args.reference.as_deref())?;
    let column = args.column.column.as_str();
    let base = MeasuredTable::open(&args.base, column)?;
    let others = args
        .others
        .iter()
        .map(|p| MeasuredTable::open(p, column))
        .collect::<baler::Result<Vec<_>>>()?;
    let refs: Vec<&MeasuredTable> = others.iter().collect();
    let options = CompareOptions {
        max_length: args.max_length,
    };
    let mut report = measure::compare(&base, &refs, Some(&test), reference.as_deref(), &options)?;
    let quality = crate::cli::quality::for_tables(
        &args.quality,
        &args.test,
        args.reference.as_deref(),
        &args.base,
        &args.others,
        args.threads.resources.threads,
    )?;
    if let Some(q) = &quality {
        for (table, figures) in report.tables.iter_mut().zip(q.figures()) {
            table.quality = Some(figures);
        }
    }
    let text = if args.json {
        let mut s = serde_json::to_string_pretty(&report).expect("figures serialize");
        s.push('\n');
        s
    } else if args.csv {
        report.to_csv()
    } else {
        report.to_text()
    };
    super::print(&text)?;
    Ok(ExitCode::SUCCESS)
}
