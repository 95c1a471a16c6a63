//! Every packing and resource option, defined once ("flags as data").
//!
//! Each [`Setting`] names an option once — its key, value placeholder, help, default and the
//! one function that validates it — and everything else is derived from that entry: the
//! command-line flag (`key` with dashes: `block_sources` is `--block-sources`), the recipe key (the
//! key itself, in `[pack]`), the `sweep --vary` name (either spelling) and the library's check
//! ([`PackSettings::set`]). A recipe with `block_sources = 0` is therefore refused while the recipe
//! is read, with the same reason as `--block-sources 0` on the command line.
//!
//! The prune filters are registry entries too ([`filters::FILTERS`], parsed by
//! [`filters::filter`]): `prune`'s flags, a recipe's `[[filter]]` keys and the `--vary` names.
//!
//! # Adding a setting
//!
//! 1. Add a `Setting` constant below and list it in [`PACK`] (or [`RESOURCES`]).
//! 2. Add its field to [`PackSettings`] (or [`Resources`]) and one arm to `set`, which parses
//!    and validates the text; `apply` copies it into the options the library takes.
//! 3. That is all: `pack`, `prune`, `sweep` and `build` get the flag, the recipe key and the
//!    `--vary` name from the registry.
//!
//! # Examples
//! ```
//! use baler::settings::PackSettings;
//! let mut settings = PackSettings::default();
//! settings.set("bits", "6")?;
//! settings.set("group-targets", "32")?;
//! assert!(settings.set("block_sources", "0").unwrap_err().to_string().contains("block_sources"));
//! let mut options = baler::pack::PackOptions::default();
//! settings.apply(&mut options);
//! assert_eq!((options.bits, options.targets_per_group), (Some(6), 32));
//! # Ok::<(), baler::Error>(())
//! ```

pub mod filters;

use std::path::PathBuf;

use crate::error::{Error, Result};
use crate::files::parse_size;
use crate::format::{Compression, Layout, Meta};
use crate::pack::{self, PackOptions};

/// One option: its name and the text a user sees.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Setting {
    /// Recipe key and sweep name, in snake case; the flag is this with dashes.
    pub key: &'static str,
    /// Placeholder of the value in help texts.
    pub value_name: &'static str,
    /// One-line help.
    pub help: &'static str,
    /// The default, as text (`None`: no default, or inherited from the input).
    pub default: Option<&'static str>,
}

impl Setting {
    /// The command-line flag without its dashes (`block-sources`).
    pub fn flag(&self) -> String {
        self.key.replace('_', "-")
    }
}

/// `--bits`.
pub const BITS: Setting = Setting {
    key: "bits",
    value_name: "BITS",
    help: "Bits per score code (1..16), or f32 to store scores unquantized [default: 8, or the \
           input table's]",
    default: None,
};
/// `--block-sources`.
pub const BLOCK_SOURCES: Setting = Setting {
    key: "block_sources",
    value_name: "N",
    help: "Source phrases per option block: smaller is faster to look up, larger packs tighter \
           [default: 16, or the input table's]",
    default: None,
};
/// `--group-targets`.
pub const GROUP_TARGETS: Setting = Setting {
    key: "group_targets",
    value_name: "N",
    help: "Target phrases per target group: smaller is faster to look up, larger packs tighter \
           [default: 16, or the input table's]",
    default: None,
};
/// `--compression`.
pub const COMPRESSION: Setting = Setting {
    key: "compression",
    value_name: "KIND",
    help: "Coding of blocks: rans (compact) or none (plain varints, faster cold reads) \
           [default: rans, or the input table's]",
    default: None,
};
/// `--layout`.
pub const LAYOUT: Setting = Setting {
    key: "layout",
    value_name: "KIND",
    help: "Layout of the packed file: compact (smallest) or direct (read in place, fastest \
           lookups and spans, about 5x larger; block_sources, group_targets and compression \
           apply to compact only) [default: compact, or the input table's]",
    default: None,
};
/// `--memory`.
pub const MEMORY: Setting = Setting {
    key: "memory",
    value_name: "SIZE",
    help: "Memory budget, e.g. 512M or 4G; past it, sorted runs spill to disk",
    default: Some("1G"),
};
/// `--threads`.
pub const THREADS: Setting = Setting {
    key: "threads",
    value_name: "N",
    help: "Worker threads (0: every core)",
    default: Some("0"),
};
/// `--temp-dir`.
pub const TEMP_DIR: Setting = Setting {
    key: "temp_dir",
    value_name: "DIR",
    help: "Directory for temporary files (default: the system's)",
    default: None,
};

