//! The header shared by extraction's intermediate files (count runs, phrase indexes, tallies):
//! a zstd stream opening with 8 magic bytes, a `u32` version, a `u32` length and that many bytes
//! of JSON describing the file. The stream carries zstd's content checksum, and the whole file
//! is decompressed and checked when opened, before any of it is used: a damaged file is an
//! error, never wrong counts or a panic in a reader further on.

use std::fs::File;
use std::io::{BufReader, Read};
use std::path::Path;

use serde::de::DeserializeOwned;

use crate::error::{Error, Result};

/// A decompressing reader positioned after the header.
pub(crate) type FramedInput = BufReader<zstd::stream::read::Decoder<'static, BufReader<File>>>;

/// Opens an intermediate file of kind `what` (e.g. "count run"), checks its magic and version,
/// and parses its JSON header. Errors read "PATH: not a baler WHAT: reason".
pub(crate) fn open<T: DeserializeOwned>(
    path: &Path,
    magic: &[u8; 8],
    version: u32,
    what: &str,
) -> Result<(FramedInput, T, impl Fn(&str) -> Error)> {
    let (shown, what) = (path.to_path_buf(), what.to_string());
    let bad = move |reason: &str| Error::damaged_intermediate(&shown, &what, reason);
    verify(path, &bad)?;
    let file = File::open(path).map_err(|e| Error::io(path, "opening", e))?;
    let decoder =
        zstd::stream::read::Decoder::new(file).map_err(|e| Error::io(path, "opening", e))?;
    let mut input = BufReader::with_capacity(1 << 16, decoder);
    let mut head = [0u8; 16];
    input
        .read_exact(&mut head)
        .map_err(|_| bad("too short or not zstd"))?;
    if &head[..8] != magic {
        return Err(bad("wrong magic bytes"));
    }
    let found = u32::from_le_bytes(head[8..12].try_into().unwrap());
    if found != version {
        return Err(bad(&format!(
            "format version {found}, this baler reads {version}"
        )));
    }
    let mut json = vec![0u8; u32::from_le_bytes(head[12..16].try_into().unwrap()) as usize];
    input
        .read_exact(&mut json)
        .map_err(|_| bad("truncated header"))?;
    let info = serde_json::from_slice(&json).map_err(|e| bad(&format!("bad header: {e}")))?;
    Ok((input, info, bad))
}

/// Reads the next LEB128 number of a file's records; `damaged` makes the error of a truncated
/// or malformed one.
pub(crate) fn number(input: &mut FramedInput, damaged: impl Fn(&str) -> Error) -> Result<u64> {
    match crate::format::read_varint_from(input) {
        Ok(Some(v)) => Ok(v),
        Ok(None) => Err(damaged("truncated")),
        Err(e) => Err(damaged(&e.to_string())),
    }
}

/// Checks that `path` is one zstd frame with a content checksum and that it decompresses to
/// the end with a matching checksum.
fn verify(path: &Path, bad: &impl Fn(&str) -> Error) -> Result<()> {
    const ZSTD_MAGIC: [u8; 4] = [0x28, 0xB5, 0x2F, 0xFD];
    const CHECKSUM_FLAG: u8 = 0x04;
    let mut file = File::open(path).map_err(|e| Error::io(path, "opening", e))?;
    let mut head = [0u8; 5];
    file.read_exact(&mut head)
        .map_err(|_| bad("too short or not zstd"))?;
    if head[..4] != ZSTD_MAGIC {
        return Err(bad("not zstd"));
    }
    if head[4] & CHECKSUM_FLAG == 0 {
        return Err(bad("no content checksum (written by an older baler?)"));
    }
    let file = File::open(path).map_err(|e| Error::io(path, "opening", e))?;
    let mut decoder =
        zstd::stream::read::Decoder::new(file).map_err(|e| Error::io(path, "opening", e))?;
    std::io::copy(&mut decoder, &mut std::io::sink())
        .map_err(|e| bad(&format!("damaged (checksum or framing): {e}")))?;
    Ok(())
}
