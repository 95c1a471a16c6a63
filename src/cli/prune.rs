//! `baler prune`: flags, filter order, the stderr summary and the `--stats` file.

use std::path::PathBuf;
use std::process::ExitCode;

use super::flags::{PackFlags, ResourceFlags};
use baler::pipeline::{self, Packing};
use baler::prune::{CountSource, Filter, PruneOptions, Ranking, Threshold};
use baler::Error;
use clap::{ArgMatches, FromArgMatches};

/// The flags as clap sees them; [`Args`] adds the order in which the filters were given.
#[derive(clap::Args)]
#[command(after_help = "Filters run in the order given on the command line. \
    Significance thresholds: a number, or alpha+epsilon (ln N + 1e-9: removes the pairs seen \
    once whose phrases were each seen once) or alpha-epsilon (ln N - 1e-9: keeps them).")]
struct Flags {
    /// Table to prune: interchange TSV (any order; .gz/.zst; - for stdin) or a packed .bale.
    input: PathBuf,
    /// Where to write: TSV (.gz/.zst compressed; - for stdout) or, by extension, a packed .bale.
    #[arg(short, long, value_name = "TABLE")]
    output: PathBuf,
    /// Keep pairs whose one-sided Fisher test gives -ln p >= this: NUMBER, alpha+epsilon or
    /// alpha-epsilon (repeatable).
    #[arg(long, value_name = "THRESHOLD", action = clap::ArgAction::Append)]
    significance: Vec<String>,
    /// Add the computed -ln p as the score column `neg_ln_p`.
    #[arg(long)]
    annotate: bool,
    /// Count cooc, df_source and df_target over this source side of the corpus (one sentence
    /// per line), with --target.
    #[arg(long, value_name = "FILE", requires = "target")]
    source: Option<PathBuf>,
    /// Target side of the corpus, line-aligned with --source.
    #[arg(long, value_name = "FILE", requires = "source")]
    target: Option<PathBuf>,
    /// Approximate the significance test with phrase-level counts (count, count_source,
    /// count_target over all phrase-pair occurrences) when sentence-level counts are absent.
    #[arg(long, conflicts_with = "source")]
    phrase_counts: bool,
    /// Keep the K best options of each source phrase (repeatable; see --by).
    #[arg(long, value_name = "N", action = clap::ArgAction::Append)]
    top_k: Vec<usize>,
    /// Ranking for --top-k: COLUMN, or COLUMN=WEIGHT,COLUMN=WEIGHT,... for the log-linear
    /// sum of weight * ln(value). Ties go to the target first in byte order. Give one for all
    /// --top-k, or one per --top-k in the same order. Default p_t_given_s.
    #[arg(long, value_name = "RANKING", action = clap::ArgAction::Append)]
    by: Vec<String>,
    /// Keep pairs whose score or count column is at least VALUE (COLUMN=VALUE; repeatable).
    #[arg(long, value_name = "COLUMN=VALUE", action = clap::ArgAction::Append)]
    min: Vec<String>,
    /// Keep pairs whose score or count column is at most VALUE (COLUMN=VALUE; repeatable).
    #[arg(long, value_name = "COLUMN=VALUE", action = clap::ArgAction::Append)]
    max: Vec<String>,
    /// Keep pairs whose relative-entropy score p(t|s)(ln p(t|s) - ln p'(t|s)) is at least
    /// this, p' being the best monotone composition of shorter pairs of the table.
    #[arg(long, value_name = "THRESHOLD", action = clap::ArgAction::Append, allow_negative_numbers = true)]
    relative_entropy: Vec<f64>,
    /// Keep only source phrases that occur in this tokenized text (e.g. a test set's source
    /// side), as before decoding it.
    #[arg(long, value_name = "FILE", action = clap::ArgAction::Append)]
    keep_test_phrases: Vec<PathBuf>,
    /// After the filters, divide this score column by its sum over the options kept for each
    /// source, so that it sums to 1 again (repeatable). Scores are unchanged otherwise.
    #[arg(long, value_name = "COLUMN", action = clap::ArgAction::Append)]
    renormalize: Vec<String>,
    /// Write what each filter did as JSON.
    #[arg(long, value_name = "FILE")]
    stats: Option<PathBuf>,
    #[command(flatten)]
    resources: ResourceFlags,
    /// Settings of a packed output (by default a packed input's, or pack's defaults).
    #[command(flatten)]
    pack: PackFlags,
}

