//! `baler pack`: interchange TSV to a packed `.bale` table.

use std::path::PathBuf;
use std::process::ExitCode;

use baler::format::Compression;
use baler::pack::{self, PackOptions};

/// Arguments of `baler pack`.
#[derive(clap::Args)]
pub struct Args {
    /// Interchange TSV table (`.gz`/`.zst` decompressed; `-` for standard input); any order.
    input: PathBuf,
    /// The packed table to write.
    #[arg(short, long)]
    output: PathBuf,
    /// Bits per score code (1..16), or `f32` to store scores unquantized.
    #[arg(long, default_value = "8", value_parser = parse_bits)]
    bits: Bits,
    /// Memory budget for sorting, e.g. 256M or 4G; past it, sorted runs spill to disk.
    #[arg(long, default_value = "1G", value_parser = crate::cli::size_arg)]
    memory: u64,
    /// Source phrases per block: smaller is faster to look up, larger packs tighter.
    #[arg(long, default_value_t = pack::DEFAULT_SOURCES_PER_BLOCK)]
    block_sources: u32,
    /// Target phrases per target group: smaller is faster to look up, larger packs tighter.
    #[arg(long, default_value_t = pack::DEFAULT_TARGETS_PER_GROUP)]
    group_targets: u32,
    /// Coding of blocks: `rans` (compact) or `none` (plain varints, faster cold reads).
    #[arg(long, default_value = "rans", value_parser = parse_compression)]
    compression: Compression,
    /// zstd level for blocks (1..22).
    #[arg(long, default_value_t = pack::DEFAULT_ZSTD_LEVEL)]
    zstd_level: i32,
    /// Size of the zstd dictionary trained on sample blocks (0 for none), e.g. 64K.
    #[arg(long, default_value = "64K", value_parser = crate::cli::size_arg)]
    dictionary_size: u64,
    /// Compression threads (0: every core).
    #[arg(long, default_value_t = 0)]
    threads: usize,
    /// Directory for temporary files (default: the system's).
    #[arg(long)]
    temp_dir: Option<PathBuf>,
    /// Print no progress and no summary.
    #[arg(short, long)]
    quiet: bool,
}

#[derive(Clone, Copy)]
pub struct Bits(Option<u8>);

fn parse_bits(text: &str) -> Result<Bits, String> {
    if text == "f32" {
        return Ok(Bits(None));
    }
    match text.parse::<u8>() {
        Ok(b) if (1..=16).contains(&b) => Ok(Bits(Some(b))),
        _ => Err(format!(
            "{text:?} is neither a bit count in 1..16 nor `f32`"
        )),
    }
}

fn parse_compression(text: &str) -> Result<Compression, String> {
    Compression::from_name(text).ok_or_else(|| format!("{text:?} is not `rans` or `none`"))
}

pub fn run(args: Args) -> baler::Result<ExitCode> {
    let options = PackOptions {
        bits: args.bits.0,
        memory: args.memory,
        sources_per_block: args.block_sources,
        targets_per_group: args.group_targets,
        compression: args.compression,
        zstd_level: args.zstd_level,
        dictionary_bytes: args.dictionary_size as usize,
        threads: args.threads,
        progress: !args.quiet,
        temp_dir: args.temp_dir,
        provenance: Vec::new(),
    };
    let input = baler::files::open_input(&args.input)?;
    let name = args.input.display().to_string();
    let started = std::time::Instant::now();
    let report = pack::pack_tsv(input, &name, &args.output, &options)?;
    if !args.quiet {
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
