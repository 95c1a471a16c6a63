//! `baler lm`: train a Kneser-Ney language model, score text with it.

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use std::time::Instant;

use baler::files::{self, Output};
use baler::lm::{self, BuildOptions, LanguageModel};
use baler::Error;

/// Arguments of `baler lm`.
#[derive(clap::Args)]
pub struct Args {
    #[command(subcommand)]
    action: Action,
}

#[derive(clap::Subcommand)]
enum Action {
    /// Train an interpolated modified Kneser-Ney model on tokenized text, one sentence a line.
    Build(BuildArgs),
    /// Print each sentence's log10 probability, then corpus perplexity and unknown words.
    Score(ScoreArgs),
}

#[derive(clap::Args)]
struct BuildArgs {
    /// Tokenized text (`.gz`/`.zst` decompressed; `-` for standard input).
    text: PathBuf,
    /// The model file to write.
    #[arg(short, long, value_name = "MODEL")]
    output: PathBuf,
    /// n-gram order.
    #[arg(long, value_name = "N", default_value_t = 4)]
    order: usize,
    /// Also write the model as ARPA text to this file.
    #[arg(long, value_name = "FILE")]
    arpa: Option<PathBuf>,
    /// `--memory` (past half of it the n-gram counts spill to sorted runs on disk and merge;
    /// the vocabulary and the model's arrays, about 16 bytes per n-gram, must fit, which is
    /// checked before they are built), `--temp-dir` and `-q`.
    #[command(flatten)]
    resources: crate::cli::flags::SpillFlags,
}

#[derive(clap::Args)]
struct ScoreArgs {
    /// The model file.
    model: PathBuf,
    /// Print only the corpus summary, not one line per sentence.
    #[arg(long)]
    summary: bool,
    /// Print JSON instead: the corpus figures, and `per_sentence` (log10_prob and oov of
    /// each) unless --summary.
    #[arg(long)]
    json: bool,
    #[command(flatten)]
    quiet: crate::cli::flags::Quiet,
}

pub fn run(args: Args) -> baler::Result<ExitCode> {
    match args.action {
        Action::Build(a) => build(a),
        Action::Score(a) => score(a),
    }
}

fn build(a: BuildArgs) -> baler::Result<ExitCode> {
    let started = Instant::now();
    let name = a.text.to_string_lossy().into_owned();
    let input = files::open_input(&a.text)?;
    let options = BuildOptions {
        order: a.order,
        memory: a.resources.resources.memory,
        temp_dir: a.resources.resources.temp_dir.clone(),
    };
    let model = lm::build(input, &name, &options)?;
    model.write(&a.output)?;
    if let Some(arpa) = &a.arpa {
        lm::export_arpa(&LanguageModel::open(&a.output)?, arpa)?;
    }
    if !a.resources.quiet {
        let d: Vec<String> = model
            .discounts
            .iter()
            .map(|d| format!("{:.3}/{:.3}/{:.3}", d[0], d[1], d[2]))
            .collect();
        eprintln!(
            "baler lm build: {} sentences, {} tokens; entries per order {:?}; discounts {}; \
             counts spilled {} times; {:.1} s",
            model.sentences,
            model.tokens,
            model.entries(),
            d.join(" "),
            model.flushes,
            started.elapsed().as_secs_f64()
        );
    }
    Ok(ExitCode::SUCCESS)
}

fn score(a: ScoreArgs) -> baler::Result<ExitCode> {
    // Nothing but errors goes to standard error here; `-q` is taken like on every command.
    let _quiet: bool = a.quiet.quiet;
    let model = LanguageModel::open(&a.model)?;
    let stdio = Path::new(files::STDIO);
    let werr = |e| Error::io(stdio, "writing", e);
    let mut input = files::open_input(stdio)?;
    let mut out = Output::create(stdio)?;
    let mut line = String::new();
    let (mut n, mut total, mut predicted, mut oov, mut words) = (0u64, 0.0f64, 0usize, 0usize, 0);
    let mut sentences = Vec::new();
    while files::read_line(&mut input, &mut line, files::STDIO, n + 1)? {
        n += 1;
        let tokens = baler::evaluate::tokens(&line);
        let s = model.score_sentence(&tokens);
        total += s.log10_prob;
        predicted += s.predicted;
        oov += s.oov;
        words += tokens.len();
        if a.summary {
        } else if a.json {
            sentences.push(serde_json::json!({"log10_prob": s.log10_prob, "oov": s.oov}));
        } else {
            writeln!(out, "{:.4}\t{}", s.log10_prob, s.oov).map_err(werr)?;
        }
    }
    let perplexity = 10f64.powf(-total / predicted.max(1) as f64);
    if a.json {
        let mut report = serde_json::json!({
            "sentences": n, "words": words, "oov": oov, "log10_prob": total,
            "perplexity": perplexity,
        });
        if !a.summary {
            report["per_sentence"] = serde_json::Value::Array(sentences);
        }
        let text = serde_json::to_string_pretty(&report).expect("figures serialize");
        writeln!(out, "{text}").map_err(werr)?;
        out.commit()?;
        return Ok(ExitCode::SUCCESS);
    }
    writeln!(
        out,
        "# sentences={n} words={words} oov={oov} log10_prob={total:.4} perplexity={perplexity:.3}"
    )
    .map_err(werr)?;
    out.commit()?;
    Ok(ExitCode::SUCCESS)
}
