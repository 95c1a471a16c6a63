//! `baler inspect`: sections, sizes, counts and metadata of a packed table.

use std::path::PathBuf;
use std::process::ExitCode;

/// Arguments of `baler inspect`.
#[derive(clap::Args)]
pub struct Args {
    /// The packed table.
    table: PathBuf,
    /// Also check every checksum and decode every record.
    #[arg(long)]
    verify: bool,
}

pub fn run(args: Args) -> baler::Result<ExitCode> {
    let table = baler::Table::open(&args.table)?;
    let m = table.meta();
    let total = table.file_bytes();
    let per_pair = |b: u64| {
        if m.pairs > 0 {
            b as f64 / m.pairs as f64
        } else {
            0.0
        }
    };
    println!("table      {}", args.table.display());
    println!(
        "format     {} {}.{}",
        m.format,
        baler::format::VERSION_MAJOR,
        baler::format::VERSION_MINOR
    );
    println!("pairs      {}", m.pairs);
    println!(
        "sources    {}  ({:.2} options per source)",
        m.sources,
        m.pairs as f64 / m.sources.max(1) as f64
    );
    println!("targets    {}", m.targets);
    println!("vocabulary {}", m.vocabulary);
    println!(
        "file       {} bytes, {:.3} bytes per pair",
        total,
        per_pair(total)
    );
    println!(
        "scores     {}",
        if m.scores.is_empty() {
            "-".into()
        } else {
            m.scores.join(", ")
        }
    );
    println!(
        "counts     {}",
        if m.counts.is_empty() {
            "-".into()
        } else {
            m.counts.join(", ")
        }
    );
    println!(
        "alignment  {}",
        if m.alignment { "stored" } else { "not stored" }
    );
    println!(
        "order      {} descending, ties by {}",
        m.option_order.by.as_deref().unwrap_or("-"),
        m.option_order.ties
    );
    println!(
        "blocks     {} sources each, {} targets per group, coding {}",
        m.sources_per_block, m.targets_per_group, m.block_compression
    );
    println!();
    println!(
        "{:<14} {:>12} {:>14} {:>8} {:>12}",
        "section", "offset", "bytes", "share", "bytes/pair"
    );
    for s in table.section_sizes() {
        println!(
            "{:<14} {:>12} {:>14} {:>7.2}% {:>12.3}",
            s.kind.name(),
            s.offset,
            s.length,
            100.0 * s.length as f64 / total.max(1) as f64,
            per_pair(s.length)
        );
    }
    if !m.components.is_empty() {
        // Coded bytes of each component inside the blocks and target groups, as measured by
        // the writer; the index sections above are the rest.
        println!();
        println!(
            "{:<26} {:>14} {:>8} {:>12}",
            "component", "bytes", "share", "bytes/pair"
        );
        for (name, bytes) in &m.components {
            println!(
                "{:<26} {:>14} {:>7.2}% {:>12.3}",
                name,
                bytes,
                100.0 * *bytes as f64 / total.max(1) as f64,
                per_pair(*bytes)
            );
        }
    }
    if !m.quantization.is_empty() {
        println!();
        println!(
            "{:<16} {:>9} {:>5} {:>7} {:>8} {:>11} {:>11}",
            "score", "storage", "bits", "domain", "entries", "rms error", "max error"
        );
        for q in &m.quantization {
            println!(
                "{:<16} {:>9} {:>5} {:>7} {:>8} {:>11.3e} {:>11.3e}",
                q.column, q.storage, q.bits, q.domain, q.entries, q.rms_error, q.max_error
            );
        }
    }
    if !m.table_metadata.is_empty() {
        println!();
        println!("metadata");
        for (k, v) in &m.table_metadata {
            println!("  {k}={v}");
        }
    }
    println!();
    println!("provenance");
    for (k, v) in &m.provenance {
        println!("  {k}={v}");
    }
    if args.verify {
        let r = table.verify()?;
        println!();
        println!(
            "verified   {} section checksums, {} blocks, {} pairs, {} targets: all good",
            r.sections, r.blocks, r.pairs, r.targets
        );
    }
    Ok(ExitCode::SUCCESS)
}
