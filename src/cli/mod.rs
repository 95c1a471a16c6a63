//! Flag definitions and dispatch. Exit codes: 0 success, 1 nothing found (lookup misses only),
//! 2 error.

mod build;
mod compare;
mod dump;
mod evaluate;
mod extract;
mod flags;
mod inspect;
mod lm;
mod lookup;
mod pack;
mod prune;
mod quality;
mod sweep;
mod synth;
mod translate;
mod tune;

use std::process::ExitCode;

use clap::{Parser, Subcommand};

/// Build, prune, pack and query phrase tables for phrase-based machine translation.
#[derive(Parser)]
#[command(name = "baler", version, about, propagate_version = true)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Extract and score phrase pairs from word-aligned parallel text.
    Extract(extract::Args),
    /// Remove noisy phrase pairs (significance test, top-k, thresholds).
    Prune(prune::Args),
    /// Pack an interchange TSV table into a memory-mappable .bale file.
    Pack(pack::Args),
    /// Print the options of source phrases as interchange TSV.
    Lookup(lookup::Args),
    /// Write a whole packed table back as interchange TSV.
    Dump(dump::Args),
    /// Show the sections, sizes and metadata of a packed table.
    Inspect(inspect::Args),
    /// Generate a large synthetic phrase table for benchmarks.
    Synth(synth::Args),
    /// Compare tables with a base: size, held-out coverage, retained mass, divergence.
    Compare(compare::Args),
    /// Prune and pack at every setting of a grid; measure each; plot size against coverage.
    Sweep(sweep::Args),
    /// Run a whole build (extract, prune, pack, report) from one recipe file.
    Build(build::Args),
    /// Train or apply an n-gram language model of the target language.
    Lm(lm::Args),
    /// Score hypotheses against a reference: BLEU, chrF, paired bootstrap.
    Evaluate(evaluate::Args),
    /// Translate tokenized text with a packed table and a language model.
    Translate(translate::Args),
    /// Fit the translation weights on a development set; write a weights file.
    Tune(tune::Args),
}

/// Parses the command line, runs it, and maps the outcome to an exit code.
pub fn main() -> ExitCode {
    let cli = Cli::parse();
    if let Err(e) = baler::files::remove_on_interrupt(
        "baler: interrupted; partial outputs and temporary files removed",
    ) {
        eprintln!("baler: error: {e}");
        return ExitCode::from(2);
    }
    let result = match cli.command {
        Command::Extract(a) => extract::run(a),
        Command::Prune(a) => prune::run(a),
        Command::Pack(a) => pack::run(a),
        Command::Lookup(a) => lookup::run(a),
        Command::Dump(a) => dump::run(a),
        Command::Inspect(a) => inspect::run(a),
        Command::Synth(a) => synth::run(a),
        Command::Compare(a) => compare::run(a),
        Command::Sweep(a) => sweep::run(a),
        Command::Build(a) => build::run(a),
        Command::Lm(a) => lm::run(a),
        Command::Evaluate(a) => evaluate::run(a),
        Command::Translate(a) => translate::run(a),
        Command::Tune(a) => tune::run(a),
    };
    match result {
        Ok(code) => code,
        Err(e) if e.is_broken_pipe() => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("baler: error: {e}");
            ExitCode::from(2)
        }
    }
}

/// Writes `text` to standard output. A closed pipe ends the command successfully (see
/// [`main`]); any other failure, such as a full disk, is an error naming standard output.
pub(crate) fn print(text: &str) -> baler::Result<()> {
    use std::io::Write;
    let mut out = std::io::stdout().lock();
    out.write_all(text.as_bytes())
        .and_then(|()| out.flush())
        .map_err(|e| baler::Error::io(baler::files::STDIO, "writing", e))
}

#[cfg(test)]
mod tests {
    use super::Cli;
    use clap::CommandFactory;

