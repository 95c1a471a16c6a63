//! `baler lookup`: options of source phrases as interchange TSV.

use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

use baler::files::{self, Output};
use baler::read::Options;
use baler::table::{PhrasePair, TsvWriter};
use baler::Error;

/// Arguments of `baler lookup`.
#[derive(clap::Args)]
pub struct Args {
    /// The packed table.
    table: PathBuf,
    /// Source phrases to look up; without any, one phrase per line of standard input.
    phrases: Vec<String>,
}

pub fn run(args: Args) -> baler::Result<ExitCode> {
    let table = baler::Table::open(&args.table)?;
    let stdout = std::path::Path::new(files::STDIO);
    let werr = |e| Error::io(stdout, "writing", e);
    let mut writer = TsvWriter::new(Output::create(stdout)?, table.header()).map_err(werr)?;
    let (mut asked, mut missed) = (0u64, 0u64);
    let mut options = Options::default();
    let mut pair = PhrasePair::default();
    let mut one = |phrase: &str, writer: &mut TsvWriter<Output>| -> baler::Result<()> {
        asked += 1;
        if !table.lookup_into(phrase, &mut options)? {
            missed += 1;
            return Ok(());
        }
        for o in options.iter() {
            pair.source.clear();
            pair.source.push_str(phrase);
            pair.target.clear();
            pair.target.push_str(o.target());
            pair.scores.clear();
            pair.scores.extend_from_slice(o.scores());
            pair.counts.clear();
            pair.counts.extend_from_slice(o.counts());
            pair.alignment.clear();
            pair.alignment.extend_from_slice(o.alignment());
            writer.write_pair(&pair).map_err(werr)?;
        }
        Ok(())
    };
    if args.phrases.is_empty() {
        let mut input = files::open_input(stdout)?;
        let mut line = String::new();
        let mut line_no = 0;
        while files::read_line(&mut input, &mut line, files::STDIO, line_no + 1)? {
            line_no += 1;
            one(&line, &mut writer)?;
        }
    } else {
        for phrase in &args.phrases {
            one(phrase, &mut writer)?;
        }
    }
    writer.get_mut().flush().map_err(werr)?;
    writer.into_inner().commit()?;
    if missed > 0 {
        eprintln!("baler: {missed} of {asked} phrases not in the table");
    }
    Ok(if asked > 0 && missed == asked {
        ExitCode::from(1)
    } else {
        ExitCode::SUCCESS
    })
}
