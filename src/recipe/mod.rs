//! Build recipes: one TOML file that describes a whole build, from the word-aligned corpus to
//! the packed table and a report on a held-out set, and the runner behind `baler build`.
//!
//! # The recipe
//!
//! ```toml
//! [corpus]                      # paths relative to the recipe's folder
//! source = "toolshed.en"
//! target = "toolshed.es"
//! alignment = "toolshed.align"
//! # links_target_first = false
//! # max_sentence_length = 100
//!
//! [extract]                     # all optional
//! max_length = 7
//! unaligned_edges = true
//! discount = "none"             # or "good-turing", "kneser-ney"
//! memory = "2G"
//! # threads = 2                 # default (0): every core
//!
//! [[filter]]                    # filters run in the order written; one kind per [[filter]]
//! significance = "alpha+epsilon"
//! [[filter]]
//! top_k = 20
//! by = "p_t_given_s"            # optional ranking, as `baler prune --by`
//! # other kinds: min = "COLUMN=VALUE", max = "COLUMN=VALUE", relative_entropy = 0.5
//!
//! [prune]                       # optional
//! renormalize = []              # score columns to renormalize after the filters
//!
//! [pack]                        # all optional, defaults as `baler pack`
//! bits = 8                      # or "f32"
//! block_sources = 16
//! group_targets = 16
//! compression = "rans"            # or "none"
//!
//! [output]                      # paths relative to the recipe's folder too
//! table = "../demo-out/toolshed.bale"
//! extracted = "../demo-out/toolshed.tsv"   # optional: keep the unpruned table
//! stats = "../demo-out/prune-stats.json"   # optional: what each filter did
//! report = "../demo-out/report.json"       # optional: the compare report as JSON
//!
//! [held_out]                    # optional; relative to the recipe's folder
//! source = "toolshed.test.en"
//! reference = "toolshed.test.es"        # optional; required by [quality]
//!
//! [quality]                     # optional; decode the held-out set, report BLEU and chrF
//! lm = "../demo-out/toolshed.es.balm"    # target-language model (`baler lm build`)
//! weights = "toolshed.weights"          # optional decoder weights (`baler tune`)
//! ```
//!
//! Every relative path, input or output, is relative to the recipe's folder, so a recipe
//! means the same wherever it is run from. Unknown keys are errors, every value is checked
//! before any work starts (by the same code as the command line: see [`crate::settings`]),
//! and every error names the recipe's file and line. The format is documented for
//! command-line users in `docs/recipe.md`.
//!
//! # Examples
//! ```
//! use baler::recipe::Recipe;
//! let text = "[corpus]\nsource = \"a.en\"\ntarget = \"a.es\"\nalignment = \"a.align\"\n\
//!             [[filter]]\ntop_k = 5\n[output]\ntable = \"out.bale\"\n";
//! let recipe = Recipe::parse(text, "a.recipe.toml".as_ref(), "data".as_ref(), None)?;
//! assert_eq!(recipe.corpus.source, std::path::Path::new("data/a.en"));
//! assert_eq!(recipe.prune.filters.len(), 1);
//! let bad = Recipe::parse("[corpus]\nsource = 3\n", "b.toml".as_ref(), ".".as_ref(), None);
//! assert!(bad.unwrap_err().to_string().starts_with("b.toml:2:"));
//! # Ok::<(), baler::Error>(())
//! ```

use std::path::{Path, PathBuf};

use serde::Deserialize;
use toml::Spanned;

use crate::error::{Error, Result};
use crate::extract::corpus::{CorpusOptions, CorpusPaths};
use crate::extract::phrases::PhraseLimits;
use crate::extract::score::Discount;
use crate::extract::shard::ShardOptions;
use crate::extract::ExtractOptions;
use crate::files;
use crate::prune::{Filter, PruneOptions, Ranking, Threshold};
use crate::settings::{self, PackSettings, Resources};

/// A held-out set to report on.
#[derive(Clone, Debug, PartialEq)]
pub struct HeldOut {
    /// Source text, one tokenized sentence per line.
    pub source: PathBuf,
    /// Reference translation, line by line.
    pub reference: Option<PathBuf>,
    /// Longest test span looked up (`None`: the unpruned table's longest source phrase).
    pub max_length: Option<usize>,
}

