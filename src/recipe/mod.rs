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
//! # threads = 2                 # default (and 0): every core
//!
//! [[filter]]                    # filters run in the order written; one kind per [[filter]]
//! significance = "alpha+epsilon"
//! [[filter]]
//! top_k = 20
//! by = "p_t_given_s"            # optional ranking, as `baler prune --by`
//! # other kinds: min = "COLUMN=VALUE", max = "COLUMN=VALUE", relative_entropy = 0.5,
//! # keep_test_phrases = "test.en" (the filters of `baler prune`, from the settings registry)
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
use crate::prune::{Filter, PruneOptions, Ranking};
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

/// One `[[filter]]`: exactly one key of the registry's filters
/// ([`settings::filters::FILTERS`]), plus `by` for `top_k`.
#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct FilterSpec {
    significance: Option<toml::Value>,
    top_k: Option<usize>,
    by: Option<String>,
    min: Option<String>,
    max: Option<String>,
    relative_entropy: Option<toml::Value>,
    keep_test_phrases: Option<String>,
}

impl FilterSpec {
    /// The filters given, each as its registry key and the text a flag would have been given.
    fn given(&self) -> Vec<(&'static str, String)> {
        use settings::filters::{
            KEEP_TEST_PHRASES, MAX, MIN, RELATIVE_ENTROPY, SIGNIFICANCE, TOP_K,
        };
        [
            (
                SIGNIFICANCE.key,
                self.significance.as_ref().map(as_flag_text),
            ),
            (TOP_K.key, self.top_k.map(|k| k.to_string())),
            (MIN.key, self.min.clone()),
            (MAX.key, self.max.clone()),
            (
                RELATIVE_ENTROPY.key,
                self.relative_entropy.as_ref().map(as_flag_text),
            ),
            (KEEP_TEST_PHRASES.key, self.keep_test_phrases.clone()),
        ]
        .into_iter()
        .filter_map(|(key, text)| text.map(|t| (key, t)))
        .collect()
    }
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
    /// The steps: TOML into typed tables, then one step per table (corpus and extraction,
    /// filters, packing, held-out set, quality), each checking its values with the same code
    /// as the command line.
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
        let cx = Context {
            name: file.display().to_string(),
            text,
            input_dir,
            output_dir,
        };
        let spec: Spec = toml::from_str(text).map_err(|e| {
            let line = e.span().map_or(0, |s| line_of(text, s.start));
            Error::input(&cx.name, line, format!("bad recipe: {}", e.message()))
        })?;
        let extract = cx.extraction(&spec.corpus, &spec.extract)?;
        let prune = cx.pruning(&spec.filters, &spec.prune)?;
        let packing = cx.packing(spec.pack.as_ref())?;
        let held_out = cx.held_out(spec.held_out.as_ref())?;
        let quality = cx.quality(spec.quality.as_ref(), held_out.as_ref())?;
        let (c, o) = (&spec.corpus, &spec.output);
        Ok(Recipe {
            file: file.to_path_buf(),
            text: text.to_string(),
            corpus: CorpusPaths {
                source: cx.input(&c.source),
                target: cx.input(&c.target),
                alignment: Some(cx.input(&c.alignment)),
            },
            extract,
            prune,
            pack: packing.settings,
            pack_resources: packing.resources,
            table: cx.output(&o.table),
            extracted: o.extracted.as_deref().map(|p| cx.output(p)),
            stats: o.stats.as_deref().map(|p| cx.output(p)),
            report: o.report.as_deref().map(|p| cx.output(p)),
            held_out,
            quality,
        })
    }
}

impl Recipe {
    /// Sets `threads` or `temp_dir` (snake or kebab case) for every stage, over the recipe's
    /// own values, as `baler build --threads` does. Memory budgets stay per stage.
    ///
    /// # Examples
    /// ```
    /// use baler::recipe::Recipe;
    /// let text = "[corpus]\nsource = \"a\"\ntarget = \"b\"\nalignment = \"c\"\n\
    ///             [extract]\nthreads = 2\n[output]\ntable = \"t.bale\"\n";
    /// let mut recipe = Recipe::parse(text, "r.toml".as_ref(), ".".as_ref(), None)?;
    /// recipe.set_resource("threads", "1")?;
    /// assert_eq!((recipe.extract.shard.threads, recipe.pack_resources.threads), (1, 1));
    /// assert!(recipe.set_resource("memory", "1G").is_err());
    /// # Ok::<(), baler::Error>(())
    /// ```
    pub fn set_resource(&mut self, key: &str, text: &str) -> Result<()> {
        let mut given = self.pack_resources.clone();
        given.set(key, text)?;
        match key.trim_start_matches("--").replace('-', "_").as_str() {
            "threads" => {
                self.extract.shard.threads = given.thread_count();
                self.pack_resources.threads = given.threads;
            }
            "temp_dir" => {
                self.extract.shard.temp_dir = given.temp_dir.clone();
                self.pack_resources.temp_dir = given.temp_dir;
            }
            other => {
                return Err(Error::invalid(
                    other,
                    "is set per stage in the recipe, not for the whole build",
                ))
            }
        }
        Ok(())
    }
}

