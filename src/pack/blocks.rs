//! Option blocks: the columnar record layout of one block, and their compression.
//!
//! A raw block holds, for the sources it covers in ordinal order: one varint option count per
//! source; then per score column the codes of every option (fixed width); then one varint
//! target reference (byte offset of the target's record in the target data) per option; then (if stored) per option a varint link count and varint `i`, `j` per
//! link; then (if stored) per count column one varint per option.

use std::fs::File;
use std::io::{BufReader, BufWriter, Read, Write};
use std::path::Path;

use crate::error::{Error, Result};
use crate::format::{self, write_varint, Compression};

use super::PackOptions;

/// One option as the packer holds it before encoding.
#[derive(Default)]
pub(super) struct PackedOption {
    pub target_ref: u64,
    /// Original scores (for ordering).
    pub scores: Vec<f64>,
    /// Codebook codes, or the `f32` bits of unquantized scores.
    pub codes: Vec<u32>,
    pub alignment: Vec<(u16, u16)>,
    pub counts: Vec<u64>,
}

/// Accumulates the columns of one block.
pub(super) struct BlockBuilder {
    widths: Vec<usize>,
    alignment: bool,
    sources: u32,
    option_counts: Vec<u8>,
    scores: Vec<Vec<u8>>,
    target_refs: Vec<u8>,
    links: Vec<u8>,
    counts: Vec<Vec<u8>>,
}

impl BlockBuilder {
    pub fn new(modes: &[(u8, u8)], alignment: bool, n_counts: usize) -> BlockBuilder {
        BlockBuilder {
            widths: modes
                .iter()
                .map(|&(m, b)| format::score_width(m, b))
                .collect(),
            alignment,
            sources: 0,
            option_counts: Vec::new(),
            scores: vec![Vec::new(); modes.len()],
            target_refs: Vec::new(),
            links: Vec::new(),
            counts: vec![Vec::new(); n_counts],
        }
    }

    pub fn sources(&self) -> u32 {
        self.sources
    }

    pub fn add_source(&mut self, options: &[PackedOption]) {
        self.sources += 1;
        write_varint(&mut self.option_counts, options.len() as u64);
        for o in options {
            for (c, &code) in o.codes.iter().enumerate() {
                let col = &mut self.scores[c];
                match self.widths[c] {
                    1 => col.push(code as u8),
                    2 => col.extend_from_slice(&(code as u16).to_le_bytes()),
                    _ => col.extend_from_slice(&code.to_le_bytes()),
                }
            }
            write_varint(&mut self.target_refs, o.target_ref);
            if self.alignment {
                write_varint(&mut self.links, o.alignment.len() as u64);
                for &(i, j) in &o.alignment {
                    write_varint(&mut self.links, u64::from(i));
                    write_varint(&mut self.links, u64::from(j));
                }
            }
            for (c, &n) in o.counts.iter().enumerate() {
                write_varint(&mut self.counts[c], n);
            }
        }
    }

    /// The raw block; the builder is empty afterwards.
    pub fn finish(&mut self) -> Vec<u8> {
        let mut out = std::mem::take(&mut self.option_counts);
        for col in &mut self.scores {
            out.append(col);
        }
        out.append(&mut self.target_refs);
        out.append(&mut self.links);
        for col in &mut self.counts {
            out.append(col);
        }
        self.sources = 0;
        out
    }
}

/// Compresses the length-prefixed raw blocks in `raw_path` into `out_path`, in parallel but in
/// order; returns the `n + 1` block offsets.
pub(super) fn compress_blocks(
    raw_path: &Path,
    sizes: &[u32],
    out_path: &Path,
    options: &PackOptions,
    dictionary: Option<&[u8]>,
) -> Result<Vec<u64>> {
    let rerr = |e| Error::io(raw_path, "reading", e);
    let werr = |e| Error::io(out_path, "writing", e);
    let mut input = BufReader::with_capacity(1 << 20, File::open(raw_path).map_err(rerr)?);
    let mut output = BufWriter::with_capacity(1 << 20, File::create(out_path).map_err(werr)?);
    let threads = if options.threads == 0 {
        std::thread::available_parallelism().map_or(1, |n| n.get())
    } else {
        options.threads
    };
    let mut offsets = Vec::with_capacity(sizes.len() + 1);
    let mut offset = 0u64;
    offsets.push(0);
    const CHUNK: usize = 2048;
    for chunk in sizes.chunks(CHUNK) {
        let mut raws = Vec::with_capacity(chunk.len());
        for &size in chunk {
            let mut len = [0u8; 4];
            input.read_exact(&mut len).map_err(rerr)?;
            debug_assert_eq!(u32::from_le_bytes(len), size);
            let mut raw = vec![0u8; size as usize];
            input.read_exact(&mut raw).map_err(rerr)?;
            raws.push(raw);
        }
        let compressed: Vec<Vec<u8>> = match options.compression {
            Compression::None => raws,
            Compression::Zstd => compress_parallel(&raws, threads, options.zstd_level, dictionary)
                .map_err(|e| Error::io(out_path, "compressing a block for", e))?,
        };
        for block in &compressed {
            output.write_all(block).map_err(werr)?;
            offset += block.len() as u64;
            offsets.push(offset);
        }
    }
    output.flush().map_err(werr)?;
    Ok(offsets)
}

fn compress_parallel(
    raws: &[Vec<u8>],
    threads: usize,
    level: i32,
    dictionary: Option<&[u8]>,
) -> std::io::Result<Vec<Vec<u8>>> {
    let per = raws.len().div_ceil(threads.max(1)).max(1);
    std::thread::scope(|scope| {
        let handles: Vec<_> = raws
            .chunks(per)
            .map(|part| {
                scope.spawn(move || -> std::io::Result<Vec<Vec<u8>>> {
                    let mut c =
                        zstd::bulk::Compressor::with_dictionary(level, dictionary.unwrap_or(&[]))?;
                    part.iter().map(|raw| c.compress(raw)).collect()
                })
            })
            .collect();
        let mut all = Vec::with_capacity(raws.len());
        for h in handles {
            all.extend(h.join().expect("compression thread does not panic")?);
        }
        Ok(all)
    })
}
