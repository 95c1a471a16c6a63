//! The only `unsafe` code in baler: memory-mapping a packed table.

use std::fs::File;
use std::io::Read;
use std::path::Path;

use crate::error::{Error, Result};

/// The bytes of an open table: a read-only map of the file, or owned bytes.
pub(crate) enum Storage {
    Mapped(memmap2::Mmap),
    Owned(Box<dyn AsRef<[u8]> + Send + Sync>),
}

impl Storage {
    pub(crate) fn bytes(&self) -> &[u8] {
        match self {
            Storage::Mapped(m) => m,
            Storage::Owned(b) => (**b).as_ref(),
        }
    }
}

/// Maps `path` read-only; files too small to map (empty) are read instead.
///
/// # Safety contract (upheld by callers, documented for users on `Table::open`)
/// A memory map is only sound while no process truncates or rewrites the file in place. baler
/// itself never modifies a packed file: every writer creates a new temporary file and renames it
/// over the old name, which leaves existing maps of the old file intact. Users must not edit a
/// packed file in place while it is open. Even then the map is only read through bounds-checked
/// slices, so what changes is the data, which every reader path validates.
pub(crate) fn map_file(path: &Path) -> Result<Storage> {
    let mut file = File::open(path).map_err(|e| Error::io(path, "opening", e))?;
    let len = file
        .metadata()
        .map_err(|e| Error::io(path, "opening", e))?
        .len();
    if len == 0 {
        let mut bytes = Vec::new();
        file.read_to_end(&mut bytes)
            .map_err(|e| Error::io(path, "reading", e))?;
        return Ok(Storage::Owned(Box::new(bytes)));
    }
    // SAFETY: the map is read-only and private to this process; see the contract above: baler
    // replaces files by rename, never in place, so the mapped bytes do not change under us.
    let map =
        unsafe { memmap2::Mmap::map(&file) }.map_err(|e| Error::io(path, "memory-mapping", e))?;
    Ok(Storage::Mapped(map))
}
