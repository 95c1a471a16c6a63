//! Flag definitions and dispatch. Exit codes: 0 success, 1 nothing found (lookup misses only),
//! 2 error.

mod build;
mod compare;
mod dump;
mod evaluate;
mod extract;
mod flags;
mod inspect;
mod lm;
mod lookup;
mod pack;
mod prune;
mod quality;
mod sweep;
mod synth;
mod translate;
mod tune;

use std::process::ExitCode;

use clap::{Parser, Subcommand};

/// Build, prune, pack and query phrase tables for phrase-based machine translation.
#[derive(Parser)]
#[command(name = "baler", version, about, propagate_version = true)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Extract and score phrase pairs from word-aligned parallel text.
    Extract(extract::Args),
    /// Remove noisy phrase pairs (significance test, top-k, thresholds).
    Prune(prune::Args),
    /// Pack an interchange TSV table into a memory-mappable .bale file.
    Pack(pack::Args),
    /// Print the options of source phrases as interchange TSV.
    Lookup(lookup::Args),
    /// Write a whole packed table back as interchange TSV.
    Dump(dump::Args),
    /// Show the sections, sizes and metadata of a packed table.
    Inspect(inspect::Args),
    /// Generate a large synthetic phrase table for benchmarks.
    Synth(synth::Args),
    /// Compare tables with a base: size, held-out coverage, retained mass, divergence.
    Compare(compare::Args),
    /// Prune and pack at every setting of a grid; measure each; plot size against coverage.
    Sweep(sweep::Args),
    /// Run a whole build (extract, prune, pack, report) from one recipe file.
    Build(build::Args),
    /// Train or apply an n-gram language model of the target language.
    Lm(lm::Args),
    /// Score hypotheses against a reference: BLEU, chrF, paired bootstrap.
    Evaluate(evaluate::Args),
    /// Translate tokenized text with a packed table and a language model.
    Translate(translate::Args),
    /// Fit the translation weights on a development set; write a weights file.
    Tune(tune::Args),
}

/// Parses the command line, runs it, and maps the outcome to an exit code.
pub fn main() -> ExitCode {
    let cli = Cli::parse();
    if let Err(e) = baler::files::remove_on_interrupt(
        "baler: interrupted; partial outputs and temporary files removed",
    ) {
        eprintln!("baler: error: {e}");
        return ExitCode::from(2);
    }
    let result = match cli.command {
        Command::Extract(a) => extract::run(a),
        Command::Prune(a) => prune::run(a),
        Command::Pack(a) => pack::run(a),
        Command::Lookup(a) => lookup::run(a),
        Command::Dump(a) => dump::run(a),
        Command::Inspect(a) => inspect::run(a),
        Command::Synth(a) => synth::run(a),
        Command::Compare(a) => compare::run(a),
        Command::Sweep(a) => sweep::run(a),
        Command::Build(a) => build::run(a),
        Command::Lm(a) => lm::run(a),
        Command::Evaluate(a) => evaluate::run(a),
        Command::Translate(a) => translate::run(a),
        Command::Tune(a) => tune::run(a),
    };
    match result {
        Ok(code) => code,
        Err(e) if e.is_broken_pipe() => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("baler: error: {e}");
            ExitCode::from(2)
        }
    }
}

/// Writes `text` to standard output. A closed pipe ends the command successfully (see
/// [`main`]); any other failure, such as a full disk, is an error naming standard output.
pub(crate) fn print(text: &str) -> baler::Result<()> {
    use std::io::Write;
    let mut out = std::io::stdout().lock();
    out.write_all(text.as_bytes())
        .and_then(|()| out.flush())
        .map_err(|e| baler::Error::io(baler::files::STDIO, "writing", e))
}

/// Parses a size flag such as `--memory 256M`.
pub(crate) fn size_arg(text: &str) -> Result<u64, String> {
    baler::files::parse_size(text).map_err(|e| e.to_string())
}
