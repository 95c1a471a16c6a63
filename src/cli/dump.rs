//! `baler dump`: a packed table back to interchange TSV.

use std::path::PathBuf;
use std::process::ExitCode;

use baler::files::Output;
use baler::table::TsvWriter;
use baler::Error;

/// Arguments of `baler dump`.
#[derive(clap::Args)]
pub struct Args {
    /// The packed table.
    table: PathBuf,
    /// Where to write the TSV (`-`: standard output; `.gz`/`.zst` compress).
    #[arg(short, long, value_name = "FILE", default_value = "-")]
    output: PathBuf,
    #[command(flatten)]
    quiet: crate::cli::flags::Quiet,
}

pub fn run(args: Args) -> baler::Result<ExitCode> {
    baler::files::check_output(&args.output, &[&args.table])?;
    let table = baler::Table::open(&args.table)?;
    let output = Output::create(&args.output)?;
    let werr = |e| Error::io(&args.output, "writing", e);
    let mut writer = TsvWriter::new(output, table.header()).map_err(werr)?;
    let bar = args.quiet.bar(Some(table.meta().pairs), "dumping");
    for (i, pair) in table.pairs_iter().enumerate() {
        writer.write_pair(&pair?).map_err(werr)?;
        if i % 65536 == 0 {
            bar.set_position(i as u64);
        }
    }
    bar.finish_and_clear();
    writer.into_inner().commit()?;
    Ok(ExitCode::SUCCESS)
}