/// Translation quality to report: the held-out set is decoded with the unpruned and the
/// packed table and scored against its reference.
#[derive(Clone, Debug, PartialEq)]
pub struct QualityRecipe {
    /// The target-language model.
    pub lm: PathBuf,
    /// A decoder weights file (defaults otherwise).
    pub weights: Option<PathBuf>,
}

/// A parsed, resolved recipe: the options of every stage, and where things go.
#[derive(Clone, Debug)]
pub struct Recipe {
    /// The recipe file.
    pub file: PathBuf,
    /// Its text, recorded in the packed table's provenance.
    pub text: String,
    /// The word-aligned corpus.
    pub corpus: CorpusPaths,
    /// Extraction options.
    pub extract: ExtractOptions,
    /// The filters in order, and the other prune options.
    pub prune: PruneOptions,
    /// Packing settings given (provenance is added by [`crate::pipeline::build`]).
    pub pack: PackSettings,
    /// The memory budget of packing.
    pub pack_resources: Resources,
    /// The packed table to write.
    pub table: PathBuf,
    /// Where to keep the unpruned extracted table (a temporary file when `None`).
    pub extracted: Option<PathBuf>,
    /// Where to write the prune statistics as JSON.
    pub stats: Option<PathBuf>,
    /// Where to write the compare report as JSON.
    pub report: Option<PathBuf>,
    /// The held-out set.
    pub held_out: Option<HeldOut>,
    /// Translation quality on the held-out set (needs its reference).
    pub quality: Option<QualityRecipe>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct Spec {
    corpus: CorpusSpec,
    #[serde(default)]
    extract: ExtractSpec,
    #[serde(default, rename = "filter")]
    filters: Vec<Spanned<FilterSpec>>,
    #[serde(default)]
    prune: PruneSpec,
    pack: Option<Spanned<toml::Table>>,
    output: OutputSpec,
    held_out: Option<HeldOutSpec>,
    quality: Option<Spanned<QualitySpec>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct QualitySpec {
    lm: Spanned<String>,
    weights: Option<Spanned<String>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct CorpusSpec {
    source: String,
    target: String,
    alignment: String,
    #[serde(default)]
    links_target_first: bool,
    max_sentence_length: Option<Spanned<usize>>,
}

#[derive(Deserialize, Default)]
#[serde(deny_unknown_fields)]
struct ExtractSpec {
    max_length: Option<Spanned<usize>>,
    unaligned_edges: Option<bool>,
    discount: Option<Spanned<String>>,
    memory: Option<Spanned<String>>,
    threads: Option<Spanned<usize>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct FilterSpec {
    significance: Option<toml::Value>,
    top_k: Option<usize>,
    by: Option<String>,
    min: Option<String>,
    max: Option<String>,
    relative_entropy: Option<toml::Value>,
}

#[derive(Deserialize, Default)]
#[serde(deny_unknown_fields)]
struct PruneSpec {
    #[serde(default)]
    renormalize: Vec<String>,
    #[serde(default)]
    annotate: bool,
}

/// The span of the line that sets `key` in the table that starts at `section` (the table's
/// own span when the line cannot be found, as for a key in dotted or inline form).
fn key_span(text: &str, section: std::ops::Range<usize>, key: &str) -> std::ops::Range<usize> {
    let from = section.start.min(text.len());
    let mut at = from;
    for (i, line) in text[from..].split_inclusive('\n').enumerate() {
        let trimmed = line.trim_start();
        if i > 0 && trimmed.starts_with('[') {
            break; // the next table
        }
        if let Some(rest) = trimmed.strip_prefix(key) {
            if rest.trim_start().starts_with('=') {
                return at..at + line.len();
            }
        }
        at += line.len();
    }
    section
}

/// A TOML scalar as the text a command-line flag would have been given.
fn as_flag_text(value: &toml::Value) -> String {
    match value {
        toml::Value::String(s) => s.clone(),
        other => other.to_string(),
    }
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct OutputSpec {
    table: String,
    extracted: Option<String>,
    stats: Option<String>,
    report: Option<String>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct HeldOutSpec {
    source: String,
    reference: Option<String>,
    max_length: Option<Spanned<usize>>,
}

/// 1-based line of byte `offset` in `text`.
fn line_of(text: &str, offset: usize) -> u64 {
    text.as_bytes()[..offset.min(text.len())]
        .iter()
        .filter(|&&b| b == b'\n')
        .count() as u64
        + 1
}

impl Recipe {
    /// Reads and parses the recipe at `path`: relative paths, inputs and outputs alike,
    /// resolve against the recipe's folder, so a recipe means the same wherever it is run from.
    pub fn load(path: &Path) -> Result<Recipe> {
        let text = files::read_text(path)?;
        let dir = path.parent().unwrap_or(Path::new(""));
        Recipe::parse(&text, path, dir, Some(dir))
    }

    /// Parses recipe `text` (from `file`, named in errors); relative input paths resolve
    /// against `input_dir`, relative outputs against `output_dir` (left relative when `None`).
    ///
    /// # Errors
    /// TOML syntax, unknown keys, wrong types and bad values, each as
    /// [`Error::input`] with the recipe's file and line.
    pub fn parse(
        text: &str,
        file: &Path,
        input_dir: &Path,
        output_dir: Option<&Path>,
    ) -> Result<Recipe> {
        let name = file.display().to_string();
        let spec: Spec = toml::from_str(text).map_err(|e| {
            let line = e.span().map_or(0, |s| line_of(text, s.start));
            Error::input(&name, line, format!("bad recipe: {}", e.message()))
        })?;
        let at = |span: std::ops::Range<usize>, e: Error| -> Error {
            let reason = match e {
                Error::InvalidArgument { option, reason } => {
                    format!("{}: {reason}", option.trim_start_matches("--"))
                }
                other => other.to_string(),
            };
            Error::input(&name, line_of(text, span.start), reason)
        };
        let input = |p: &str| input_dir.join(p);
        let output = |p: &str| match output_dir {
            Some(d) => d.join(p),
            None => PathBuf::from(p),
        };

        // corpus and extraction
        let c = &spec.corpus;
        let mut corpus_options = CorpusOptions {
            links_target_first: c.links_target_first,
            ..Default::default()
        };
        if let Some(n) = &c.max_sentence_length {
            corpus_options.max_sentence_length = *n.get_ref();
        }
        corpus_options
            .validate()
            .map_err(|e| at(c.max_sentence_length.as_ref().map_or(0..0, |s| s.span()), e))?;
        let x = &spec.extract;
        let mut limits = PhraseLimits::default();
        if let Some(n) = &x.max_length {
            if !(1..=255).contains(n.get_ref()) {
                return Err(at(
                    n.span(),
                    Error::invalid(
                        "max_length",
                        format!("{} is not between 1 and 255", n.get_ref()),
                    ),
                ));
            }
            limits.max_length = *n.get_ref();
        }
        if let Some(u) = x.unaligned_edges {
            limits.unaligned_edges = u;
        }
        let discount = match &x.discount {
            None => Discount::None,
            Some(d) => match d.get_ref().as_str() {
                "none" => Discount::None,
                "good-turing" => Discount::GoodTuring,
                "kneser-ney" => Discount::KneserNey,
                other => {
                    return Err(at(
                        d.span(),
                        Error::invalid(
                            "discount",
                            format!("{other:?} is not none, good-turing or kneser-ney"),
                        ),
                    ))
                }
            },
        };
        let mut shard = ShardOptions {
            limits,
            corpus: corpus_options,
            ..Default::default()
        };
        // The one registry's rules: its default budget, threads 0 = every core.
        let mut extract_resources = Resources::default();
        if let Some(m) = &x.memory {
            extract_resources
                .set("memory", m.get_ref())
                .map_err(|e| at(m.span(), e))?;
        }
        if let Some(t) = &x.threads {
            extract_resources
                .set("threads", &t.get_ref().to_string())
                .map_err(|e| at(t.span(), e))?;
        }
        shard.memory = extract_resources.memory;
        shard.threads = extract_resources.thread_count();

        // filters
        let mut filters = Vec::new();
        for f in &spec.filters {
            let span = f.span();
            let g = f.get_ref();
            let kinds = [
                g.significance.is_some(),
                g.top_k.is_some(),
                g.min.is_some(),
                g.max.is_some(),
                g.relative_entropy.is_some(),
            ];
            if kinds.iter().filter(|&&k| k).count() != 1 {
                return Err(Error::input(
                    &name,
                    line_of(text, span.start),
                    "each [[filter]] needs exactly one of significance, top_k, min, max, \
                     relative_entropy",
                ));
            }
            if g.by.is_some() && g.top_k.is_none() {
                return Err(Error::input(
                    &name,
                    line_of(text, span.start),
                    "`by` only applies to a top_k filter",
                ));
            }
            let filter = if let Some(s) = &g.significance {
                Threshold::parse(&as_flag_text(s)).map(Filter::Significance)
            } else if let Some(k) = g.top_k {
                g.by.as_deref()
                    .map_or(Ok(Ranking::default()), Ranking::parse)
                    .map(|by| Filter::TopK { k, by })
            } else if let Some(m) = &g.min {
                Filter::bound("min", m, true)
            } else if let Some(m) = &g.max {
                Filter::bound("max", m, false)
            } else {
                let text = as_flag_text(g.relative_entropy.as_ref().expect("one kind"));
                text.trim()
                    .parse::<f64>()
                    .ok()
                    .filter(|v| !v.is_nan())
                    .map(Filter::RelativeEntropy)
                    .ok_or_else(|| {
                        Error::invalid("relative_entropy", format!("{text:?} is not a number"))
                    })
            };
            filters.push(filter.map_err(|e| at(span.clone(), e))?);
        }
        let prune = PruneOptions {
            filters,
            annotate: spec.prune.annotate,
            renormalize: spec.prune.renormalize.clone(),
            ..Default::default()
        };

        // packing: every key goes through the settings registry
        let mut pack = PackSettings::default();
        let mut pack_resources = Resources::default();
        let (pack_span, pack_table) = match &spec.pack {
            Some(t) => (t.span(), t.get_ref().clone()),
            None => (0..0, toml::Table::new()),
        };
        for (key, value) in &pack_table {
            let span = key_span(text, pack_span.clone(), key);
            let given = as_flag_text(value);
            let set = if key == "memory" {
                pack_resources.set(key, &given)
            } else if settings::find(key).is_some_and(|s| settings::PACK.contains(s)) {
                pack.set(key, &given)
            } else {
                Err(Error::invalid(
                    key,
                    format!(
                        "unknown key in [pack]; one of: {}, memory",
                        settings::PACK.map(|s| s.key).join(", ")
                    ),
                ))
            };
            set.map_err(|e| at(span, e))?;
        }

        let o = &spec.output;
        let held_out = spec.held_out.as_ref().map(|h| HeldOut {
            source: input(&h.source),
            reference: h.reference.as_deref().map(input),
            max_length: h.max_length.as_ref().map(|n| *n.get_ref()),
        });
        if let Some(n) = spec.held_out.as_ref().and_then(|h| h.max_length.as_ref()) {
            if *n.get_ref() == 0 {
                return Err(at(
                    n.span(),
                    Error::invalid("max_length", "must be at least 1"),
                ));
            }
        }
        let quality = match &spec.quality {
            None => None,
            Some(q) => {
                let has_reference = held_out.as_ref().is_some_and(|h| h.reference.is_some());
                if !has_reference {
                    return Err(at(
                        q.span(),
                        Error::invalid(
                            "quality",
                            "needs [held_out] with a reference to score translations against",
                        ),
                    ));
                }
                let q = q.get_ref();
                let lm = input(q.lm.get_ref());
                // The model is opened (and its checksum verified) now, before any work.
                crate::lm::LanguageModel::open(&lm).map_err(|e| at(q.lm.span(), e))?;
                let weights = match &q.weights {
                    Some(w) => {
                        let path = input(w.get_ref());
                        crate::decode::Weights::read(
                            &path,
                            crate::decode::Weights {
                                values: Default::default(),
                            },
                        )
                        .map_err(|e| at(w.span(), e))?;
                        Some(path)
                    }
                    None => None,
                };
                Some(QualityRecipe { lm, weights })
            }
        };
        Ok(Recipe {
            file: file.to_path_buf(),
            text: text.to_string(),
            corpus: CorpusPaths {
                source: input(&c.source),
                target: input(&c.target),
                alignment: Some(input(&c.alignment)),
            },
            extract: ExtractOptions { shard, discount },
            prune,
            pack,
            pack_resources,
            table: output(&o.table),
            extracted: o.extracted.as_deref().map(output),
            stats: o.stats.as_deref().map(output),
            report: o.report.as_deref().map(output),
            held_out,
            quality,
        })
    }
}
