//! Bounds-checked views of the fixed sections, validated once at open.

use std::ops::Range;
use std::sync::Arc;

use byteorder::{ByteOrder, LittleEndian as LE};

use crate::format::{self, read_varint, score_mode, Meta};
use crate::mmap::Storage;

/// A section of the shared storage, usable where `AsRef<[u8]>` is wanted (the fst map).
#[derive(Clone)]
pub(crate) struct Bytes {
    storage: Arc<Storage>,
    range: Range<usize>,
}

impl Bytes {
    pub(crate) fn new(storage: Arc<Storage>, range: Range<usize>) -> Bytes {
        Bytes { storage, range }
    }
}

impl AsRef<[u8]> for Bytes {
    fn as_ref(&self) -> &[u8] {
        &self.storage.bytes()[self.range.clone()]
    }
}

/// How one score column is decoded.
#[derive(Clone, Debug)]
pub(crate) enum Codec {
    F32,
    Book { width: usize, values: Vec<f64> },
}

impl Codec {
    pub(crate) fn width(&self) -> usize {
        match self {
            Codec::F32 => 4,
            Codec::Book { width, .. } => *width,
        }
    }

    /// Decodes the value at the start of `b` (at least `width` bytes).
    #[inline]
    pub(crate) fn decode(&self, b: &[u8]) -> Option<f64> {
        match self {
            Codec::F32 => Some(f64::from(LE::read_f32(b))),
            Codec::Book { width: 1, values } => values.get(usize::from(b[0])).copied(),
            Codec::Book { values, .. } => values.get(usize::from(LE::read_u16(b))).copied(),
        }
    }
}

pub(crate) fn parse_codebooks(b: &[u8], meta: &Meta) -> Result<Vec<Codec>, String> {
    let mut pos = 0;
    let mut codecs = Vec::with_capacity(meta.scores.len());
    for name in &meta.scores {
        let h = b
            .get(pos..pos + format::CODEBOOK_ENTRY_HEADER_LEN)
            .ok_or_else(|| format!("the codebook section ends before column {name:?}"))?;
        pos += format::CODEBOOK_ENTRY_HEADER_LEN;
        let (mode, bits, entries) = (h[0], h[1], LE::read_u32(&h[4..8]) as usize);
        match mode {
            score_mode::F32 => {
                if entries != 0 {
                    return Err(format!(
                        "column {name:?} is stored as f32 but has a codebook"
                    ));
                }
                codecs.push(Codec::F32);
            }
            score_mode::CODEBOOK => {
                if !(1..=16).contains(&bits) || entries == 0 || entries > 1 << bits {
                    return Err(format!(
                        "column {name:?} has a codebook of {entries} entries for {bits} bits"
                    ));
                }
                let bytes = b
                    .get(pos..pos + entries * 8)
                    .ok_or_else(|| format!("the codebook of column {name:?} is cut off"))?;
                pos += entries * 8;
                let values: Vec<f64> = bytes.chunks_exact(8).map(LE::read_f64).collect();
                if values.iter().any(|v| !v.is_finite()) {
                    return Err(format!(
                        "the codebook of column {name:?} holds a non-finite value"
                    ));
                }
                codecs.push(Codec::Book {
                    width: format::score_width(mode, bits),
                    values,
                });
            }
            other => return Err(format!("column {name:?} has unknown storage mode {other}")),
        }
    }
    if pos != b.len() {
        return Err(format!(
            "the codebook section has {} unexplained trailing bytes",
            b.len() - pos
        ));
    }
    Ok(codecs)
}

/// Validated positions (absolute file offsets) inside the vocabulary, targets, block-index and
/// options sections.
#[derive(Clone, Debug)]
pub(crate) struct Sections {
    pub words: u64,
    word_offsets: usize,
    word_bytes: Range<usize>,
    pub targets: u64,
    target_data: Range<usize>,
    block_index: usize,
    pub blocks: u64,
    options: Range<usize>,
}

