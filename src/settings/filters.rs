//! The prune filters as registry entries: one [`Setting`] each, and [`filter`], the one
//! function that turns a filter's text into a [`Filter`]. `prune`'s flags, the recipe's
//! `[[filter]]` keys and the `sweep --vary` names all come from [`FILTERS`].
//!
//! # Examples
//! ```
//! use baler::prune::Filter;
//! use baler::settings::filters;
//! assert!(matches!(filters::filter("top-k", "20")?, Filter::TopK { k: 20, .. }));
//! assert!(matches!(filters::filter("relative_entropy", "-0.5")?, Filter::RelativeEntropy(_)));
//! let e = filters::filter("top_k", "lots").unwrap_err().to_string();
//! assert!(e.contains("top_k") && e.contains("whole number"), "{e}");
//! # Ok::<(), baler::Error>(())
//! ```

use std::path::PathBuf;

use super::Setting;
use crate::error::{Error, Result};
use crate::prune::{Filter, Ranking, Threshold};

/// `--significance`.
pub const SIGNIFICANCE: Setting = Setting {
    key: "significance",
    value_name: "THRESHOLD",
    help: "Keep pairs whose one-sided Fisher test gives -ln p >= this: NUMBER, alpha+epsilon or \
           alpha-epsilon (repeatable)",
    default: None,
};
/// `--top-k`.
pub const TOP_K: Setting = Setting {
    key: "top_k",
    value_name: "N",
    help: "Keep the N best options of each source phrase (repeatable; see --by)",
    default: None,
};
/// `--min`.
pub const MIN: Setting = Setting {
    key: "min",
    value_name: "COLUMN=VALUE",
    help: "Keep pairs whose score or count column is at least VALUE (repeatable)",
    default: None,
};
/// `--max`.
pub const MAX: Setting = Setting {
    key: "max",
    value_name: "COLUMN=VALUE",
    help: "Keep pairs whose score or count column is at most VALUE (repeatable)",
    default: None,
};
/// `--relative-entropy`.
pub const RELATIVE_ENTROPY: Setting = Setting {
    key: "relative_entropy",
    value_name: "THRESHOLD",
    help: "Keep pairs whose relative-entropy score p(t|s)(ln p(t|s) - ln p'(t|s)) is at least \
           this, p' being the best monotone composition of shorter pairs of the table",
    default: None,
};
/// `--keep-test-phrases`.
pub const KEEP_TEST_PHRASES: Setting = Setting {
    key: "keep_test_phrases",
    value_name: "FILE",
    help: "Keep only source phrases that occur in this tokenized text (e.g. a test set's source \
           side), as before decoding it",
    default: None,
};
/// `--by`: the ranking of `top_k` (not a filter of its own).
pub const BY: Setting = Setting {
    key: "by",
    value_name: "RANKING",
    help: "Ranking for --top-k: COLUMN, or COLUMN=WEIGHT,COLUMN=WEIGHT,... for the log-linear sum \
           of weight * ln(value). Ties go to the target first in byte order. Give one for all \
           --top-k, or one per --top-k in the same order. Default p_t_given_s",
    default: None,
};

/// Every prune filter, in the order `--help` lists them.
pub const FILTERS: [Setting; 6] = [
    SIGNIFICANCE,
    TOP_K,
    MIN,
    MAX,
    RELATIVE_ENTROPY,
    KEEP_TEST_PHRASES,
];

/// The filter entry named `name` (snake or kebab case), if any.
pub fn find(name: &str) -> Option<&'static Setting> {
    let key = name.trim().trim_start_matches("--").replace('-', "_");
    FILTERS.iter().find(|s| s.key == key)
}

/// Parses `text` as the filter `name` (snake or kebab case), as the command line, a recipe or
/// `--vary` gives it; `top_k` ranks by the default (set `by` afterwards with
/// [`Ranking::parse`]). Errors name the setting.
pub fn filter(name: &str, text: &str) -> Result<Filter> {
    let Some(setting) = find(name) else {
        return Err(Error::invalid(
            name,
            format!(
                "is not a prune filter; one of: {}",
                FILTERS.map(|f| f.key).join(", ")
            ),
        ));
    };
    let key = setting.key;
    let text = text.trim();
    // the parsers below name the flag; errors here name the setting
    let named = |e: Error| match e {
        Error::InvalidArgument { reason, .. } => Error::invalid(key, reason),
        other => other,
    };
    match key {
        "significance" => Threshold::parse(text)
            .map(Filter::Significance)
            .map_err(named),
        "top_k" => text
            .parse::<usize>()
            .ok()
            .filter(|&k| k > 0)
            .map(|k| Filter::TopK {
                k,
                by: Ranking::default(),
            })
            .ok_or_else(|| Error::invalid(key, format!("{text:?} is not a whole number ≥ 1"))),
        "min" | "max" => Filter::bound(key, text, key == "min"),
        "relative_entropy" => text
            .parse::<f64>()
            .ok()
            .filter(|v| !v.is_nan())
            .map(Filter::RelativeEntropy)
            .ok_or_else(|| Error::invalid(key, format!("{text:?} is not a number"))),
        "keep_test_phrases" if text.is_empty() => Err(Error::invalid(key, "needs a file")),
        "keep_test_phrases" => Ok(Filter::KeepTestPhrases(PathBuf::from(text))),
        _ => unreachable!("every FILTERS entry has an arm"),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_filter_parses_and_names_itself_in_errors() {
        let good = [
            "alpha+epsilon",
            "5",
            "count=2",
            "p=0.5",
            "-0.25",
            "test.txt",
        ];
        for (setting, text) in FILTERS.iter().zip(good) {
            filter(setting.key, text).unwrap();
            filter(&setting.flag(), text).unwrap();
            if setting.key != "keep_test_phrases" {
                let e = filter(setting.key, "x=y=?").unwrap_err().to_string();
                assert!(e.contains(setting.key), "{e}");
            }
        }
        assert!(filter("colour", "red").is_err());
        assert!(filter("top_k", "0").is_err());
    }
}