/// The settings of a packed table, in the order `--help` lists them.
pub const PACK: [Setting; 5] = [BITS, BLOCK_SOURCES, GROUP_TARGETS, COMPRESSION, LAYOUT];
/// The resources every heavy command takes.
pub const RESOURCES: [Setting; 3] = [MEMORY, THREADS, TEMP_DIR];

/// The registry entry named `name` (snake or kebab case), if any.
pub fn find(name: &str) -> Option<&'static Setting> {
    let key = name.trim().trim_start_matches("--").replace('-', "_");
    PACK.iter().chain(RESOURCES.iter()).find(|s| s.key == key)
}

/// Packing settings given by the user; `None` keeps the input table's (or the default).
#[derive(Clone, Debug, Default, PartialEq)]
pub struct PackSettings {
    /// Bits per score code; `Some(None)` is f32.
    pub bits: Option<Option<u8>>,
    /// Sources per option block.
    pub sources_per_block: Option<u32>,
    /// Target phrases per target group.
    pub targets_per_group: Option<u32>,
    /// Coding of blocks.
    pub compression: Option<Compression>,
    /// Layout of the file.
    pub layout: Option<Layout>,
}

impl PackSettings {
    /// Parses and validates `text` for the setting `key` (snake or kebab case) and stores it.
    /// Errors name the setting.
    pub fn set(&mut self, key: &str, text: &str) -> Result<()> {
        let setting = find(key).filter(|s| PACK.iter().any(|p| p.key == s.key));
        let Some(setting) = setting else {
            return Err(Error::invalid(key, "is not a packing setting"));
        };
        let text = text.trim();
        let bad = |reason: String| Error::invalid(setting.key, reason);
        match setting.key {
            "bits" => {
                self.bits = Some(if text == "f32" {
                    None
                } else {
                    match text.parse::<u8>() {
                        Ok(b) if (1..=16).contains(&b) => Some(b),
                        _ => {
                            return Err(bad(format!(
                                "{text:?} is neither a bit count in 1..16 nor f32"
                            )))
                        }
                    }
                })
            }
            "block_sources" => {
                self.sources_per_block = Some(
                    text.parse::<u32>()
                        .ok()
                        .filter(|&n| n > 0)
                        .ok_or_else(|| bad(format!("{text:?} is not a count of at least 1")))?,
                )
            }
            "group_targets" => {
                self.targets_per_group = Some(
                    text.parse::<u32>()
                        .ok()
                        .filter(|&n| (1..=1 << 20).contains(&n))
                        .ok_or_else(|| bad(format!("{text:?} is not a count in 1..1048576")))?,
                )
            }
            "compression" => {
                self.compression = Some(
                    Compression::from_name(text)
                        .ok_or_else(|| bad(format!("{text:?} is not rans or none")))?,
                )
            }
            "layout" => {
                self.layout = Some(
                    Layout::from_name(text)
                        .ok_or_else(|| bad(format!("{text:?} is not compact or direct")))?,
                )
            }
            _ => unreachable!("every PACK setting has an arm"),
        }
        Ok(())
    }

