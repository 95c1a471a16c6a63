//! The grid of a sweep and its report; [`crate::pipeline::sweep`] runs it.

use std::path::PathBuf;

use serde::Serialize;

use super::{CompareOptions, TableReport};
use crate::error::{Error, Result};
use crate::pack::PackOptions;
use crate::prune::{PruneOptions, PruneStats};
use crate::settings::{self, PackSettings};

/// One `--vary NAME=V1,V2,...`: a prune or pack option and the values it takes.
#[derive(Clone, Debug, PartialEq)]
pub struct Variation {
    /// The option's name, as its command-line flag without dashes (see [`Variation::names`]).
    pub name: String,
    /// The values, in order.
    pub values: Vec<String>,
}

impl Variation {
    /// Every name that can vary: the prune filters ([`settings::filters::FILTERS`]), then the
    /// packing settings ([`settings::PACK`]), spelled as their flags.
    pub fn names() -> Vec<String> {
        settings::filters::FILTERS
            .iter()
            .chain(settings::PACK.iter())
            .map(|s| s.flag())
            .collect()
    }

    /// Parses `NAME=V1,V2,...`; each value is checked at once.
    ///
    /// # Examples
    /// ```
    /// use baler::measure::Variation;
    /// let v = Variation::parse("top-k=5,10,20")?;
    /// assert_eq!((v.name.as_str(), v.values.len()), ("top-k", 3));
    /// assert!(Variation::parse("top-k=5,many").is_err());
    /// assert!(Variation::parse("colour=red").is_err());
    /// # Ok::<(), baler::Error>(())
    /// ```
    pub fn parse(text: &str) -> Result<Variation> {
        let (name, values) = text.split_once('=').ok_or_else(|| {
            Error::invalid("--vary", format!("{text:?} is not NAME=VALUE,VALUE,..."))
        })?;
        let name = name.trim().replace('_', "-");
        if !Variation::names().contains(&name) {
            return Err(Error::invalid(
                "--vary",
                format!(
                    "{name:?} is not an option that can vary; one of: {}",
                    Variation::names().join(", ")
                ),
            ));
        }
        let values: Vec<String> = values
            .split(',')
            .map(|v| v.trim().to_string())
            .filter(|v| !v.is_empty())
            .collect();
        if values.is_empty() {
            return Err(Error::invalid("--vary", format!("{name}: no values given")));
        }
        let v = Variation { name, values };
        let mut check = Setting::default();
        for value in &v.values {
            check.apply(&v.name, value)?;
        }
        Ok(v)
    }
}

/// One point of a sweep: prune filters in the order of the variations, and pack options.
#[derive(Clone, Debug, Default)]
pub struct Setting {
    /// `name=value` of every variation, joined by spaces.
    pub label: String,
    /// The prune options (filters in the order the variations were given).
    pub prune: PruneOptions,
    /// The pack options.
    pub pack: PackOptions,
    /// The packing settings this setting varies (the rest are the defaults).
    pub pack_settings: PackSettings,
}

impl Setting {
    /// Applies `name=value` (a name of [`Variation::names`]).
    fn apply(&mut self, name: &str, value: &str) -> Result<()> {
        // errors name the variation as it was given
        let named = |e: Error| match e {
            Error::InvalidArgument { reason, .. } => {
                Error::invalid(format!("--vary {name}"), reason)
            }
            other => other,
        };
        if settings::filters::find(name).is_some() {
            let filter = settings::filters::filter(name, value).map_err(named)?;
            self.prune.filters.push(filter);
        } else if settings::find(name).is_some_and(|p| settings::PACK.contains(p)) {
            self.pack_settings.set(name, value).map_err(named)?;
            self.pack_settings.apply(&mut self.pack);
        } else {
            return Err(Error::invalid(
                "--vary",
                format!("{name:?} is not an option that can vary"),
            ));
        }
        if !self.label.is_empty() {
            self.label.push(' ');
        }
        self.label.push_str(&format!("{name}={value}"));
        Ok(())
    }

