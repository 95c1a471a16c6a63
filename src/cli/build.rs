//! `baler build`: run a whole build from one recipe file.

use std::path::PathBuf;
use std::process::ExitCode;

use baler::recipe::Recipe;

/// Arguments of `baler build`.
#[derive(clap::Args)]
#[command(
    after_help = "The recipe (TOML) lists the corpus, extraction options, filters in \
    order, packing options, outputs and an optional held-out set. Every key is described in \
    docs/recipe.md; demo-data/toolshed.recipe.toml is a complete example. Every relative path, \
    input or output, is relative to the recipe's folder."
)]
pub struct Args {
    /// The recipe file.
    recipe: PathBuf,
    /// Print the final report as JSON instead of the readable table.
    #[arg(long, conflicts_with = "csv")]
    json: bool,
    /// Print the final report as CSV.
    #[arg(long)]
    csv: bool,
    /// `--threads` and `--temp-dir` for every stage, over the recipe's values; `-q`.
    #[command(flatten)]
    quiet: crate::cli::flags::StageFlags,
}

pub fn run(args: Args) -> baler::Result<ExitCode> {
    let mut recipe = Recipe::load(&args.recipe)?;
    for (key, value) in &args.quiet.given {
        recipe.set_resource(key, value)?;
    }
    let started = std::time::Instant::now();
    let report = baler::pipeline::build(&recipe, !args.quiet.quiet)?;
    if !args.quiet.quiet {
        let e = &report.extract;
        eprintln!(
            "baler build: extracted {} pairs ({} sources) from {} sentence pairs",
            e.pairs, e.sources, e.corpus.sentence_pairs
        );
        eprint!("{}", report.prune.summary());
        eprintln!(
            "baler build: packed {} pairs into {} ({} bytes) in {:.1} s in all",
            report.pack.meta.pairs,
            recipe.table.display(),
            report.pack.file_bytes,
            started.elapsed().as_secs_f64()
        );
    }
    let text = if args.json {
        let mut s = serde_json::to_string_pretty(&report.to_json()).expect("figures serialize");
        s.push('\n');
        s
    } else if args.csv {
        report.comparison.to_csv()
    } else {
        report.to_text()
    };
    super::print(&text)?;
    Ok(ExitCode::SUCCESS)
}
