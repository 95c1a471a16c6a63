//! `baler inspect`: sections, sizes, counts and metadata of a packed table.

use std::fmt::Write as _;
use std::path::PathBuf;
use std::process::ExitCode;

use baler::format::{Layout, SectionKind};
use serde_json::json;

/// Arguments of `baler inspect`.
#[derive(clap::Args)]
pub struct Args {
    /// The packed table.
    table: PathBuf,
    /// Also check every checksum and decode every record.
    #[arg(long)]
    verify: bool,
    /// Print JSON instead of the readable report.
    #[arg(long)]
    json: bool,
    #[command(flatten)]
    quiet: crate::cli::flags::Quiet,
}

pub fn run(args: Args) -> baler::Result<ExitCode> {
    let table = baler::Table::open(&args.table)?;
    let verify = || {
        let bar = args.quiet.bar(None, "verifying every checksum and record");
        let report = table.verify();
        bar.finish_and_clear();
        report
    };
    if args.json {
        let verified = if args.verify { Some(verify()?) } else { None };
        let sections: Vec<_> = table
            .section_sizes()
            .iter()
            .map(|s| json!({"section": s.kind.name(), "offset": s.offset, "bytes": s.length}))
            .collect();
        let mut report = json!({
            "table": args.table.display().to_string(),
            "version": format!("{}.{}", baler::format::VERSION_MAJOR, table.minor_version()),
            "layout": table.layout().name(),
            "file_bytes": table.file_bytes(),
            "meta": table.meta(),
            "sections": sections,
        });
        if let Some(r) = &verified {
            report["verified"] = json!({
                "sections": r.sections, "blocks": r.blocks, "pairs": r.pairs, "targets": r.targets,
            });
        }
        let mut text = serde_json::to_string_pretty(&report).expect("figures serialize");
        text.push('\n');
        super::print(&text)?;
        return Ok(ExitCode::SUCCESS);
    }
    let mut out = String::new();
    let m = table.meta();
    let total = table.file_bytes();
    let per_pair = |b: u64| {
        if m.pairs > 0 {
            b as f64 / m.pairs as f64
        } else {
            0.0
        }
    };
    writeln!(out, "table      {}", args.table.display()).unwrap();
    writeln!(
        out,
        "format     {} {}.{}",
        m.format,
        baler::format::VERSION_MAJOR,
        table.minor_version()
    )
    .unwrap();
    writeln!(out, "pairs      {}", m.pairs).unwrap();
    writeln!(
        out,
        "sources    {}  ({:.2} options per source)",
        m.sources,
        m.pairs as f64 / m.sources.max(1) as f64
    )
    .unwrap();
    writeln!(out, "targets    {}", m.targets).unwrap();
    writeln!(out, "vocabulary {}", m.vocabulary).unwrap();
    writeln!(
        out,
        "file       {} bytes, {:.3} bytes per pair",
        total,
        per_pair(total)
    )
    .unwrap();
    writeln!(
        out,
        "scores     {}",
        if m.scores.is_empty() {
            "-".into()
        } else {
            m.scores.join(", ")
        }
    )
    .unwrap();
    writeln!(
        out,
        "counts     {}",
        if m.counts.is_empty() {
            "-".into()
        } else {
            m.counts.join(", ")
        }
    )
    .unwrap();
    writeln!(
        out,
        "alignment  {}",
        if m.alignment { "stored" } else { "not stored" }
    )
    .unwrap();
    writeln!(
        out,
        "order      {} descending, ties by {}",
        m.option_order.by.as_deref().unwrap_or("-"),
        m.option_order.ties
    )
    .unwrap();
    match table.layout() {
        Layout::Compact => writeln!(
            out,
            "layout     compact: blocks of {} sources, {} targets per group, coding {}",
            m.sources_per_block, m.targets_per_group, m.block_compression
        ),
        Layout::Direct => writeln!(
            out,
            "layout     direct: hashed records read in place, target text as UTF-8"
        ),
    }
    .unwrap();
    writeln!(out).unwrap();
    writeln!(
        out,
        "{:<14} {:>12} {:>14} {:>8} {:>12}",
        "section", "offset", "bytes", "share", "bytes/pair"
    )
    .unwrap();
    for s in table.section_sizes() {
        writeln!(
            out,
            "{:<14} {:>12} {:>14} {:>7.2}% {:>12.3}",
            s.kind.name(),
            s.offset,
            s.length,
            100.0 * s.length as f64 / total.max(1) as f64,
            per_pair(s.length)
        )
        .unwrap();
    }
    if !m.components.is_empty() {
        // Coded bytes of each component inside the blocks and target groups (compact), or
        // inside the records, text and hash (direct), as measured by the writer; the index
        // sections above are the rest.
        writeln!(out).unwrap();
        writeln!(
            out,
            "{:<26} {:>14} {:>8} {:>12}",
            "component", "bytes", "share", "bytes/pair"
        )
        .unwrap();
        for (name, bytes) in &m.components {
            writeln!(
                out,
                "{:<26} {:>14} {:>7.2}% {:>12.3}",
                name,
                bytes,
                100.0 * *bytes as f64 / total.max(1) as f64,
                per_pair(*bytes)
            )
            .unwrap();
        }
        // The same with the index sections charged to what they index, so the keys and
        // targets rows add up to what each costs in the file.
        let section = |kind: SectionKind| {
            table
                .section_sizes()
                .iter()
                .filter(|s| s.kind == kind)
                .map(|s| s.length)
                .sum::<u64>()
        };
        let component = |name: &str| {
            m.components
                .iter()
                .filter(|(n, _)| n == name)
                .map(|(_, b)| *b)
                .sum::<u64>()
        };
        let keys =
            component("keys") + section(SectionKind::BlockIndex) + section(SectionKind::BlockKeys);
        let targets = component("targets")
            + section(SectionKind::TargetIndex)
            + section(SectionKind::Vocabulary);
        let summary = match table.layout() {
            Layout::Compact => vec![
                ("keys, with their indexes", keys),
                ("targets, with index, words", targets),
            ],
            // The keys' share of the hash is theirs too; the text is the targets' whole cost.
            Layout::Direct => vec![
                (
                    "keys, with hash, prefixes",
                    component("keys") + component("prefix-keys") + component("hash"),
                ),
                (
                    "targets, with ends, words",
                    component("targets")
                        + component("target-ends")
                        + section(SectionKind::Vocabulary),
                ),
            ],
        };
        for (name, bytes) in summary {
            writeln!(
                out,
                "{:<26} {:>14} {:>7.2}% {:>12.3}",
                name,
                bytes,
                100.0 * bytes as f64 / total.max(1) as f64,
                per_pair(bytes)
            )
            .unwrap();
        }
    }
    if !m.quantization.is_empty() {
        writeln!(out).unwrap();
        writeln!(
            out,
            "{:<16} {:>9} {:>5} {:>7} {:>8} {:>11} {:>11}",
            "score", "storage", "bits", "domain", "entries", "rms error", "max error"
        )
        .unwrap();
        for q in &m.quantization {
            writeln!(
                out,
                "{:<16} {:>9} {:>5} {:>7} {:>8} {:>11.3e} {:>11.3e}",
                q.column, q.storage, q.bits, q.domain, q.entries, q.rms_error, q.max_error
            )
            .unwrap();
        }
    }
    if !m.table_metadata.is_empty() {
        writeln!(out).unwrap();
        writeln!(out, "metadata").unwrap();
        for (k, v) in &m.table_metadata {
            writeln!(out, "  {k}={v}").unwrap();
        }
    }
    writeln!(out).unwrap();
    writeln!(out, "provenance").unwrap();
    for (k, v) in &m.provenance {
        writeln!(out, "  {k}={v}").unwrap();
    }
    super::print(&out)?;
    if args.verify {
        let r = verify()?;
        super::print(&format!(
            "\nverified   {} section checksums, {} blocks, {} pairs, {} targets: all good\n",
            r.sections, r.blocks, r.pairs, r.targets
        ))?;
    }
    Ok(ExitCode::SUCCESS)
}
