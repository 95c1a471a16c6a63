//! `baler synth`: write a synthetic phrase table of realistic shape, for benchmarks.

use std::path::PathBuf;
use std::process::ExitCode;
use std::time::Instant;

use baler::synth::{ShapeStats, SynthOptions};

#[derive(clap::Args)]
#[command(
    after_help = "The table is sorted by source then target and identical for identical flags. \
                  FILE ending in .zst or .gz is compressed; - writes to standard output."
)]
pub struct Args {
    /// Number of phrase pairs to write (e.g. 1000000, 1e6, 10M; K/M/G are powers of 1000).
    #[arg(long, value_name = "N", value_parser = count_arg)]
    pairs: u64,
    /// Output table (interchange TSV).
    #[arg(short, long, value_name = "FILE")]
    output: PathBuf,
    /// Seed of every random choice.
    #[arg(long, value_name = "N", default_value_t = 1)]
    seed: u64,
    /// Add the count columns (count, count_source, count_target, cooc, df_source, df_target)
    /// and the sentence_pairs metadata line.
    #[arg(long)]
    counts: bool,
    /// Add the alignment column.
    #[arg(long)]
    alignment: bool,
    /// Source vocabulary size.
    #[arg(long, default_value_t = SynthOptions::default().source_words, value_name = "N")]
    source_words: u32,
    /// Target vocabulary size.
    #[arg(long, default_value_t = SynthOptions::default().target_words, value_name = "N")]
    target_words: u32,
    /// Longest phrase in tokens.
    #[arg(long, default_value_t = SynthOptions::default().max_length, value_name = "N")]
    max_length: usize,
    /// Exponent of the Zipf law of word frequencies.
    #[arg(long, default_value_t = SynthOptions::default().zipf_exponent, value_name = "NUMBER")]
    zipf_exponent: f64,
    /// Sentence pairs of the imagined corpus behind the counts [default: pairs / 25, at least
    /// 1000].
    #[arg(long, value_parser = count_arg, value_name = "N")]
    sentence_pairs: Option<u64>,
    /// Print shape statistics (sources, distinct targets, options per source, lengths) to
    /// standard error at the end (even with -q, which only silences progress and summary).
    #[arg(long)]
    stats: bool,
    #[command(flatten)]
    quiet: crate::cli::flags::Quiet,
}

/// Parses a count such as `1000000`, `1e6`, `2.5M` or `10k` (powers of 1000).
fn count_arg(text: &str) -> Result<u64, String> {
    let t = text.trim();
    let bad = || format!("{text:?} is not a count like 1000000, 1e6 or 10M");
    let (number, scale) = match t.char_indices().last() {
        Some((i, c)) if "kKmMgG".contains(c) => (
            &t[..i],
            match c.to_ascii_lowercase() {
                'k' => 1e3,
                'm' => 1e6,
                _ => 1e9,
            },
        ),
        _ => (t, 1.0),
    };
    if let Ok(n) = number.parse::<u64>() {
        if scale == 1.0 {
            return Ok(n);
        }
    }
    let value: f64 = number.parse().map_err(|_| bad())?;
    let value = value * scale;
    if !value.is_finite() || value < 0.0 || value.fract() != 0.0 || value > 1e15 {
        return Err(bad());
    }
    Ok(value as u64)
}

pub fn run(args: Args) -> baler::Result<ExitCode> {
    let options = SynthOptions {
        pairs: args.pairs,
        seed: args.seed,
        counts: args.counts,
        alignment: args.alignment,
        source_words: args.source_words,
        target_words: args.target_words,
        max_length: args.max_length,
        zipf_exponent: args.zipf_exponent,
        sentence_pairs: args.sentence_pairs,
    };
    options.validate()?;
    // The output is written beside its path and renamed onto it, which would replace a device
    // or pipe (such as /dev/null) with a regular file: refuse those.
    if args.output.as_os_str() != baler::files::STDIO {
        if let Ok(meta) = std::fs::metadata(&args.output) {
            if !meta.is_file() {
                return Err(baler::Error::invalid(
                    "--output",
                    format!(
                        "{} is not a regular file; use - to write to standard output",
                        args.output.display()
                    ),
                ));
            }
        }
    }
    let progress = args.quiet.bar(Some(options.pairs), "pairs");
    let mut stats = args.stats.then(ShapeStats::new);
    let started = Instant::now();
    let mut n = 0u64;
    let written = baler::synth::write_to(&options, &args.output, |pair| {
        n += 1;
        if n % 65536 == 0 {
            progress.set_position(n);
        }
        if let Some(stats) = stats.as_mut() {
            stats.add(pair);
        }
    })?;
    progress.finish_and_clear();
    let seconds = started.elapsed().as_secs_f64();
    if !args.quiet.quiet {
        eprintln!(
            "baler synth: wrote {written} pairs to {} in {seconds:.2} s ({:.0} pairs/s)",
            args.output.display(),
            written as f64 / seconds.max(1e-9)
        );
    }
    if let Some(stats) = stats {
        eprint!("{stats}");
    }
    Ok(ExitCode::SUCCESS)
}

#[cfg(test)]
mod tests {
    use super::count_arg;

    #[test]
    fn counts_with_suffixes() {
        assert_eq!(count_arg("1000000"), Ok(1_000_000));
        assert_eq!(count_arg("1e6"), Ok(1_000_000));
        assert_eq!(count_arg("2.5M"), Ok(2_500_000));
        assert_eq!(count_arg("10k"), Ok(10_000));
        assert_eq!(count_arg("1G"), Ok(1_000_000_000));
        assert!(count_arg("1.5").is_err());
        assert!(count_arg("-3").is_err());
        assert!(count_arg("lots").is_err());
    }
}
