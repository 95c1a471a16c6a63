//! The quality flags shared by `compare` and `sweep` (`--lm`, `--weights`), and what they add:
//! BLEU and chrF per table with the paired-bootstrap difference from the base.

use std::path::{Path, PathBuf};

use baler::quality::{self, QualityReport};

/// `--lm` and `--weights`.
#[derive(clap::Args, Clone)]
pub struct QualityArgs {
    /// Target-language model: decode the test set with each (packed) table and add BLEU and
    /// chrF against --reference.
    #[arg(long, value_name = "MODEL", requires = "reference")]
    pub lm: Option<PathBuf>,
    /// Decoder weights file (`baler tune`); defaults otherwise.
    #[arg(long, value_name = "FILE", requires = "lm")]
    pub weights: Option<PathBuf>,
}

/// `compare`'s quality block, when `--lm` is given.
pub fn for_tables(
    args: &QualityArgs,
    test: &Path,
    reference: Option<&Path>,
    base: &Path,
    others: &[PathBuf],
    threads: usize,
) -> baler::Result<Option<QualityReport>> {
    match (&args.lm, reference) {
        (Some(_), Some(r)) => quality::measure_tables(
            args.lm.as_ref().expect("checked"),
            args.weights.as_deref(),
            test,
            r,
            base,
            others,
            threads,
        )
        .map(Some),
        _ => Ok(None),
    }
}
