//! `baler pack`: interchange TSV to a packed `.bale` table.

use std::path::PathBuf;
use std::process::ExitCode;

use super::flags::{PackFlags, ResourceFlags};
use baler::pipeline::{self, Packing};

/// Arguments of `baler pack`.
#[derive(clap::Args)]
pub struct Args {
    /// Interchange TSV table (`.gz`/`.zst` decompressed; `-` for standard input; any order) or
    /// a packed .bale to repack (its settings are kept unless given here).
    input: PathBuf,
    /// The packed table to write.
    #[arg(short, long, value_name = "TABLE")]
    output: PathBuf,
    #[command(flatten)]
    pack: PackFlags,
    #[command(flatten)]
    resources: ResourceFlags,
}

pub fn run(args: Args) -> baler::Result<ExitCode> {
    let packing = Packing {
        settings: args.pack.0.clone(),
        resources: args.resources.resources.clone(),
        progress: !args.resources.quiet,
        provenance: Vec::new(),
    };
    let started = std::time::Instant::now();
    let report = pipeline::pack_file(&args.input, &args.output, &packing)?;
    if !args.resources.quiet {
        let m = &report.meta;
        let per_pair = |b: u64| {
            if m.pairs > 0 {
                b as f64 / m.pairs as f64
            } else {
                0.0
            }
        };
        eprintln!(
            "packed {} pairs ({} sources, {} targets, {} words) into {} bytes, {:.2} bytes/pair, in {:.1}s",
            m.pairs,
            m.sources,
            m.targets,
            m.vocabulary,
            report.file_bytes,
            per_pair(report.file_bytes),
            started.elapsed().as_secs_f64()
        );
        for (kind, bytes) in &report.sections {
            eprintln!(
                "  {:<13} {:>12} bytes  {:>6.2} bytes/pair",
                kind.name(),
                bytes,
                per_pair(*bytes)
            );
        }
        for q in &m.quantization {
            eprintln!(
                "  {:<13} {} {} bits ({} domain): rms error {:.3e}, max {:.3e}",
                q.column, q.storage, q.bits, q.domain, q.rms_error, q.max_error
            );
        }
    }
    Ok(ExitCode::SUCCESS)
}
