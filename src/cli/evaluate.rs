//! `baler evaluate`: corpus BLEU and chrF of hypotheses against a reference, and paired
//! bootstrap resampling when two hypothesis files are given.

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

use baler::evaluate::{paired_bootstrap, CorpusStats};
use baler::files::{self, Output};
use baler::Error;

/// Arguments of `baler evaluate`.
#[derive(clap::Args)]
pub struct Args {
    /// One or two hypothesis files, one sentence a line, aligned with the reference.
    #[arg(required = true, num_args = 1..=2)]
    hypotheses: Vec<PathBuf>,
    /// The reference translations.
    #[arg(long, value_name = "FILE")]
    reference: PathBuf,
    /// Print JSON instead of text.
    #[arg(long)]
    json: bool,
    /// Resampled test sets for the paired bootstrap (two hypothesis files only).
    #[arg(long, value_name = "N", default_value_t = 1000)]
    samples: usize,
    /// Seed of the resampling.
    #[arg(long, value_name = "N", default_value_t = 1)]
    seed: u64,
    #[command(flatten)]
    quiet: crate::cli::flags::Quiet,
}

pub fn run(args: Args) -> baler::Result<ExitCode> {
    // Nothing but errors goes to standard error here; `-q` is taken like on every command.
    let _quiet: bool = args.quiet.quiet;
    let refs = files::read_lines(&args.reference)?;
    let mut systems = Vec::new();
    for h in &args.hypotheses {
        let hyps = files::read_lines(h)?;
        files::check_parallel((&args.reference, refs.len()), (h, hyps.len()))?;
        systems.push(CorpusStats::new(&hyps, &refs));
    }
    let stdout = Path::new(files::STDIO);
    let werr = |e| Error::io(stdout, "writing", e);
    let mut out = Output::create(stdout)?;
    let mut json = Vec::new();
    for (path, stats) in args.hypotheses.iter().zip(&systems) {
        let (b, c) = stats.scores();
        if args.json {
            json.push(serde_json::json!({
                "hypotheses": path.to_string_lossy(),
                "sentences": stats.len(),
                "bleu": b.score,
                "precisions": b.precisions,
                "brevity_penalty": b.brevity_penalty,
                "length_ratio": b.length_ratio,
                "chrf": c,
            }));
        } else {
            writeln!(
                out,
                "{}\tBLEU {:.2} ({:.1}/{:.1}/{:.1}/{:.1}, brevity {:.3}, length ratio {:.3})\tchrF {:.2}",
                path.display(),
                b.score,
                b.precisions[0],
                b.precisions[1],
                b.precisions[2],
                b.precisions[3],
                b.brevity_penalty,
                b.length_ratio,
                c
            )
            .map_err(werr)?;
        }
    }
    let mut report = serde_json::json!({ "systems": json });
    if systems.len() == 2 {
        let r = paired_bootstrap(&systems[0], &systems[1], args.samples, args.seed);
        if args.json {
            report["bootstrap"] = serde_json::json!({
                "samples": r.samples,
                "bleu_interval_a": [r.bleu_a.0, r.bleu_a.1],
                "bleu_interval_b": [r.bleu_b.0, r.bleu_b.1],
                "bleu_delta_interval": [r.bleu_delta.0, r.bleu_delta.1],
                "bleu_p": r.bleu_p,
                "chrf_delta_interval": [r.chrf_delta.0, r.chrf_delta.1],
                "chrf_p": r.chrf_p,
            });
        } else {
            writeln!(
                out,
                "paired bootstrap, {} samples: BLEU second − first in [{:.2}, {:.2}] (95%), p = {:.3}; \
                 chrF in [{:.2}, {:.2}], p = {:.3}",
                r.samples,
                r.bleu_delta.0,
                r.bleu_delta.1,
                r.bleu_p,
                r.chrf_delta.0,
                r.chrf_delta.1,
                r.chrf_p
            )
            .map_err(werr)?;
        }
    }
    if args.json {
        writeln!(out, "{report}").map_err(werr)?;
    }
    out.commit()?;
    Ok(ExitCode::SUCCESS)
}
