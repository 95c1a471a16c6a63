//! Writing packed tables (being written; the signatures below are the intended API).

use std::io::BufRead;
use std::path::Path;

use crate::error::{Error, Result};
use crate::table::{Header, PhrasePair};

/// Options for packing.
#[derive(Clone, Debug, Default)]
pub struct PackOptions {
    /// Bits per quantized score (1..=16), or `None` to store scores as f32.
    pub bits: Option<u8>,
    /// Memory budget in bytes for sorting.
    pub memory: u64,
    /// Extra provenance entries recorded in the file.
    pub provenance: Vec<(String, String)>,
}

/// Packs an interchange TSV stream into `out`.
pub fn pack_tsv<R: BufRead>(
    _input: R,
    _name: &str,
    _out: &Path,
    _options: &PackOptions,
) -> Result<()> {
    Err(Error::Unsupported("packing is not built yet".into()))
}

/// Packs records (in any order) that follow `header` into `out`.
pub fn pack_pairs<I>(_header: &Header, _pairs: I, _out: &Path, _options: &PackOptions) -> Result<()>
where
    I: Iterator<Item = Result<PhrasePair>>,
{
    Err(Error::Unsupported("packing is not built yet".into()))
}
