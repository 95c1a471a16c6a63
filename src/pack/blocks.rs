//! Pack's steps for source blocks: collecting a block's records, and coding the plain blocks
//! of pass 2 into the final blocks section (layouts in [`crate::format::block`]).

use std::fs::File;
use std::io::{BufReader, BufWriter, Read, Write};
use std::path::Path;

use crate::error::{Error, Result};
use crate::format::block::{BlockRecords, BlockShape, ModelIds, Upto, COMPONENTS};
use crate::format::coder::{Models, PlainSink, PlainSource, RansSink, SymbolSink};
use crate::format::sections::{push_block_entry, SkipPoint, SkipPoints, MAX_SKIP_POS};

/// A resume point is kept before a source once this many bytes of the block's stream precede
/// it since the start of the options or the last point: a lookup then decodes about this much
/// besides its own options, and the points (8 bytes each) cost at most 8 / this of the blocks.
/// Measured on the real en-fr table (20,000 lookups; 4 and 10 columns): see DEVELOPERS.md.
pub(super) const SKIP_EVERY_BYTES: usize = 160;

/// One option as the packer holds it before encoding.
#[derive(Default)]
pub(super) struct PackedOption {
    pub target_ref: u64,
    /// The target phrase's bytes (kept for the `direct` layout only).
    pub target: Vec<u8>,
    /// Original scores (for ordering).
    pub scores: Vec<f64>,
    /// Codebook codes, or the `f32` bits of unquantized scores.
    pub codes: Vec<u32>,
    pub alignment: Vec<(u16, u16)>,
    pub counts: Vec<u64>,
}

/// Appends one source with its (ordered) options to `block`.
pub(super) fn push_source(
    block: &mut BlockRecords,
    shape: &BlockShape,
    key: &[u8],
    options: &[PackedOption],
) {
    block.key_bytes.extend_from_slice(key);
    block.key_ends.push(block.key_bytes.len() as u32);
    for o in options {
        block.targets.push(o.target_ref as u32);
        for (c, &code) in o.codes.iter().enumerate() {
            match shape.widths[c] {
                1 => block.codes.push(code as u8),
                2 => block.codes.extend_from_slice(&(code as u16).to_le_bytes()),
                _ => block.codes.extend_from_slice(&code.to_le_bytes()),
            }
        }
        if shape.alignment {
            block.links.extend_from_slice(&o.alignment);
            block.link_ends.push(block.links.len() as u32);
        }
        block.counts.extend_from_slice(&o.counts);
    }
    let prev = block.option_ends.last().copied().unwrap_or(0);
    block.option_ends.push(prev + options.len() as u32);
}

/// Sums the coded size of symbols per component (bits).
pub(super) struct CostSink<'a> {
    pub ids: ModelIds,
    pub models: Option<&'a Models>,
    /// Bits per component: [`COMPONENTS`], then one per score column.
    pub bits: Vec<f64>,
}

impl<'a> CostSink<'a> {
    pub fn new(ids: ModelIds, models: Option<&'a Models>, scores: usize) -> CostSink<'a> {
        CostSink {
            ids,
            models,
            bits: vec![0.0; COMPONENTS.len() + scores],
        }
    }
}

impl SymbolSink for CostSink<'_> {
    fn byte(&mut self, model: usize, b: u8) {
        let c = self.ids.component(model);
        self.bits[c] += self.models.map_or(8.0, |m| m.cost_bits(model, b));
    }
    fn number(&mut self, model: usize, v: u64) {
        let c = self.ids.component(model);
        self.bits[c] += match self.models {
            Some(m) => {
                let (class, _, extra) = crate::format::coder::number_class(v);
                m.cost_bits(model, class) + f64::from(extra)
            }
            None => {
                let mut buf = Vec::new();
                crate::format::write_varint(&mut buf, v);
                8.0 * buf.len() as f64
            }
        };
    }
}

/// What [`code_blocks`] wrote.
pub(super) struct CodedBlocks {
    pub index: Vec<u8>,
    /// Resume points per block (rANS coding only).
    pub skips: Option<Vec<Vec<SkipPoint>>>,
    pub bytes: u64,
    pub crc: u32,
    pub max_block: usize,
}

