//! Pruning and packing at every setting of a grid, and measuring each.

use std::path::{Path, PathBuf};
use std::sync::mpsc;

use serde::Serialize;

use super::{CompareOptions, MeasuredTable, TableReport, PROBABILITY_COLUMN};
use crate::error::{Error, Result};
use crate::files::{self, Output};
use crate::format::Compression;
use crate::pack::{self, PackOptions, PackReport};
use crate::prune::{self, Filter, PruneOptions, PruneStats, Pruner, Ranking, Threshold};
use crate::read::Table;
use crate::table::{PhrasePair, TsvReader};

/// One `--vary NAME=V1,V2,...`: a prune or pack option and the values it takes.
#[derive(Clone, Debug, PartialEq)]
pub struct Variation {
    /// The option's name, as its command-line flag without dashes (see [`Variation::NAMES`]).
    pub name: String,
    /// The values, in order.
    pub values: Vec<String>,
}

impl Variation {
    /// The options that can vary: the prune filters, then the pack options.
    pub const NAMES: [&'static str; 11] = [
        "significance",
        "top-k",
        "min",
        "max",
        "relative-entropy",
        "keep-test-phrases",
        "bits",
        "block-sources",
        "compression",
        "zstd-level",
        "dictionary-size",
    ];

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
        if !Variation::NAMES.contains(&name.as_str()) {
            return Err(Error::invalid(
                "--vary",
                format!(
                    "{name:?} is not an option that can vary; one of: {}",
                    Variation::NAMES.join(", ")
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
}

impl Setting {
    /// Applies `name=value` (a name of [`Variation::NAMES`]).
    fn apply(&mut self, name: &str, value: &str) -> Result<()> {
        let flag = format!("--vary {name}");
        let number = |v: &str| -> Result<f64> {
            v.parse::<f64>()
                .ok()
                .filter(|x| x.is_finite())
                .ok_or_else(|| Error::invalid(&flag, format!("{v:?} is not a number")))
        };
        let whole = |v: &str| -> Result<u64> {
            v.parse::<u64>()
                .map_err(|_| Error::invalid(&flag, format!("{v:?} is not a whole number")))
        };
        match name {
            "significance" => self
                .prune
                .filters
                .push(Filter::Significance(Threshold::parse(value)?)),
            "top-k" => self.prune.filters.push(Filter::TopK {
                k: whole(value)? as usize,
                by: Ranking::default(),
            }),
            "min" => self.prune.filters.push(Filter::bound(&flag, value, true)?),
            "max" => self.prune.filters.push(Filter::bound(&flag, value, false)?),
            "relative-entropy" => self
                .prune
                .filters
                .push(Filter::RelativeEntropy(number(value)?)),
            "keep-test-phrases" => self
                .prune
                .filters
                .push(Filter::KeepTestPhrases(PathBuf::from(value))),
            "bits" => {
                self.pack.bits = if value == "f32" {
                    None
                } else {
                    match whole(value)? {
                        b @ 1..=16 => Some(b as u8),
                        _ => {
                            return Err(Error::invalid(&flag, format!("{value} is outside 1..16")))
                        }
                    }
                }
            }
            "block-sources" => {
                self.pack.sources_per_block =
                    u32::try_from(whole(value)?)
                        .ok()
                        .filter(|&n| n > 0)
                        .ok_or_else(|| Error::invalid(&flag, format!("{value} is out of range")))?
            }
            "compression" => {
                self.pack.compression = Compression::from_name(value).ok_or_else(|| {
                    Error::invalid(&flag, format!("{value:?} is not `zstd` or `none`"))
                })?
            }
            "zstd-level" => {
                self.pack.zstd_level = match whole(value)? {
                    l @ 1..=22 => l as i32,
                    _ => return Err(Error::invalid(&flag, format!("{value} is outside 1..22"))),
                }
            }
            "dictionary-size" => self.pack.dictionary_bytes = files::parse_size(value)? as usize,
            _ => {
                return Err(Error::invalid(
                    "--vary",
                    format!("{name:?} is not an option that can vary"),
                ))
            }
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

/// Prunes the table at `input` with `prune` and packs what is kept straight into `output`
/// with `pack`: the pruner's output goes through a channel to the packer on another thread,
/// with no intermediate file. `input` is a packed table or an interchange TSV grouped by
/// source in byte order (as extraction, `baler prune` and `baler dump` write it). The packed
/// file records the filters (`pruned_with`), the input's name (unless `pack.provenance`
/// names an `input` already) and `pack.provenance`.
///
/// # Examples
/// ```
/// use baler::measure::prune_and_pack;
/// use baler::prune::{Filter, PruneOptions, Ranking};
/// let dir = tempfile::tempdir().unwrap();
/// let (input, output) = (dir.path().join("in.tsv"), dir.path().join("out.bale"));
/// std::fs::write(&input, "source\ttarget\tp_t_given_s\n\
///     grapa\tstaple\t0.7\ngrapa\tclamp\t0.3\n").unwrap();
/// let prune = PruneOptions {
///     filters: vec![Filter::TopK { k: 1, by: Ranking::default() }],
///     ..Default::default()
/// };
/// let (stats, report) = prune_and_pack(&input, &output, &prune, &Default::default())?;
/// assert_eq!((stats.pairs_out, report.meta.pairs), (1, 1));
/// assert_eq!(baler::Table::open(&output)?.lookup("grapa")?.len(), 1);
/// # Ok::<(), baler::Error>(())
/// ```
pub fn prune_and_pack(
    input: &Path,
    output: &Path,
    prune: &PruneOptions,
    pack: &PackOptions,
) -> Result<(PruneStats, PackReport)> {
    let name = input.display().to_string();
    let packed = if super::is_packed(input) {
        Some(Table::open(input)?)
    } else {
        None
    };
    type Records<'a> = Box<dyn Iterator<Item = Result<(PhrasePair, u64)>> + 'a>;
    let (header, records): (_, Records<'_>) = match &packed {
        Some(t) => (
            t.header().clone(),
            Box::new(t.pairs_iter().map(|r| r.map(|p| (p, 0)))),
        ),
        None => {
            let mut reader = TsvReader::new(files::open_input(input)?, name.clone())?;
            let header = reader.header().clone();
            let iter = std::iter::from_fn(move || {
                let mut pair = PhrasePair::default();
                match reader.read_into(&mut pair) {
                    Ok(true) => Some(Ok((pair, reader.line()))),
                    Ok(false) => None,
                    Err(e) => Some(Err(e)),
                }
            });
            (header, Box::new(iter))
        }
    };
    let mut pruner = Pruner::new(&header, &name, prune)?;
    let header_out = pruner.header().clone();
    let mut pack = pack.clone();
    let filters = header_out
        .metadata
        .get("pruned_with")
        .unwrap_or("")
        .to_string();
    pack.provenance.insert(0, ("pruned_with".into(), filters));
    if !pack.provenance.iter().any(|(k, _)| k == "input") {
        pack.provenance.insert(0, ("input".into(), name.clone()));
    }
    std::thread::scope(|scope| {
        let (sender, receiver) = mpsc::sync_channel::<Result<PhrasePair>>(4096);
        let header = &header_out;
        let pack = &pack;
        let packer =
            scope.spawn(move || pack::pack_pairs(header, receiver.into_iter(), output, pack));
        let stopped = || Error::Unsupported("the packer stopped early".into());
        let ran = pruner.run(records, |pair| {
            sender.send(Ok(pair.clone())).map_err(|_| stopped())
        });
        if ran.is_err() {
            // make the packer fail, so that it leaves no file behind
            let _ = sender.send(Err(Error::Unsupported("pruning failed".into())));
        }
        drop(sender);
        let packed = packer
            .join()
            .map_err(|_| Error::Unsupported("the packer panicked".into()))?;
        match ran {
            Ok(()) => Ok((pruner.stats().clone(), packed?)),
            Err(e) => Err(e),
        }
    })
}

/// Settings of [`sweep`].
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
    /// Memory budget for packing (0: the packer's default).
    pub memory: u64,
    /// Show a progress bar across settings on stderr (when it is a terminal).
    pub progress: bool,
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

/// The result of [`sweep`].
#[derive(Clone, Debug, Serialize)]
pub struct SweepReport {
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

/// Prunes and packs `input` at every setting of `options.variations`' grid into
/// `out_dir/setting-NN.bale`, measures each against the unpruned input (as [`super::compare`]
/// does), and writes `out_dir/sweep.csv` (one line per setting) and `out_dir/sweep.svg`
/// ([`super::plot_svg`]). A TSV input not grouped by source is sorted once first.
pub fn sweep(input: &Path, options: &SweepOptions) -> Result<SweepReport> {
    if options.variations.is_empty() {
        return Err(Error::invalid("--vary", "give at least one NAME=VALUES"));
    }
    let settings = Setting::grid(&options.variations)?;
    std::fs::create_dir_all(&options.out_dir)
        .map_err(|e| Error::io(&options.out_dir, "creating", e))?;
    let base = MeasuredTable::open(input, PROBABILITY_COLUMN)?;
    let sorted_copy;
    let source: &Path = if base.is_sorted_by_source() {
        input
    } else {
        sorted_copy = tempfile::Builder::new()
            .prefix(".baler-sweep-sorted-")
            .suffix(".tsv.zst")
            .tempfile_in(&options.out_dir)
            .map_err(|e| Error::io(&options.out_dir, "creating a temporary file in", e))?;
        prune::prune_path(input, sorted_copy.path(), &PruneOptions::default())?;
        sorted_copy.path()
    };
    let bar = if options.progress {
        indicatif::ProgressBar::new(settings.len() as u64)
    } else {
        indicatif::ProgressBar::hidden()
    };
    bar.set_style(
        indicatif::ProgressStyle::with_template("{bar:30} {pos}/{len} settings {msg}")
            .expect("a valid template"),
    );
    let baseline = super::Baseline::new(
        &base,
        Some(&options.test),
        options.reference.as_deref(),
        &options.compare,
    )?;
    let mut reports = Vec::with_capacity(settings.len());
    for (i, setting) in settings.iter().enumerate() {
        bar.set_message(setting.label.clone());
        let path = options.out_dir.join(format!("setting-{:02}.bale", i + 1));
        let mut pack = setting.pack.clone();
        if options.memory != 0 {
            pack.memory = options.memory;
        }
        pack.provenance
            .push(("sweep_setting".into(), setting.label.clone()));
        let mut prune = setting.prune.clone();
        prune.memory = options.memory;
        let (stats, _) = prune_and_pack(source, &path, &prune, &pack)?;
        let table = MeasuredTable::open(&path, PROBABILITY_COLUMN)?;
        let figures = baseline.measure(&table)?;
        reports.push(SettingReport {
            label: setting.label.clone(),
            path,
            prune: stats,
            figures,
        });
        bar.inc(1);
    }
    bar.finish_and_clear();
    let csv = options.out_dir.join("sweep.csv");
    let svg = options.out_dir.join("sweep.svg");
    let report = SweepReport {
        base: baseline.report.clone(),
        max_length: baseline.max_length,
        settings: reports,
        csv,
        svg,
    };
    let mut out = Output::create(&report.csv)?;
    std::io::Write::write_all(&mut out, report.to_csv().as_bytes())
        .map_err(|e| Error::io(&report.csv, "writing", e))?;
    out.commit()?;
    let mut out = Output::create(&report.svg)?;
    std::io::Write::write_all(&mut out, super::plot_svg(&report)?.as_bytes())
        .map_err(|e| Error::io(&report.svg, "writing", e))?;
    out.commit()?;
    Ok(report)
}

impl SweepReport {
    /// One CSV line per setting: `setting`, `table`, then the figures of
    /// [`super::Comparison::to_csv`].
    pub fn to_csv(&self) -> String {
        let comparison = super::Comparison {
            column: PROBABILITY_COLUMN.into(),
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
