//! Command-line flags derived from the settings registry (`baler::settings`): one clap
//! argument per registry entry, validated by the same function as recipes and `--vary`.
//!
//! Commands take the shared concepts from here, never declare them themselves:
//! [`ResourceFlags`] (`--memory`, `--threads`, `--temp-dir`, `-q`) where work spills to disk,
//! [`ThreadFlags`] (`--threads`, `-q`) where it only runs in parallel, [`MemoryFlags`]
//! (`--memory`, `-q`) where it is bounded in memory alone, [`StageFlags`] (`--threads`,
//! `--temp-dir`, `-q`) for `build`, and [`Quiet`] (`-q`) everywhere else.
//!
//! Placeholders name the kind of value, never the flag: `FILE`, `DIR`, `TABLE` (a phrase
//! table), `MODEL` (a language model), `N` (a whole number), `NUMBER` (a real number),
//! `SIZE` (bytes, e.g. 512M), or the shape of a structured value (`COLUMN=VALUE`). The test
//! `every_command_shares_the_concepts` in `cli/mod.rs` checks every command against this.

use baler::settings::{self, PackSettings, Resources, Setting};
use clap::{Arg, ArgMatches, FromArgMatches};

/// The clap argument of a registry entry; its value is validated by `check` while parsing.
pub(crate) fn arg(setting: &'static Setting, check: fn(&str, &str) -> baler::Result<()>) -> Arg {
    let key = setting.key;
    let mut a = Arg::new(key)
        .long(&*Box::leak(setting.flag().into_boxed_str())) // once per flag, at start-up
        .value_name(setting.value_name)
        .help(setting.help)
        .value_parser(move |text: &str| -> Result<String, String> {
            check(key, text)
                .map(|()| text.to_string())
                .map_err(|e| match e {
                    baler::Error::InvalidArgument { reason, .. } => reason,
                    other => other.to_string(),
                })
        });
    if let Some(d) = setting.default {
        a = a.default_value(d);
    }
    a
}

fn check_pack(key: &str, text: &str) -> baler::Result<()> {
    PackSettings::default().set(key, text)
}

fn check_resource(key: &str, text: &str) -> baler::Result<()> {
    Resources::default().set(key, text)
}

/// The packing flags (`--bits`, `--block-sources`, `--group-targets`,
/// `--compression`): only those given are set.
#[derive(Clone, Debug, Default)]
pub struct PackFlags(pub PackSettings);

impl FromArgMatches for PackFlags {
    fn from_arg_matches(m: &ArgMatches) -> Result<Self, clap::Error> {
        let mut s = PackSettings::default();
        for setting in &settings::PACK {
            if let Some(v) = m.get_one::<String>(setting.key) {
                s.set(setting.key, v)
                    .map_err(|e| clap::Error::raw(clap::error::ErrorKind::ValueValidation, e))?;
            }
        }
        Ok(PackFlags(s))
    }
    fn update_from_arg_matches(&mut self, m: &ArgMatches) -> Result<(), clap::Error> {
        *self = PackFlags::from_arg_matches(m)?;
        Ok(())
    }
}

impl clap::Args for PackFlags {
    fn augment_args(mut cmd: clap::Command) -> clap::Command {
        for setting in &settings::PACK {
            cmd = cmd.arg(arg(setting, check_pack).help_heading("Packing"));
        }
        cmd
    }
    fn augment_args_for_update(cmd: clap::Command) -> clap::Command {
        Self::augment_args(cmd)
    }
}

/// The one help text of `-q/--quiet`.
const QUIET_HELP: &str = "Print nothing on standard error but errors (no progress, no summary)";

fn quiet_arg() -> Arg {
    Arg::new("quiet")
        .short('q')
        .long("quiet")
        .action(clap::ArgAction::SetTrue)
        .help(QUIET_HELP)
}

/// `-q/--quiet`, for commands with no resource flags.
#[derive(Clone, Copy, Debug, Default, clap::Args)]
pub struct Quiet {
    #[arg(short, long, help = QUIET_HELP)]
    pub quiet: bool,
}

