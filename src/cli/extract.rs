//! `baler extract`: phrase pairs from word-aligned parallel text, scored and counted.
//!
//! Without a subcommand it runs the whole job on this machine. The subcommands are the same
//! job as map and reduce steps, for corpora processed shard by shard:
//! `shard` (map) → `merge` (reduce) → `tally` (map) → `attach` (reduce).

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

use baler::extract::corpus::{CorpusOptions, CorpusPaths, CorpusStats, LineRange};
use baler::extract::phrases::PhraseLimits;
use baler::extract::ranges::SplitKeys;
use baler::extract::score::{Discount, MergeOptions};
use baler::extract::sentences::TallyOptions;
use baler::extract::shard::ShardOptions;
use baler::extract::{peak_memory, ExtractOptions};
use baler::files::{check_output, Output};

use super::flags::ResourceFlags;
use baler::Error;

#[derive(clap::Args)]
#[command(args_conflicts_with_subcommands = true, subcommand_negates_reqs = true)]
pub struct Args {
    #[command(subcommand)]
    step: Option<Step>,
    #[command(flatten)]
    job: Box<WholeJob>,
}

/// The one-machine path's flags (boxed: they make the argument struct large).
#[derive(clap::Args)]
struct WholeJob {
    #[command(flatten)]
    corpus: CorpusArgs,
    #[command(flatten)]
    phrases: PhraseArgs,
    #[command(flatten)]
    scoring: ScoringArgs,
    #[command(flatten)]
    resources: ResourceFlags,
    /// Output table: .tsv, .tsv.zst, .tsv.gz, or - for standard output.
    #[arg(short = 'o', long = "output", value_name = "FILE", required = true)]
    output: Option<PathBuf>,
}

#[derive(clap::Subcommand)]
enum Step {
    /// Map: extract one corpus shard into a sorted, compressed count run.
    Shard {
        #[command(flatten)]
        corpus: CorpusArgs,
        #[command(flatten)]
        phrases: PhraseArgs,
        #[command(flatten)]
        resources: ResourceFlags,
        /// The count run to write; with --split-keys, the prefix of the files written.
        #[arg(short = 'o', long = "output", value_name = "FILE")]
        output: PathBuf,
        /// Split the counts by source key range for reducers that merge one range each: the
        /// file holds one split key per line (strictly increasing in byte order; R-1 keys make
        /// R ranges). Writes RUN.0000.run … (one count run per range, each with every
        /// word-link count) and RUN.targets.run (the shard's target totals, for
        /// `merge --target-totals`).
        #[arg(long, value_name = "FILE")]
        split_keys: Option<PathBuf>,
    },
    /// Reduce: merge count runs of any number of shards into the scored table, without the
    /// sentence-level counts.
    Merge {
        /// Count runs written by `baler extract shard`.
        #[arg(required = true, value_name = "FILE")]
        runs: Vec<PathBuf>,
        #[command(flatten)]
        scoring: ScoringArgs,
        #[command(flatten)]
        resources: ResourceFlags,
        /// The merged table (.tsv, .tsv.zst, .tsv.gz, or -).
        #[arg(short = 'o', long = "output", value_name = "TABLE")]
        output: PathBuf,
        /// Also write the phrase index that `baler extract tally` reads.
        #[arg(long, value_name = "FILE")]
        index: Option<PathBuf>,
        /// The runs hold one source key range (`shard --split-keys`): take count_target from
        /// these target totals (RUN.targets.run of every shard) instead of summing it over the
        /// runs. The table written holds that range's rows. Only with --discount none.
        #[arg(long, value_name = "FILE", num_args = 1..)]
        target_totals: Vec<PathBuf>,
    },
    /// Map: count in one corpus shard the sentence pairs containing each pair's source, target
    /// and both.
    Tally {
        /// The phrase index written by `baler extract merge --index`.
        #[arg(long, value_name = "FILE")]
        index: PathBuf,
        /// Source side of the shard, one tokenized sentence per line.
        #[arg(long, value_name = "FILE")]
        source: PathBuf,
        /// Target side of the shard.
        #[arg(long, value_name = "FILE")]
        target: PathBuf,
        /// Skip sentence pairs longer than this (default: the extraction's, from the index).
        #[arg(long, value_name = "N")]
        max_sentence_length: Option<usize>,
        #[command(flatten)]
        lines: LinesArg,
        #[command(flatten)]
        resources: ResourceFlags,
        /// The tally to write.
        #[arg(short = 'o', long = "output", value_name = "FILE")]
        output: PathBuf,
    },
    /// Reduce: sum the tallies of all shards and append cooc, df_source and df_target to the
    /// merged table.
    Attach {
        /// The merged table the tallies were made for.
        #[arg(long, value_name = "TABLE")]
        table: PathBuf,
        /// Tallies written by `baler extract tally`, one per shard.
        #[arg(required = true, value_name = "FILE")]
        tallies: Vec<PathBuf>,
        /// The final table (.tsv, .tsv.zst, .tsv.gz, or -).
        #[arg(short = 'o', long = "output", value_name = "FILE")]
        output: PathBuf,
        #[command(flatten)]
        quiet: crate::cli::flags::Quiet,
    },
}

