//! `baler prune`: flags, filter order, the stderr summary and the `--stats` file.

use std::path::PathBuf;
use std::process::ExitCode;

use super::flags::{arg, PackFlags, ResourceFlags};
use baler::pipeline::{self, Packing};
use baler::prune::{CountSource, Filter, PruneOptions, Ranking};
use baler::settings::filters;
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
    /// (position on the command line, filter key, value)
    order: Vec<(usize, &'static str, String)>,
    /// `--by`, in order.
    by: Vec<String>,
}

impl FromArgMatches for Args {
    fn from_arg_matches(matches: &ArgMatches) -> Result<Self, clap::Error> {
        let flags = Box::new(Flags::from_arg_matches(matches)?);
        let mut order = Vec::new();
        for setting in &filters::FILTERS {
            let Some(indices) = matches.indices_of(setting.key) else {
                continue;
            };
            let values = matches
                .get_many::<String>(setting.key)
                .into_iter()
                .flatten();
            for (index, value) in indices.zip(values) {
                order.push((index, setting.key, value.clone()));
            }
        }
        order.sort_by_key(|e| e.0);
        let by = matches
            .get_many::<String>(filters::BY.key)
            .into_iter()
            .flatten()
            .cloned()
            .collect();
        Ok(Args { flags, order, by })
    }

    fn update_from_arg_matches(&mut self, matches: &ArgMatches) -> Result<(), clap::Error> {
        *self = Args::from_arg_matches(matches)?;
        Ok(())
    }
}

/// Checks a filter's value while clap parses it.
fn check_filter(key: &str, text: &str) -> baler::Result<()> {
    filters::filter(key, text).map(|_| ())
}

fn check_ranking(_: &str, text: &str) -> baler::Result<()> {
    Ranking::parse(text).map(|_| ())
}

impl clap::Args for Args {
    fn augment_args(cmd: clap::Command) -> clap::Command {
        let mut cmd = Flags::augment_args(cmd);
        // the filters and --by, from the settings registry
        for setting in &filters::FILTERS {
            cmd = cmd.arg(
                arg(setting, check_filter)
                    .action(clap::ArgAction::Append)
                    .allow_negative_numbers(true)
                    .help_heading("Filters (run in the order given)"),
            );
        }
        cmd.arg(
            arg(&filters::BY, check_ranking)
                .action(clap::ArgAction::Append)
                .help_heading("Filters (run in the order given)"),
        )
    }
    fn augment_args_for_update(cmd: clap::Command) -> clap::Command {
        Self::augment_args(cmd)
    }
}

fn filters(args: &Args) -> baler::Result<Vec<Filter>> {
    let top_k_count = args
        .order
        .iter()
        .filter(|e| e.1 == filters::TOP_K.key)
        .count();
    let rankings: Vec<Ranking> = args
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
    let mut list = Vec::new();
    let mut k_seen = 0;
    for (_, key, value) in &args.order {
        let mut filter = filters::filter(key, value)?;
        if let Filter::TopK { by, .. } = &mut filter {
            if let Some(r) = rankings.get(if rankings.len() == 1 { 0 } else { k_seen }) {
                *by = r.clone();
            }
            k_seen += 1;
        }
        list.push(filter);
    }
    Ok(list)
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
