//! Command-line flags derived from the settings registry (`baler::settings`): one clap
//! argument per registry entry, validated by the same function as recipes and `--vary`.

use baler::settings::{self, PackSettings, Resources, Setting};
use clap::{Arg, ArgMatches, FromArgMatches};

/// The clap argument of a registry entry; its value is validated by `check` while parsing.
fn arg(setting: &'static Setting, check: fn(&str, &str) -> baler::Result<()>) -> Arg {
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

/// `--memory`, `--threads`, `--temp-dir` and `-q/--quiet`.
#[derive(Clone, Debug, Default)]
pub struct ResourceFlags {
    pub resources: Resources,
    pub quiet: bool,
}

impl FromArgMatches for ResourceFlags {
    fn from_arg_matches(m: &ArgMatches) -> Result<Self, clap::Error> {
        let mut r = Resources::default();
        for setting in &settings::RESOURCES {
            if let Some(v) = m.get_one::<String>(setting.key) {
                r.set(setting.key, v)
                    .map_err(|e| clap::Error::raw(clap::error::ErrorKind::ValueValidation, e))?;
            }
        }
        Ok(ResourceFlags {
            resources: r,
            quiet: m.get_flag("quiet"),
        })
    }
    fn update_from_arg_matches(&mut self, m: &ArgMatches) -> Result<(), clap::Error> {
        *self = ResourceFlags::from_arg_matches(m)?;
        Ok(())
    }
}

impl clap::Args for ResourceFlags {
    fn augment_args(mut cmd: clap::Command) -> clap::Command {
        for setting in &settings::RESOURCES {
            cmd = cmd.arg(arg(setting, check_resource));
        }
        cmd.arg(
            Arg::new("quiet")
                .short('q')
                .long("quiet")
                .action(clap::ArgAction::SetTrue)
                .help("No progress bars and no summary on stderr"),
        )
    }
    fn augment_args_for_update(cmd: clap::Command) -> clap::Command {
        Self::augment_args(cmd)
    }
}

/// `--column`: the score column that retained mass and divergence read (`compare`, `sweep`).
#[derive(clap::Args, Clone, Debug)]
pub struct ColumnFlag {
    /// Score column read as p(target | source) by retained mass and divergence.
    #[arg(long, value_name = "NAME", default_value = baler::measure::PROBABILITY_COLUMN)]
    pub column: String,
}