#[derive(clap::Args, Clone)]
struct CorpusArgs {
    /// Source side: one tokenized sentence per line (.gz/.zst read transparently).
    #[arg(long, value_name = "FILE", required = true)]
    source: Option<PathBuf>,
    /// Target side, line-parallel to the source.
    #[arg(long, value_name = "FILE", required = true)]
    target: Option<PathBuf>,
    /// Word alignment: space-separated 0-based source-target links `i-j`, one line per pair.
    #[arg(long, value_name = "FILE", required = true)]
    alignment: Option<PathBuf>,
    /// The alignment's links are target-source (`j-i`) instead.
    #[arg(long)]
    links_target_first: bool,
    /// Skip (and count) sentence pairs with more tokens than this on either side.
    #[arg(long, value_name = "N", default_value_t = 100)]
    max_sentence_length: usize,
    #[command(flatten)]
    lines: LinesArg,
}

#[derive(clap::Args, Clone)]
struct LinesArg {
    /// Read only lines FIRST to LAST of the corpus files (1-based, inclusive; FIRST- reads to
    /// the end): one partition of a corpus split by lines. Errors name the files' own line
    /// numbers. Only a range open at the end checks that the files end together.
    #[arg(long, value_name = "FIRST-LAST", default_value = "1-")]
    lines: LineRange,
    /// With --lines: the byte offsets where line FIRST begins in the source, target and
    /// alignment files (plain files), so that the lines before are not read at all. Each must
    /// follow a newline; that they belong to line FIRST is the caller's promise.
    #[arg(long, value_name = "N,N[,N]", value_delimiter = ',')]
    start_bytes: Vec<u64>,
}

impl LinesArg {
    fn range(&self) -> baler::Result<LineRange> {
        let mut range = self.lines;
        match self.start_bytes.as_slice() {
            [] => {}
            [s, t] => range.start_bytes = Some([*s, *t, u64::MAX]),
            [s, t, a] => range.start_bytes = Some([*s, *t, *a]),
            _ => {
                return Err(Error::invalid(
                    "--start-bytes",
                    "give two or three byte offsets, SRC,TGT[,ALIGN]",
                ))
            }
        }
        Ok(range)
    }
}

#[derive(clap::Args, Clone)]
struct PhraseArgs {
    /// Longest phrase, in tokens, on either side.
    #[arg(long, value_name = "N", default_value_t = 7)]
    max_length: usize,
    /// Do not extend pairs over unaligned words at their edges.
    #[arg(long)]
    no_unaligned_edges: bool,
}

#[derive(clap::Args, Clone)]
struct ScoringArgs {
    /// Discount phrase counts before taking relative frequencies.
    #[arg(long, value_enum, value_name = "KIND", default_value_t = DiscountArg::None)]
    discount: DiscountArg,
}

#[derive(clap::ValueEnum, Clone, Copy)]
enum DiscountArg {
    /// Plain relative frequencies.
    None,
    /// Good-Turing discounted counts (counts up to 10).
    GoodTuring,
    /// Fixed absolute discount with lower-order redistribution.
    KneserNey,
}

impl CorpusArgs {
    fn paths(&self) -> CorpusPaths {
        CorpusPaths {
            source: self.source.clone().expect("required by clap"),
            target: self.target.clone().expect("required by clap"),
            alignment: self.alignment.clone(),
        }
    }
    fn options(&self) -> baler::Result<CorpusOptions> {
        Ok(CorpusOptions {
            max_sentence_length: self.max_sentence_length,
            links_target_first: self.links_target_first,
            lines: self.lines.range()?,
        })
    }
}

impl PhraseArgs {
    fn limits(&self) -> baler::Result<PhraseLimits> {
        if self.max_length == 0 || self.max_length > 255 {
            return Err(Error::invalid(
                "--max-length",
                format!("{} is not between 1 and 255", self.max_length),
            ));
        }
        Ok(PhraseLimits {
            max_length: self.max_length,
            unaligned_edges: !self.no_unaligned_edges,
        })
    }
}

impl DiscountArg {
    fn discount(self) -> Discount {
        match self {
            DiscountArg::None => Discount::None,
            DiscountArg::GoodTuring => Discount::GoodTuring,
            DiscountArg::KneserNey => Discount::KneserNey,
        }
    }
}

fn shard_options(
    corpus: &CorpusArgs,
    phrases: &PhraseArgs,
    resources: &ResourceFlags,
) -> baler::Result<ShardOptions> {
    Ok(ShardOptions {
        limits: phrases.limits()?,
        corpus: corpus.options()?,
        memory: resources.resources.memory,
        threads: resources.resources.thread_count(),
        temp_dir: resources.resources.temp_dir.clone(),
        progress: !resources.quiet,
    })
}

fn corpus_summary(c: &CorpusStats) -> String {
    format!(
        "{} lines read, {} sentence pairs kept, {} skipped ({} empty, {} over the length limit)",
        c.lines,
        c.sentence_pairs,
        c.skipped_empty + c.skipped_long,
        c.skipped_empty,
        c.skipped_long
    )
}

