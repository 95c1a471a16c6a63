//! Reading packed tables (being written; the signatures below are the intended API).

use std::path::Path;

use crate::error::{Error, Result};
use crate::table::{Header, PhrasePair};

/// An open packed table.
pub struct Table {
    header: Header,
}

/// One translation option of a source phrase.
pub struct TableOption {
    target: String,
}

impl TableOption {
    /// The target phrase.
    pub fn target(&self) -> &str {
        &self.target
    }
}

impl Table {
    /// Opens and validates a packed table.
    pub fn open(_path: &Path) -> Result<Table> {
        Err(Error::Unsupported("reading is not built yet".into()))
    }

    /// Metadata and schema of the table.
    pub fn header(&self) -> &Header {
        &self.header
    }

    /// The options of one source phrase.
    pub fn lookup(&self, _source: &str) -> Result<Vec<TableOption>> {
        Err(Error::Unsupported("reading is not built yet".into()))
    }

    /// Every pair in the table, grouped by source in byte order, options in stored order.
    pub fn pairs(&self) -> impl Iterator<Item = Result<PhrasePair>> + '_ {
        std::iter::empty()
    }
}