/// The `[pack]` table: packing settings and the resources of packing.
struct Packing {
    settings: PackSettings,
    resources: Resources,
}

/// Where a recipe's errors point and its relative paths resolve.
struct Context<'a> {
    /// The recipe's file, as errors name it.
    name: String,
    text: &'a str,
    input_dir: &'a Path,
    output_dir: Option<&'a Path>,
}

impl Context<'_> {
    /// `e` as an error at the line of `span`, naming the key instead of a flag.
    fn at(&self, span: std::ops::Range<usize>, e: Error) -> Error {
        let reason = match e {
            Error::InvalidArgument { option, reason } => {
                format!("{}: {reason}", option.trim_start_matches("--"))
            }
            other => other.to_string(),
        };
        Error::input(&self.name, line_of(self.text, span.start), reason)
    }

    fn input(&self, p: &str) -> PathBuf {
        self.input_dir.join(p)
    }

    fn output(&self, p: &str) -> PathBuf {
        match self.output_dir {
            Some(d) => d.join(p),
            None => PathBuf::from(p),
        }
    }

    /// `[corpus]` and `[extract]`.
    fn extraction(&self, c: &CorpusSpec, x: &ExtractSpec) -> Result<ExtractOptions> {
        let mut corpus = CorpusOptions {
            links_target_first: c.links_target_first,
            ..Default::default()
        };
        if let Some(n) = &c.max_sentence_length {
            corpus.max_sentence_length = *n.get_ref();
        }
        corpus
            .validate()
            .map_err(|e| self.at(c.max_sentence_length.as_ref().map_or(0..0, |s| s.span()), e))?;
        let mut limits = PhraseLimits::default();
        if let Some(n) = &x.max_length {
            if !(1..=255).contains(n.get_ref()) {
                let reason = format!("{} is not between 1 and 255", n.get_ref());
                return Err(self.at(n.span(), Error::invalid("max_length", reason)));
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
                    let reason = format!("{other:?} is not none, good-turing or kneser-ney");
                    return Err(self.at(d.span(), Error::invalid("discount", reason)));
                }
            },
        };
        // memory and threads mean what they mean everywhere (the registry: 0 threads is
        // every core)
        let mut resources = Resources::default();
        if let Some(m) = &x.memory {
            resources
                .set(settings::MEMORY.key, m.get_ref())
                .map_err(|e| self.at(m.span(), e))?;
        }
        if let Some(t) = &x.threads {
            resources.threads = *t.get_ref();
        }
        let mut shard = ShardOptions {
            limits,
            corpus,
            threads: resources.thread_count(),
            ..Default::default()
        };
        if x.memory.is_some() {
            shard.memory = resources.memory;
        }
        Ok(ExtractOptions { shard, discount })
    }

    /// `[[filter]]` in order, and `[prune]`: each filter through the registry.
    fn pruning(&self, specs: &[Spanned<FilterSpec>], p: &PruneSpec) -> Result<PruneOptions> {
        let mut filters = Vec::with_capacity(specs.len());
        for spec in specs {
            let span = spec.span();
            let g = spec.get_ref();
            let given = g.given();
            let [(key, value)] = given.as_slice() else {
                let keys = settings::filters::FILTERS.map(|f| f.key).join(", ");
                return Err(Error::input(
                    &self.name,
                    line_of(self.text, span.start),
                    format!("each [[filter]] needs exactly one of {keys}"),
                ));
            };
            if g.by.is_some() && g.top_k.is_none() {
                return Err(Error::input(
                    &self.name,
                    line_of(self.text, span.start),
                    "`by` only applies to a top_k filter",
                ));
            }
            let value = if *key == settings::filters::KEEP_TEST_PHRASES.key {
                self.input(value).display().to_string()
            } else {
                value.clone()
            };
            let mut filter =
                settings::filters::filter(key, &value).map_err(|e| self.at(span.clone(), e))?;
            if let (Filter::TopK { by, .. }, Some(text)) = (&mut filter, &g.by) {
                *by = Ranking::parse(text).map_err(|e| self.at(span.clone(), e))?;
            }
            filters.push(filter);
        }
        Ok(PruneOptions {
            filters,
            annotate: p.annotate,
            renormalize: p.renormalize.clone(),
            ..Default::default()
        })
    }

    /// `[pack]`: every key goes through the settings registry (packing settings and the
    /// resources of packing).
    fn packing(&self, table: Option<&Spanned<toml::Table>>) -> Result<Packing> {
        let mut packing = Packing {
            settings: PackSettings::default(),
            resources: Resources::default(),
        };
        let Some(table) = table else {
            return Ok(packing);
        };
        for (key, value) in table.get_ref() {
            let span = key_span(self.text, table.span(), key);
            let given = as_flag_text(value);
            let set = if settings::RESOURCES.iter().any(|s| s.key == key) {
                packing.resources.set(key, &given)
            } else if settings::find(key).is_some_and(|s| settings::PACK.contains(s)) {
                packing.settings.set(key, &given)
            } else {
                let keys: Vec<_> = settings::PACK
                    .iter()
                    .chain(&settings::RESOURCES)
                    .map(|s| s.key)
                    .collect();
                Err(Error::invalid(
                    key,
                    format!("unknown key in [pack]; one of: {}", keys.join(", ")),
                ))
            };
            set.map_err(|e| self.at(span, e))?;
        }
        if let Some(dir) = &packing.resources.temp_dir {
            packing.resources.temp_dir = Some(self.output(&dir.to_string_lossy()));
        }
        Ok(packing)
    }

    /// `[held_out]`.
    fn held_out(&self, h: Option<&HeldOutSpec>) -> Result<Option<HeldOut>> {
        let Some(h) = h else { return Ok(None) };
        if let Some(n) = h.max_length.as_ref().filter(|n| *n.get_ref() == 0) {
            return Err(self.at(n.span(), Error::invalid("max_length", "must be at least 1")));
        }
        Ok(Some(HeldOut {
            source: self.input(&h.source),
            reference: h.reference.as_deref().map(|p| self.input(p)),
            max_length: h.max_length.as_ref().map(|n| *n.get_ref()),
        }))
    }

    /// `[quality]`: the model and weights are opened (and checked) now, before any work.
    fn quality(
        &self,
        q: Option<&Spanned<QualitySpec>>,
        held_out: Option<&HeldOut>,
    ) -> Result<Option<QualityRecipe>> {
        let Some(q) = q else { return Ok(None) };
        if held_out.is_none_or(|h| h.reference.is_none()) {
            return Err(self.at(
                q.span(),
                Error::invalid(
                    "quality",
                    "needs [held_out] with a reference to score translations against",
                ),
            ));
        }
        let q = q.get_ref();
        let lm = self.input(q.lm.get_ref());
        crate::lm::LanguageModel::open(&lm).map_err(|e| self.at(q.lm.span(), e))?;
        let weights = match &q.weights {
            Some(w) => {
                let path = self.input(w.get_ref());
                let none = crate::decode::Weights {
                    values: Default::default(),
                };
                crate::decode::Weights::read(&path, none).map_err(|e| self.at(w.span(), e))?;
                Some(path)
            }
            None => None,
        };
        Ok(Some(QualityRecipe { lm, weights }))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Every filter of the registry can be written as a `[[filter]]`, with the value text the
    /// command line takes.
    #[test]
    fn every_registry_filter_is_a_recipe_key() {
        let values = [
            "\"alpha+epsilon\"",
            "5",
            "\"count=2\"",
            "\"p=0.5\"",
            "-0.25",
            "\"t.en\"",
        ];
        for (setting, value) in settings::filters::FILTERS.iter().zip(values) {
            let text = format!(
                "[corpus]\nsource = \"a\"\ntarget = \"b\"\nalignment = \"c\"\n\
                 [[filter]]\n{} = {value}\n[output]\ntable = \"t.bale\"\n",
                setting.key
            );
            let recipe = Recipe::parse(&text, "r.toml".as_ref(), "in".as_ref(), None)
                .unwrap_or_else(|e| panic!("{}: {e}", setting.key));
            assert_eq!(recipe.prune.filters.len(), 1, "{}", setting.key);
        }
    }

    #[test]
    fn threads_zero_is_every_core_as_on_the_command_line() {
        let text = "[corpus]\nsource = \"a\"\ntarget = \"b\"\nalignment = \"c\"\n\
                    [extract]\nthreads = 0\n[output]\ntable = \"t.bale\"\n";
        let recipe = Recipe::parse(text, "r.toml".as_ref(), ".".as_ref(), None).unwrap();
        assert_eq!(
            recipe.extract.shard.threads,
            Resources::default().thread_count()
        );
    }
}