/// Flags plus the filters in command-line order.
pub struct Args {
    flags: Box<Flags>,
    /// (position on the command line, flag id, value)
    order: Vec<(usize, &'static str, String)>,
}

const FILTER_FLAGS: [&str; 6] = [
    "significance",
    "top_k",
    "min",
    "max",
    "relative_entropy",
    "keep_test_phrases",
];

impl FromArgMatches for Args {
    fn from_arg_matches(matches: &ArgMatches) -> Result<Self, clap::Error> {
        let flags = Box::new(Flags::from_arg_matches(matches)?);
        let mut order = Vec::new();
        for id in FILTER_FLAGS {
            let Some(indices) = matches.indices_of(id) else {
                continue;
            };
            let values: Vec<String> = match id {
                "top_k" => flags.top_k.iter().map(|v| v.to_string()).collect(),
                "keep_test_phrases" => flags
                    .keep_test_phrases
                    .iter()
                    .map(|v| v.to_string_lossy().into_owned())
                    .collect(),
                "relative_entropy" => flags
                    .relative_entropy
                    .iter()
                    .map(|v| v.to_string())
                    .collect(),
                _ => matches
                    .get_many::<String>(id)
                    .into_iter()
                    .flatten()
                    .cloned()
                    .collect(),
            };
            for (index, value) in indices.zip(values) {
                order.push((index, id, value));
            }
        }
        order.sort_by_key(|e| e.0);
        Ok(Args { flags, order })
    }

    fn update_from_arg_matches(&mut self, matches: &ArgMatches) -> Result<(), clap::Error> {
        *self = Args::from_arg_matches(matches)?;
        Ok(())
    }
}

impl clap::Args for Args {
    fn augment_args(cmd: clap::Command) -> clap::Command {
        Flags::augment_args(cmd)
    }
    fn augment_args_for_update(cmd: clap::Command) -> clap::Command {
        Flags::augment_args_for_update(cmd)
    }
}

fn filters(args: &Args) -> baler::Result<Vec<Filter>> {
    let top_k_count = args.order.iter().filter(|e| e.1 == "top_k").count();
    let rankings: Vec<Ranking> = args
        .flags
        .by
        .iter()
        .map(|b| Ranking::parse(b))
        .collect::<baler::Result<_>>()?;
    if rankings.len() > 1 && rankings.len() != top_k_count {
        return Err(Error::invalid(
            "--by",
            format!(
                "{} rankings for {top_k_count} --top-k filters: give one for all, or one each",
                rankings.len()
            ),
        ));
    }
    if !rankings.is_empty() && top_k_count == 0 {
        return Err(Error::invalid("--by", "only applies to --top-k"));
    }
    let mut filters = Vec::new();
    let mut k_seen = 0;
    for (_, id, value) in &args.order {
        filters.push(match *id {
            "significance" => Filter::Significance(Threshold::parse(value)?),
            "top_k" => {
                let by = match rankings.len() {
                    0 => Ranking::default(),
                    1 => rankings[0].clone(),
                    _ => rankings[k_seen].clone(),
                };
                k_seen += 1;
                Filter::TopK {
                    k: value.parse().expect("parsed by clap"),
                    by,
                }
            }
            "min" => Filter::bound("--min", value, true)?,
            "max" => Filter::bound("--max", value, false)?,
            "relative_entropy" => Filter::RelativeEntropy(value.parse().expect("parsed by clap")),
            "keep_test_phrases" => Filter::KeepTestPhrases(PathBuf::from(value)),
            _ => unreachable!("filter flags are listed in FILTER_FLAGS"),
        });
    }
    Ok(filters)
}

pub fn run(args: Args) -> baler::Result<ExitCode> {
    let filters = filters(&args)?;
    let f = &args.flags;
    let counts = if let (Some(source), Some(target)) = (&f.source, &f.target) {
        CountSource::Corpus {
            source: source.clone(),
            target: target.clone(),
        }
    } else if f.phrase_counts {
        CountSource::PhraseCounts
    } else {
        CountSource::Table
    };
    let tested = f.annotate || filters.iter().any(|x| matches!(x, Filter::Significance(_)));
    if tested && counts == CountSource::PhraseCounts {
        eprintln!(
            "baler: warning: --phrase-counts: the significance test runs on phrase-pair \
             occurrences (count, count_source, count_target), not on sentence pairs; -ln p is \
             an approximation and alpha+/-epsilon lose their meaning"
        );
    }
    let quiet = f.resources.quiet;
    if filters.is_empty() && !f.annotate && f.renormalize.is_empty() && !quiet {
        eprintln!("baler: warning: no filter given; the table is copied unchanged");
    }
    let options = PruneOptions {
        filters,
        annotate: f.annotate,
        counts,
        renormalize: f.renormalize.clone(),
        memory: f.resources.resources.memory,
        progress: !quiet,
        temp_dir: f.resources.resources.temp_dir.clone(),
    };
    let packing = Packing {
        settings: f.pack.0.clone(),
        resources: f.resources.resources.clone(),
        progress: !quiet,
        provenance: Vec::new(),
    };
    if let Some(stats) = &f.stats {
        baler::files::check_output(stats, &[&f.input])?;
    }
    let stats = pipeline::prune_file(&f.input, &f.output, &options, &packing)?;
    if !quiet {
        eprint!("{}", stats.summary());
    }
    if let Some(path) = &f.stats {
        let mut out = baler::files::Output::create(path)?;
        serde_json::to_writer_pretty(&mut out, &stats)
            .map_err(|e| Error::io(path, "writing", e.into()))?;
        std::io::Write::write_all(&mut out, b"\n").map_err(|e| Error::io(path, "writing", e))?;
        out.commit()?;
    }
    Ok(ExitCode::SUCCESS)
}
