//! `baler tune`: fit the translation weights on a development set and write a weights file.

use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

use baler::decode::DecodeSettings;
use baler::files::Output;
use baler::lm::LanguageModel;
use baler::tune::{coordinate_ascent, TuneSettings};
use baler::Error;

/// Arguments of `baler tune`.
#[derive(clap::Args)]
pub struct Args {
    /// The packed phrase table.
    table: PathBuf,
    /// The target-language model.
    #[arg(long, value_name = "MODEL")]
    lm: PathBuf,
    /// Development source text, one tokenized sentence a line.
    #[arg(long, value_name = "FILE")]
    source: PathBuf,
    /// Its reference translations.
    #[arg(long, value_name = "FILE")]
    reference: PathBuf,
    /// Start from these weights instead of the defaults.
    #[arg(long, value_name = "FILE")]
    weights: Option<PathBuf>,
    /// The weights file to write.
    #[arg(short, long, value_name = "FILE")]
    output: PathBuf,
    /// Rounds over all weights (the step halves after each).
    #[arg(long, value_name = "N", default_value_t = 2)]
    rounds: usize,
    /// Hypotheses kept per stack while tuning.
    #[arg(long, value_name = "N", default_value_t = 30)]
    beam: usize,
    /// `--threads` (decoding threads) and `-q`.
    #[command(flatten)]
    resources: crate::cli::flags::ThreadFlags,
}

pub fn run(args: Args) -> baler::Result<ExitCode> {
    let table = baler::Table::open(&args.table)?;
    let lm = LanguageModel::open(&args.lm)?;
    let start =
        crate::cli::translate::resolve_weights(table.schema(), args.weights.as_deref(), &[])?;
    let (source, reference) = baler::files::read_parallel(&args.source, &args.reference)?;
    let settings = TuneSettings {
        rounds: args.rounds,
        threads: args.resources.resources.threads,
        search: DecodeSettings {
            beam: args.beam,
            ..DecodeSettings::default()
        },
        ..TuneSettings::default()
    };
    let quiet = args.resources.quiet;
    let tuned = coordinate_ascent(&table, &lm, start, &source, &reference, &settings, |t| {
        if !quiet {
            if t.feature.is_empty() {
                eprintln!("baler tune: start weights: BLEU {:.2}", t.bleu);
            } else {
                eprintln!(
                    "baler tune: {} = {:.4}: BLEU {:.2}",
                    t.feature, t.value, t.bleu
                );
            }
        }
    })?;
    let mut out = Output::create(&args.output)?;
    write!(
        out,
        "# development BLEU {:.2} (start {:.2})\n{}",
        tuned.bleu,
        tuned.start_bleu,
        tuned.weights.to_text()
    )
    .map_err(|e| Error::io(&args.output, "writing", e))?;
    out.commit()?;
    Ok(ExitCode::SUCCESS)
}