    /// Placeholders allowed in help texts: the kind of value, never the flag's own name
    /// (see `cli/flags.rs`).
    const PLACEHOLDERS: &[&str] = &[
        "FILE",
        "DIR",
        "TABLE",
        "MODEL",
        "N",
        "NUMBER",
        "SIZE",
        "BITS",
        "KIND",
        "THRESHOLD",
        "RANKING",
        "COLUMN",
        "COLUMN=VALUE",
        "FEATURE=VALUE",
        "NAME=V1,V2,...",
        "NAME,...",
        "FIRST-LAST",
        "N,N[,N]",
    ];
    /// Commands that run in parallel: `--threads`, 0 meaning every core.
    const THREADED: &[&str] = &[
        "prune",
        "pack",
        "compare",
        "sweep",
        "translate",
        "tune",
        "build",
    ];
    /// Commands that spill to disk: `--temp-dir`, and `--memory` unless each stage has its own.
    const SPILLING: &[&str] = &["prune", "pack", "sweep", "build", "lm build"];
    const OWN_BUDGETS: &[&str] = &["build"];

    /// Every leaf command with its full name (`lm build`).
    fn leaves(cmd: &clap::Command, prefix: &str, out: &mut Vec<(String, clap::Command)>) {
        for sub in cmd.get_subcommands().filter(|s| s.get_name() != "help") {
            let name = format!("{prefix}{}", sub.get_name()).trim().to_string();
            if sub.get_subcommands().all(|s| s.get_name() == "help") {
                out.push((name.clone(), sub.clone()));
            }
            // a command with subcommands may run itself too (extract)
            if sub.has_subcommands() {
                if sub
                    .get_arguments()
                    .any(|a| !a.is_global_set() && a.get_id() != "help" && a.get_id() != "version")
                {
                    out.push((name.clone(), sub.clone()));
                }
                leaves(sub, &format!("{name} "), out);
            }
        }
    }

    #[test]
    fn every_command_shares_the_concepts() {
        let mut cli = Cli::command();
        cli.build();
        let mut commands = Vec::new();
        leaves(&cli, "", &mut commands);
        assert!(commands.len() >= 17, "{} commands found", commands.len());
        let mut problems = Vec::new();
        for (name, cmd) in &commands {
            let arg = |id: &str| cmd.get_arguments().find(|a| a.get_id() == id);
            match arg("quiet") {
                Some(q) if q.get_short() == Some('q') => {}
                _ => problems.push(format!("{name}: no -q/--quiet")),
            }
            for a in cmd.get_arguments().filter(|a| !a.is_positional()) {
                let takes_value = a.get_action().takes_values();
                if !takes_value {
                    continue;
                }
                for v in a.get_value_names().unwrap_or_default() {
                    if !PLACEHOLDERS.contains(&v.as_str()) {
                        problems.push(format!("{name}: --{} <{v}>", a.get_id()));
                    }
                }
                if a.get_value_names().is_none() {
                    problems.push(format!("{name}: --{} has no placeholder", a.get_id()));
                }
            }
            let threads = arg("threads");
            if THREADED.contains(&name.as_str()) && threads.is_none() {
                problems.push(format!("{name}: no --threads"));
            }
            if let Some(t) = threads {
                let help = t.get_help().map(|h| h.to_string()).unwrap_or_default();
                if help != baler::settings::THREADS.help {
                    problems.push(format!("{name}: --threads not from the registry"));
                }
            }
            for id in ["memory", "temp_dir"] {
                let budgets = id == "memory" && OWN_BUDGETS.contains(&name.as_str());
                if SPILLING.contains(&name.as_str()) && !budgets && arg(id).is_none() {
                    problems.push(format!("{name}: no --{id}"));
                }
            }
            if let Some(m) = arg("memory") {
                let help = m.get_help().map(|h| h.to_string()).unwrap_or_default();
                let default: Vec<_> = m.get_default_values().iter().collect();
                if help != baler::settings::MEMORY.help
                    || default != [baler::settings::MEMORY.default.expect("a default")]
                {
                    problems.push(format!("{name}: --memory not from the registry"));
                }
            }
        }
        assert!(problems.is_empty(), "{}", problems.join("\n"));
    }
}
