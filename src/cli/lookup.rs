//! `baler lookup`: options of source phrases as interchange TSV.

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

use baler::files::{self, Output};
use baler::read::Options;
use baler::table::{PhrasePair, TsvWriter};
use baler::Error;

/// Arguments of `baler lookup`.
#[derive(clap::Args)]
#[command(
    after_help = "Phrases are looked up with surrounding whitespace removed and runs of \
    whitespace inside taken as one space, as tokens are stored."
)]
pub struct Args {
    /// The packed table.
    table: PathBuf,
    /// Source phrases to look up; without any, one phrase per line of standard input.
    phrases: Vec<String>,
    /// Write only the options, without the metadata lines and the header.
    #[arg(long)]
    no_header: bool,
    /// Keep only the N best options of each phrase (options are stored best first).
    #[arg(long, value_name = "N", value_parser = clap::value_parser!(u64).range(1..))]
    best: Option<u64>,
    /// Write the phrases not in the table to FILE, one per line, in the order asked.
    #[arg(long, value_name = "FILE")]
    misses: Option<PathBuf>,
    #[command(flatten)]
    quiet: crate::cli::flags::Quiet,
}

/// `phrase` as stored: tokens separated by single spaces.
fn normalize<'a>(phrase: &'a str, buf: &'a mut String) -> &'a str {
    if !phrase.contains(|c: char| c.is_whitespace() && c != ' ')
        && !phrase.starts_with(' ')
        && !phrase.ends_with(' ')
        && !phrase.contains("  ")
    {
        return phrase;
    }
    buf.clear();
    for (i, token) in phrase.split_whitespace().enumerate() {
        if i > 0 {
            buf.push(' ');
        }
        buf.push_str(token);
    }
    buf
}

pub fn run(args: Args) -> baler::Result<ExitCode> {
    let table = baler::Table::open(&args.table)?;
    let stdout = Path::new(files::STDIO);
    if let Some(m) = &args.misses {
        files::check_output(m, &[&args.table])?;
    }
    let werr = |e| Error::io(stdout, "writing", e);
    let out = Output::create(stdout)?;
    let mut writer = if args.no_header {
        TsvWriter::headless(out, &table.header().schema)
    } else {
        TsvWriter::new(out, table.header()).map_err(werr)?
    };
    let mut misses = match &args.misses {
        Some(path) => Some((Output::create(path)?, path)),
        None => None,
    };
    let best = args.best.map_or(usize::MAX, |n| n as usize);
    let (mut asked, mut missed) = (0u64, 0u64);
    let mut options = Options::default();
    let mut pair = PhrasePair::default();
    let mut spaced = String::new();
    let mut one = |phrase: &str, writer: &mut TsvWriter<Output>| -> baler::Result<()> {
        asked += 1;
        let phrase = normalize(phrase, &mut spaced);
        if !table.lookup_into(phrase, &mut options)? {
            missed += 1;
            if let Some((out, path)) = &mut misses {
                writeln!(out, "{phrase}").map_err(|e| Error::io(*path, "writing", e))?;
            }
            return Ok(());
        }
        for o in options.iter().take(best) {
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
    if let Some((out, _)) = misses {
        out.commit()?;
    }
    if missed > 0 && !args.quiet.quiet {
        eprintln!("baler: {missed} of {asked} phrases not in the table");
    }
    Ok(if asked > 0 && missed == asked {
        ExitCode::from(1)
    } else {
        ExitCode::SUCCESS
    })
}