impl Quiet {
    /// A progress bar on standard error over `len` steps (a spinner when `None`), hidden with
    /// `-q` (and, by indicatif, when standard error is not a terminal).
    pub fn bar(&self, len: Option<u64>, message: &'static str) -> indicatif::ProgressBar {
        if self.quiet {
            return indicatif::ProgressBar::hidden();
        }
        let (bar, template) = match len {
            Some(n) => (
                indicatif::ProgressBar::new(n),
                "{msg} {wide_bar} {human_pos}/{human_len} {per_sec} eta {eta}",
            ),
            None => (
                indicatif::ProgressBar::new_spinner(),
                "{spinner} {msg} {elapsed}",
            ),
        };
        bar.set_style(indicatif::ProgressStyle::with_template(template).expect("valid template"));
        bar.set_message(message);
        if len.is_none() {
            bar.enable_steady_tick(std::time::Duration::from_millis(200));
        }
        bar
    }
}

/// Reads the registry entries `which` from the matches into resources over the defaults.
fn resources_of(m: &ArgMatches, which: &[Setting]) -> Result<Resources, clap::Error> {
    let mut r = Resources::default();
    for setting in which {
        if let Some(v) = m.get_one::<String>(setting.key) {
            r.set(setting.key, v)
                .map_err(|e| clap::Error::raw(clap::error::ErrorKind::ValueValidation, e))?;
        }
    }
    Ok(r)
}

/// The entries of `which` given on the command line, with their text.
fn given(m: &ArgMatches, which: &[Setting]) -> Vec<(&'static str, String)> {
    which
        .iter()
        .filter(|s| m.value_source(s.key) == Some(clap::parser::ValueSource::CommandLine))
        .filter_map(|s| m.get_one::<String>(s.key).map(|v| (s.key, v.clone())))
        .collect()
}

/// Declares a flag group made of registry resource entries and `-q`.
macro_rules! resource_group {
    ($(#[$doc:meta])* $name:ident, [$($setting:expr),+]) => {
        $(#[$doc])*
        #[derive(Clone, Debug, Default)]
        pub struct $name {
            /// The resources given (defaults for those not in this group).
            #[allow(dead_code)] // `build` reads only `given`
            pub resources: Resources,
            pub quiet: bool,
            /// The keys given on the command line (not defaulted), with their text.
            #[allow(dead_code)] // only `build` needs to tell given from defaulted
            pub given: Vec<(&'static str, String)>,
        }

        impl FromArgMatches for $name {
            fn from_arg_matches(m: &ArgMatches) -> Result<Self, clap::Error> {
                Ok($name {
                    resources: resources_of(m, &[$($setting),+])?,
                    quiet: m.get_flag("quiet"),
                    given: given(m, &[$($setting),+]),
                })
            }
            fn update_from_arg_matches(&mut self, m: &ArgMatches) -> Result<(), clap::Error> {
                *self = $name::from_arg_matches(m)?;
                Ok(())
            }
        }

        impl clap::Args for $name {
            fn augment_args(mut cmd: clap::Command) -> clap::Command {
                for setting in [$(&$setting),+] {
                    cmd = cmd.arg(arg(setting, check_resource));
                }
                cmd.arg(quiet_arg())
            }
            fn augment_args_for_update(cmd: clap::Command) -> clap::Command {
                Self::augment_args(cmd)
            }
        }
    };
}

resource_group!(
    /// `--memory`, `--threads`, `--temp-dir` and `-q/--quiet`: commands whose work spills.
    ResourceFlags,
    [settings::MEMORY, settings::THREADS, settings::TEMP_DIR]
);
resource_group!(
    /// `--threads` and `-q/--quiet`: commands that run in parallel but never spill.
    ThreadFlags,
    [settings::THREADS]
);
resource_group!(
    /// `--threads`, `--temp-dir` and `-q/--quiet`: commands whose stages each have their own
    /// memory budget (`build`, whose recipe sets them), so only given flags override.
    StageFlags,
    [settings::THREADS, settings::TEMP_DIR]
);
resource_group!(
    /// `--memory`, `--temp-dir` and `-q/--quiet`: commands that spill past their budget but
    /// run on one thread (`lm build`).
    SpillFlags,
    [settings::MEMORY, settings::TEMP_DIR]
);

/// `--column`: the score column that retained mass and divergence read (`compare`, `sweep`).
#[derive(clap::Args, Clone, Debug)]
pub struct ColumnFlag {
    /// Score column read as p(target | source) by retained mass and divergence.
    #[arg(long, value_name = "COLUMN", default_value = baler::measure::PROBABILITY_COLUMN)]
    pub column: String,
}