fn memory_summary() -> String {
    peak_memory().map_or_else(
        || "peak memory unknown".into(),
        |b| format!("peak memory {:.1} MiB", b as f64 / (1 << 20) as f64),
    )
}

pub fn run(args: Args) -> baler::Result<ExitCode> {
    let started = std::time::Instant::now();
    let say = |quiet: bool, text: String| {
        if !quiet {
            let _ = writeln!(std::io::stderr(), "baler extract: {text}");
        }
    };
    match args.step {
        None => {
            let args = *args.job;
            let output = args.output.expect("required by clap");
            let options = ExtractOptions {
                shard: shard_options(&args.corpus, &args.phrases, &args.resources)?,
                discount: args.scoring.discount.discount(),
            };
            let s = baler::pipeline::extract_file(&args.corpus.paths(), &options, &output)?;
            say(
                args.resources.quiet,
                format!(
                    "{}; {} phrase-pair occurrences, {} distinct pairs, {} sources, {} targets; {} counting pass(es); {:.1} s (extract {:.1}, merge {:.1}, count {:.1}, attach {:.1}), {}",
                    corpus_summary(&s.corpus),
                    s.pair_occurrences,
                    s.pairs,
                    s.sources,
                    s.targets,
                    s.sentence_count_passes,
                    s.seconds,
                    s.step_seconds[0],
                    s.step_seconds[1],
                    s.step_seconds[2],
                    s.step_seconds[3],
                    memory_summary()
                ),
            );
        }
        Some(Step::Shard {
            corpus,
            phrases,
            resources,
            output,
            split_keys,
        }) => {
            let options = shard_options(&corpus, &phrases, &resources)?;
            let info = match &split_keys {
                None => baler::extract::shard::extract_shard(&corpus.paths(), &options, &output)?,
                Some(keys) => {
                    let keys = SplitKeys::read(keys)?;
                    baler::extract::ranges::extract_shard_ranges(
                        &corpus.paths(),
                        &options,
                        &keys,
                        &output,
                    )?
                }
            };
            say(
                resources.quiet,
                format!(
                    "{}; {} phrase-pair occurrences into {}; {:.1} s, {}",
                    corpus_summary(&info.corpus),
                    info.pair_occurrences,
                    output.display(),
                    started.elapsed().as_secs_f64(),
                    memory_summary()
                ),
            );
        }
        Some(Step::Merge {
            runs,
            scoring,
            resources,
            output,
            index,
            target_totals,
        }) => {
            let options = MergeOptions {
                discount: scoring.discount.discount(),
                memory: resources.resources.memory,
                temp_dir: resources.resources.temp_dir.clone(),
                index,
                target_totals,
            };
            let mut inputs: Vec<&Path> = runs.iter().map(PathBuf::as_path).collect();
            inputs.extend(options.target_totals.iter().map(PathBuf::as_path));
            check_output(&output, &inputs)?;
            if let Some(index) = &options.index {
                check_output(index, &inputs)?;
            }
            let mut out = Output::create(&output)?;
            let s = baler::extract::score::merge_and_score(&runs, &mut out, &output, &options)?;
            out.commit()?;
            say(
                resources.quiet,
                format!(
                    "{} runs, {} sentence pairs: {} distinct pairs, {} sources, {} targets; {:.1} s, {}",
                    runs.len(),
                    s.info.corpus.sentence_pairs,
                    s.pairs,
                    s.sources,
                    s.targets,
                    started.elapsed().as_secs_f64(),
                    memory_summary()
                ),
            );
        }
        Some(Step::Tally {
            index,
            source,
            target,
            max_sentence_length,
            lines,
            resources,
            output,
        }) => {
            let options = TallyOptions {
                lines: lines.range()?,
                max_sentence_length,
                memory: resources.resources.memory,
                threads: resources.resources.thread_count(),
                temp_dir: resources.resources.temp_dir.clone(),
                progress: !resources.quiet,
            };
            let corpus = CorpusPaths {
                source,
                target,
                alignment: None,
            };
            let info = baler::extract::sentences::tally(&index, &corpus, &options, &output)?;
            say(
                resources.quiet,
                format!(
                    "{}; {} table rows counted in {} pass(es); {:.1} s, {}",
                    corpus_summary(&info.corpus),
                    info.table_pairs,
                    info.passes,
                    started.elapsed().as_secs_f64(),
                    memory_summary()
                ),
            );
        }
        Some(Step::Attach {
            table,
            tallies,
            output,
            quiet: _, // attach draws no progress and prints no summary
        }) => {
            let mut inputs: Vec<&Path> = tallies.iter().map(PathBuf::as_path).collect();
            inputs.push(&table);
            check_output(&output, &inputs)?;
            let mut out = Output::create(&output)?;
            baler::extract::sentences::attach(&table, &tallies, &mut out, &output)?;
            out.commit()?;
        }
    }
    Ok(ExitCode::SUCCESS)
}