/// Reads the length-prefixed plain blocks of pass 2 once, codes each (rANS with `models`, or
/// as they are), writes them to `out_path` checksumming as it goes, and builds the block index.
#[allow(clippy::too_many_arguments)]
pub(super) fn code_blocks(
    raw_path: &Path,
    block_sources: &[u32],
    first_keys: &[u8],
    key_ends: &[u32],
    shape: &BlockShape,
    ids: ModelIds,
    models: Option<&Models>,
    costs: &mut CostSink<'_>,
    out_path: &Path,
) -> Result<CodedBlocks> {
    let rerr = |e| Error::io(raw_path, "reading", e);
    let werr = |e| Error::io(out_path, "writing", e);
    let mut input = BufReader::with_capacity(1 << 20, File::open(raw_path).map_err(rerr)?);
    let mut output = BufWriter::with_capacity(1 << 20, File::create(out_path).map_err(werr)?);
    let mut crc_all = crc32fast::Hasher::new();
    let mut index = Vec::with_capacity((block_sources.len() + 1) * 16);
    let (mut offset, mut max_block) = (0u64, 0usize);
    let mut raw = Vec::new();
    let mut coded = Vec::new();
    let mut records = BlockRecords::default();
    let mut key_start = 0u32;
    let mut skips = models.map(|_| Vec::with_capacity(block_sources.len()));
    for (b, &n) in block_sources.iter().enumerate() {
        let mut len = [0u8; 4];
        input.read_exact(&mut len).map_err(rerr)?;
        raw.resize(u32::from_le_bytes(len) as usize, 0);
        input.read_exact(&mut raw).map_err(rerr)?;
        let first_key = &first_keys[key_start as usize..key_ends[b] as usize];
        // The plain block was written by this process; a failure to parse it is a bug.
        records
            .decode(
                first_key,
                n as usize,
                Upto::Sources(n as usize),
                shape,
                &ids,
                u64::MAX,
                &mut PlainSource::new(&raw),
                SkipPoints::default(),
            )
            .expect("pass 2's plain block parses");
        records.encode(shape, &ids, costs);
        let stored: &[u8] = match models {
            Some(m) => {
                let mut sink = RansSink::new(m);
                records.encode(shape, &ids, &mut sink);
                sink.finish(&mut coded);
                if let Some(skips) = &mut skips {
                    skips.push(keep_points(&sink.resume_points));
                }
                &coded
            }
            None => &raw,
        };
        push_block_entry(&mut index, offset, key_start, crc32fast::hash(stored));
        output.write_all(stored).map_err(werr)?;
        crc_all.update(stored);
        offset += stored.len() as u64;
        max_block = max_block.max(stored.len());
        key_start = key_ends[b];
    }
    push_block_entry(&mut index, offset, key_start, 0);
    output.flush().map_err(werr)?;
    Ok(CodedBlocks {
        index,
        skips,
        bytes: offset,
        crc: crc_all.finalize(),
        max_block,
    })
}

/// Plain-codes a block for pass 2's temporary file (length-prefixed) and counts its symbols.
pub(super) fn write_plain_block(
    records: &BlockRecords,
    shape: &BlockShape,
    ids: &ModelIds,
    counter: Option<&mut crate::format::coder::Counter>,
    scratch: &mut PlainSink,
    out: &mut impl Write,
) -> std::io::Result<usize> {
    scratch.out.clear();
    records.encode(shape, ids, scratch);
    if let Some(c) = counter {
        records.encode(shape, ids, c);
    }
    out.write_all(&(scratch.out.len() as u32).to_le_bytes())?;
    out.write_all(&scratch.out)?;
    Ok(scratch.out.len())
}

/// The resume points worth storing: one before a source once [`SKIP_EVERY_OPTIONS`] options
/// precede it since the block's start or the last point.
fn keep_points(all: &[(usize, usize, u32)]) -> Vec<SkipPoint> {
    let mut kept = Vec::new();
    // The first mark is the start of source 0's options.
    let mut last = all.first().map_or(0, |p| p.1);
    for &(rank, pos, state) in all.iter().skip(1) {
        if pos - last >= SKIP_EVERY_BYTES && pos <= MAX_SKIP_POS && rank < 256 {
            kept.push(SkipPoint { rank, pos, state });
            last = pos;
        }
    }
    kept
}