    /// The settings a packed table was written with, from its provenance (`bits`,
    /// `sources_per_block`, `targets_per_group`, `compression`) and its layout.
    pub fn of_table(meta: &Meta) -> PackSettings {
        let mut s = PackSettings::default();
        for (key, value) in &meta.provenance {
            let key = match key.as_str() {
                "sources_per_block" => "block_sources",
                "targets_per_group" => "group_targets",
                k @ ("bits" | "compression") => k,
                _ => continue,
            };
            let _ = s.set(key, value); // a value this version cannot use keeps the default
        }
        s.layout = Layout::from_name(&meta.layout);
        s
    }

    /// These settings where given, `fallback`'s otherwise.
    pub fn or(&self, fallback: &PackSettings) -> PackSettings {
        PackSettings {
            bits: self.bits.or(fallback.bits),
            sources_per_block: self.sources_per_block.or(fallback.sources_per_block),
            targets_per_group: self.targets_per_group.or(fallback.targets_per_group),
            compression: self.compression.or(fallback.compression),
            layout: self.layout.or(fallback.layout),
        }
    }

    /// Copies the settings given into `options`.
    pub fn apply(&self, options: &mut PackOptions) {
        if let Some(b) = self.bits {
            options.bits = b;
        }
        if let Some(n) = self.sources_per_block {
            options.sources_per_block = n;
        }
        if let Some(n) = self.targets_per_group {
            options.targets_per_group = n;
        }
        if let Some(c) = self.compression {
            options.compression = c;
        }
        if let Some(l) = self.layout {
            options.layout = l;
        }
    }
}

/// Memory, threads and the temporary directory, shared by every command that can use them.
#[derive(Clone, Debug, PartialEq)]
pub struct Resources {
    /// Memory budget in bytes.
    pub memory: u64,
    /// Worker threads; 0 means every core.
    pub threads: usize,
    /// Parent of temporary directories (the system's when `None`).
    pub temp_dir: Option<PathBuf>,
}

impl Default for Resources {
    fn default() -> Resources {
        Resources {
            memory: DEFAULT_MEMORY,
            threads: 0,
            temp_dir: None,
        }
    }
}

/// The one default memory budget (`--memory`), 1 GiB.
pub const DEFAULT_MEMORY: u64 = 1 << 30;

impl Resources {
    /// Parses and validates `text` for `memory`, `threads` or `temp_dir`.
    pub fn set(&mut self, key: &str, text: &str) -> Result<()> {
        let key = key.trim().trim_start_matches("--").replace('-', "_");
        match key.as_str() {
            "memory" => {
                self.memory = parse_size(text).map_err(|_| {
                    Error::invalid("memory", format!("{text:?} is not a size like 512M or 4G"))
                })?;
                if self.memory == 0 {
                    return Err(Error::invalid("memory", "must be more than 0"));
                }
            }
            "threads" => {
                self.threads = text.trim().parse().map_err(|_| {
                    Error::invalid("threads", format!("{text:?} is not a whole number"))
                })?
            }
            "temp_dir" => self.temp_dir = Some(PathBuf::from(text)),
            other => return Err(Error::invalid(other, "is not a resource setting")),
        }
        Ok(())
    }

    /// The number of threads to start: `threads`, or every core for 0.
    pub fn thread_count(&self) -> usize {
        match self.threads {
            0 => std::thread::available_parallelism().map_or(1, |n| n.get()),
            n => n,
        }
    }

    /// Pack options with these resources and `settings` over the defaults.
    pub fn pack_options(&self, settings: &PackSettings) -> PackOptions {
        let mut options = PackOptions {
            memory: self.memory,
            threads: self.threads,
            temp_dir: self.temp_dir.clone(),
            ..Default::default()
        };
        settings.apply(&mut options);
        options
    }
}

/// The packing defaults as [`PackSettings`], for reports.
pub fn pack_defaults() -> PackSettings {
    PackSettings {
        bits: Some(Some(pack::DEFAULT_BITS)),
        sources_per_block: Some(pack::DEFAULT_SOURCES_PER_BLOCK),
        targets_per_group: Some(pack::DEFAULT_TARGETS_PER_GROUP),
        compression: Some(Compression::Rans),
        layout: Some(Layout::Compact),
    }
}