impl Sections {
    pub(crate) fn new(
        data: &[u8],
        vocabulary: Range<usize>,
        targets: Range<usize>,
        block_index: Range<usize>,
        options: Range<usize>,
        meta: &Meta,
    ) -> Result<Sections, String> {
        let v = &data[vocabulary.clone()];
        if v.len() < 8 || LE::read_u64(v) != meta.vocabulary {
            return Err("the vocabulary section does not match the metadata".into());
        }
        let words = meta.vocabulary;
        let offsets_len = words
            .checked_add(1)
            .and_then(|n| n.checked_mul(8))
            .filter(|&n| n <= v.len() as u64 - 8);
        let Some(offsets_len) = offsets_len else {
            return Err("the vocabulary's offset array is cut off".into());
        };
        let word_offsets = vocabulary.start + 8;
        let word_bytes = word_offsets + offsets_len as usize..vocabulary.end;

        let t = &data[targets.clone()];
        if t.len() < 8 || LE::read_u64(t) != meta.targets {
            return Err("the targets section does not match the metadata".into());
        }
        let target_data = targets.start + 8..targets.end;

        let blocks = meta.sources.div_ceil(u64::from(meta.sources_per_block));
        if (block_index.len() as u64) != (blocks + 1) * 8 {
            return Err(format!(
                "the block index holds {} bytes; {} blocks need {}",
                block_index.len(),
                blocks,
                (blocks + 1) * 8
            ));
        }
        let last = LE::read_u64(&data[block_index.end - 8..block_index.end]);
        if last != options.len() as u64 {
            return Err("the block index does not end at the end of the options section".into());
        }
        Ok(Sections {
            words,
            word_offsets,
            word_bytes,
            targets: meta.targets,
            target_data,
            block_index: block_index.start,
            blocks,
            options,
        })
    }

    /// The text of word `id`.
    #[inline]
    pub(crate) fn word<'a>(&self, data: &'a [u8], id: u64) -> Result<&'a str, String> {
        if id >= self.words {
            return Err(format!(
                "word id {id} is outside the {}-word vocabulary",
                self.words
            ));
        }
        let p = self.word_offsets + id as usize * 8;
        let (a, b) = (LE::read_u64(&data[p..]), LE::read_u64(&data[p + 8..]));
        let len = self.word_bytes.len() as u64;
        if a > b || b > len {
            return Err(format!(
                "word {id} has offsets {a}..{b} outside the vocabulary's {len} bytes"
            ));
        }
        let bytes = &data[self.word_bytes.start + a as usize..self.word_bytes.start + b as usize];
        std::str::from_utf8(bytes).map_err(|_| format!("word {id} is not UTF-8"))
    }

    /// Appends the words of the target whose record starts at `offset` in the target data,
    /// space-separated, to `out`, and their word ids to `ids`; returns its token count.
    #[inline]
    pub(crate) fn append_target(
        &self,
        data: &[u8],
        offset: u64,
        out: &mut String,
        ids: &mut Vec<u32>,
    ) -> Result<usize, String> {
        let td = &data[self.target_data.clone()];
        if offset >= td.len() as u64 {
            return Err(format!(
                "target reference {offset} is outside the {}-byte target data",
                td.len()
            ));
        }
        let mut pos = offset as usize;
        let bad = || format!("the target at {offset} is cut off or malformed");
        let n = read_varint(td, &mut pos).ok_or_else(bad)?;
        if n == 0 || n > td.len() as u64 {
            return Err(format!("the target at {offset} has {n} tokens"));
        }
        for k in 0..n {
            let w = read_varint(td, &mut pos).ok_or_else(bad)?;
            if k > 0 {
                out.push(' ');
            }
            out.push_str(self.word(data, w)?);
            // `word` checked `w` against the vocabulary size, which the writer keeps below 2^32.
            ids.push(u32::try_from(w).map_err(|_| format!("word id {w} exceeds 32 bits"))?);
        }
        Ok(n as usize)
    }

    /// Byte range of block `b` in the file.
    pub(crate) fn block_range(&self, data: &[u8], b: u64) -> Result<Range<usize>, String> {
        if b >= self.blocks {
            return Err(format!("block {b} is outside the {} blocks", self.blocks));
        }
        let p = self.block_index + b as usize * 8;
        let (start, end) = (LE::read_u64(&data[p..]), LE::read_u64(&data[p + 8..]));
        if start > end || end > self.options.len() as u64 {
            return Err(format!(
                "block {b} spans {start}..{end}, outside the options section"
            ));
        }
        Ok(self.options.start + start as usize..self.options.start + end as usize)
    }

    pub(crate) fn target_data<'a>(&self, data: &'a [u8]) -> &'a [u8] {
        &data[self.target_data.clone()]
    }
}