    /// Every combination of the variations' values, the first variation outermost.
    ///
    /// # Examples
    /// ```
    /// use baler::measure::{Setting, Variation};
    /// let grid = Setting::grid(&[
    ///     Variation::parse("significance=alpha-epsilon,alpha+epsilon")?,
    ///     Variation::parse("bits=4,8,f32")?,
    /// ])?;
    /// assert_eq!(grid.len(), 6);
    /// assert_eq!(grid[1].label, "significance=alpha-epsilon bits=8");
    /// assert_eq!(grid[5].pack.bits, None);
    /// # Ok::<(), baler::Error>(())
    /// ```
    pub fn grid(variations: &[Variation]) -> Result<Vec<Setting>> {
        let mut settings = vec![Setting::default()];
        for v in variations {
            let mut next = Vec::with_capacity(settings.len() * v.values.len());
            for s in &settings {
                for value in &v.values {
                    let mut s = s.clone();
                    s.apply(&v.name, value)?;
                    next.push(s);
                }
            }
            settings = next;
        }
        Ok(settings)
    }
}

/// Settings of [`crate::pipeline::sweep`].
#[derive(Clone, Debug, Default)]
pub struct SweepOptions {
    /// The variations; their grid is swept ([`Setting::grid`]).
    pub variations: Vec<Variation>,
    /// The held-out source text, tokenized, one sentence per entry.
    pub test: Vec<Vec<String>>,
    /// Its reference translation, when there is one.
    pub reference: Option<Vec<Vec<String>>>,
    /// Directory for the packed tables, `sweep.csv` and `sweep.svg` (created if missing).
    pub out_dir: PathBuf,
    /// How the figures are measured.
    pub compare: CompareOptions,
    /// Memory, threads and temporary directory of the sorting, pruning and packing.
    pub resources: crate::settings::Resources,
    /// Show a progress bar across settings on stderr (when it is a terminal).
    pub progress: bool,
    /// The score column that retained mass and divergence read (`None`:
    /// [`super::PROBABILITY_COLUMN`]).
    pub column: Option<String>,
    /// Decode the test set with every table and add BLEU and chrF, when asked for.
    pub quality: Option<SweepQuality>,
    /// What `sweep.svg` plots against size (empty: [`super::default_figures`]).
    pub plot: Vec<super::Figure>,
}

/// What a sweep needs to measure translation quality: the decoder's language model and
/// weights, and the test set as files (see [`crate::quality::measure_tables`]).
#[derive(Clone, Debug)]
pub struct SweepQuality {
    /// The target-language model (`baler lm build`).
    pub lm: PathBuf,
    /// A decoder weights file; the defaults otherwise.
    pub weights: Option<PathBuf>,
    /// The test source text.
    pub test: PathBuf,
    /// Its reference translation.
    pub reference: PathBuf,
}

/// One swept setting: its label, the packed file and its figures.
#[derive(Clone, Debug, Serialize)]
pub struct SettingReport {
    /// The setting's label (`name=value ...`).
    pub label: String,
    /// The packed table written for it.
    pub path: PathBuf,
    /// What the filters did.
    pub prune: PruneStats,
    /// Its figures against the unpruned input.
    pub figures: TableReport,
}

/// The result of [`crate::pipeline::sweep`].
#[derive(Clone, Debug, Serialize)]
pub struct SweepReport {
    /// The score column that retained mass and divergence read.
    pub column: String,
    /// The input's own figures.
    pub base: TableReport,
    /// Longest test span looked up.
    pub max_length: usize,
    /// One per setting, in grid order.
    pub settings: Vec<SettingReport>,
    /// The CSV written.
    pub csv: PathBuf,
    /// The plot written.
    pub svg: PathBuf,
}

impl SweepReport {
    /// One CSV line per setting: `setting`, `table`, then the figures of
    /// [`super::Comparison::to_csv`].
    pub fn to_csv(&self) -> String {
        let comparison = super::Comparison {
            column: self.column.clone(),
            max_length: self.max_length,
            tables: self.settings.iter().map(|s| s.figures.clone()).collect(),
        };
        let body = comparison.to_csv();
        let mut out = String::new();
        for (i, line) in body.split_terminator("\r\n").enumerate() {
            let label = if i == 0 {
                "setting".to_string()
            } else {
                super::csv_field(&self.settings[i - 1].label)
            };
            out.push_str(&label);
            out.push(',');
            out.push_str(line);
            out.push_str("\r\n");
        }
        out
    }
}
