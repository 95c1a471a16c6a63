//! `baler translate`: phrase-based decoding of tokenized source text with a packed table and a
//! language model.

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use std::time::Instant;

use baler::decode::{explanation, DecodeSettings, Decoder, Weights};
use baler::files::Output;
use baler::lm::LanguageModel;
use baler::Error;

/// Arguments of `baler translate`.
#[derive(clap::Args)]
pub struct Args {
    /// The packed phrase table.
    table: PathBuf,
    /// The target-language model (`baler lm build`).
    #[arg(long, value_name = "MODEL")]
    lm: PathBuf,
    /// Weights file (`feature = weight` lines, as `baler tune` writes); missing names keep
    /// their defaults.
    #[arg(long, value_name = "FILE")]
    weights: Option<PathBuf>,
    /// Set one weight, e.g. `--weight lm=0.6` (repeatable; applied after `--weights`).
    #[arg(long = "weight", value_name = "FEATURE=VALUE")]
    weight: Vec<String>,
    /// Hypotheses kept per stack.
    #[arg(long, value_name = "N", default_value_t = 100)]
    beam: usize,
    /// Options kept per source span.
    #[arg(long, value_name = "N", default_value_t = 20)]
    options_per_span: usize,
    /// Largest jump between consecutive phrases' source positions.
    #[arg(long, value_name = "N", default_value_t = 6)]
    distortion_limit: usize,
    /// Longest source phrase looked up.
    #[arg(long, value_name = "N", default_value_t = 7)]
    max_phrase: usize,
    /// Drop hypotheses whose score plus future cost is this far below their stack's best
    /// (natural-log units; `inf` keeps all up to the beam size).
    #[arg(long, value_name = "NUMBER", default_value_t = 8.0)]
    threshold: f64,
    /// Print each sentence's segmentation and feature contributions to standard error.
    #[arg(long)]
    explain: bool,
    /// Decode with the baseline instead: monotone greedy longest match, best p_t_given_s.
    #[arg(long)]
    greedy: bool,
    /// Source text (default: standard input).
    #[arg(long, value_name = "FILE", default_value = "-")]
    input: PathBuf,
    /// Where to write the hypotheses (default: standard output).
    #[arg(short, long, value_name = "FILE", default_value = "-")]
    output: PathBuf,
    /// `--threads` (sentences decoded in parallel; output stays in input order) and `-q`.
    #[command(flatten)]
    resources: crate::cli::flags::ThreadFlags,
}

/// Default weights, then a weights file, then `--weight` overrides.
pub fn resolve_weights(
    schema: &baler::table::Schema,
    file: Option<&Path>,
    overrides: &[String],
) -> baler::Result<Weights> {
    let mut w = Weights::defaults(schema);
    if let Some(f) = file {
        w = Weights::read(f, w)?;
    }
    for o in overrides {
        let (k, v) = o
            .split_once('=')
            .ok_or_else(|| Error::invalid("--weight", format!("{o:?} is not FEATURE=VALUE")))?;
        let v: f64 = v
            .trim()
            .parse()
            .map_err(|_| Error::invalid("--weight", format!("{v:?} is not a number")))?;
        w.values.insert(k.trim().to_string(), v);
    }
    Ok(w)
}

pub fn run(args: Args) -> baler::Result<ExitCode> {
    let started = Instant::now();
    let table = baler::Table::open(&args.table)?;
    let lm = LanguageModel::open(&args.lm)?;
    let weights = resolve_weights(table.schema(), args.weights.as_deref(), &args.weight)?;
    if args.beam == 0 || args.options_per_span == 0 {
        return Err(Error::invalid(
            "--beam/--options-per-span",
            "must be at least 1",
        ));
    }
    let settings = DecodeSettings {
        beam: args.beam,
        options_per_span: args.options_per_span,
        distortion_limit: args.distortion_limit,
        max_phrase: args.max_phrase,
        threshold: args.threshold,
    };
    let decoder = Decoder::new(&table, &lm, weights.clone(), settings);
    let lines = baler::files::read_lines(&args.input)?;
    let out_of = baler::decode::translate_all(
        &decoder,
        &lines,
        args.resources.resources.threads,
        args.greedy,
    )?;
    let mut out = Output::create(&args.output)?;
    let werr = |e| Error::io(&args.output, "writing", e);
    for (i, t) in out_of.iter().enumerate() {
        writeln!(out, "{}", t.text).map_err(werr)?;
        if args.explain {
            eprint!("{}", explanation(t, &weights, i + 1));
        }
    }
    out.commit()?;
    if !args.resources.quiet {
        eprintln!(
            "baler translate: {} sentences in {:.2} s",
            lines.len(),
            started.elapsed().as_secs_f64()
        );
    }
    Ok(ExitCode::SUCCESS)
}
