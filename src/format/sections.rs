//! The small sections, writer and reader side by side: vocabulary, codebooks, block index and
//! target index. Readers validate once at open and then index without further checks.

use std::ops::Range;

use byteorder::{ByteOrder, LittleEndian as LE};

use super::{score_mode, Meta, CODEBOOK_ENTRY_HEADER_LEN};
use crate::quantize::Codebook;

// ---- vocabulary: u64 word count, (count + 1) u32 byte offsets, the words' UTF-8 bytes ----

/// Encodes the vocabulary section from words in id order.
pub fn encode_vocabulary<'a>(words: impl ExactSizeIterator<Item = &'a str>) -> Vec<u8> {
    let n = words.len();
    let mut offsets = Vec::with_capacity(8 + 4 * (n + 1));
    offsets.extend_from_slice(&(n as u64).to_le_bytes());
    offsets.extend_from_slice(&0u32.to_le_bytes());
    let mut text = Vec::new();
    for w in words {
        text.extend_from_slice(w.as_bytes());
        offsets.extend_from_slice(&(text.len() as u32).to_le_bytes());
    }
    offsets.extend_from_slice(&text);
    offsets
}

/// The vocabulary, validated and copied out of the file once at open so that words are handed
/// out as `&str` without further checks.
#[derive(Clone, Debug, Default)]
pub struct Vocabulary {
    text: String,
    ends: Vec<u32>,
}

impl Vocabulary {
    /// Parses and validates a vocabulary section of `words` words.
    pub fn decode(b: &[u8], words: u64) -> Result<Vocabulary, String> {
        if b.len() < 8 || LE::read_u64(b) != words {
            return Err("the vocabulary section does not match the metadata".into());
        }
        let need = (words as usize)
            .checked_add(1)
            .and_then(|n| n.checked_mul(4))
            .filter(|&n| n <= b.len() - 8)
            .ok_or("the vocabulary's offset array is cut off")?;
        let offsets = &b[8..8 + need];
        let text = std::str::from_utf8(&b[8 + need..])
            .map_err(|_| "the vocabulary is not UTF-8".to_string())?;
        let mut ends = Vec::with_capacity(words as usize);
        let mut prev = LE::read_u32(offsets);
        if prev != 0 {
            return Err("the vocabulary's first offset is not 0".into());
        }
        for c in offsets[4..].chunks_exact(4) {
            let end = LE::read_u32(c);
            if end < prev || end as usize > text.len() || !text.is_char_boundary(end as usize) {
                return Err(format!(
                    "a vocabulary offset ({end}) is out of order or place"
                ));
            }
            ends.push(end);
            prev = end;
        }
        if prev as usize != text.len() {
            return Err("the vocabulary has unexplained trailing bytes".into());
        }
        Ok(Vocabulary {
            text: text.to_string(),
            ends,
        })
    }

    /// Number of words.
    pub fn len(&self) -> usize {
        self.ends.len()
    }

    /// Whether there are none.
    pub fn is_empty(&self) -> bool {
        self.ends.is_empty()
    }

    /// Word `id`.
    #[inline]
    pub fn word(&self, id: u32) -> Option<&str> {
        let end = *self.ends.get(id as usize)? as usize;
        let start = if id == 0 {
            0
        } else {
            self.ends[id as usize - 1] as usize
        };
        Some(&self.text[start..end])
    }
}

// ---- codebooks: per column an 8-byte header (mode, bits, domain, 0, u32 entries), f64s ----

/// Encodes the codebook section.
pub fn encode_codebooks(codebooks: &[Option<Codebook>], widths: &[(u8, u8)]) -> Vec<u8> {
    let mut section = Vec::new();
    for (book, &(mode, bits)) in codebooks.iter().zip(widths) {
        section.push(mode);
        section.push(bits);
        match book {
            Some(b) => {
                section.push(b.domain());
                section.push(0);
                section.extend_from_slice(&(b.len() as u32).to_le_bytes());
                for v in b.values() {
                    section.extend_from_slice(&v.to_le_bytes());
                }
            }
            None => section.extend_from_slice(&[super::domain::LINEAR, 0, 0, 0, 0, 0]),
        }
    }
    section
}

/// How one score column is decoded.
#[derive(Clone, Debug)]
pub enum Codec {
    /// Raw `f32`.
    F32,
    /// Codebook index of `width` bytes.
    Book {
        /// Bytes per code.
        width: usize,
        /// Values by code.
        values: Vec<f64>,
    },
}

impl Codec {
    /// Bytes per code.
    pub fn width(&self) -> usize {
        match self {
            Codec::F32 => 4,
            Codec::Book { width, .. } => *width,
        }
    }

    /// Decodes the value at the start of `b` (at least `width` bytes).
    #[inline]
    pub fn decode(&self, b: &[u8]) -> Option<f64> {
        match self {
            Codec::F32 => Some(f64::from(LE::read_f32(b))),
            Codec::Book { width: 1, values } => values.get(usize::from(b[0])).copied(),
            Codec::Book { values, .. } => values.get(usize::from(LE::read_u16(b))).copied(),
        }
    }
}

/// Parses the codebook section.
pub fn decode_codebooks(b: &[u8], meta: &Meta) -> Result<Vec<Codec>, String> {
    let mut pos = 0;
    let mut codecs = Vec::with_capacity(meta.scores.len());
    for name in &meta.scores {
        let h = b
            .get(pos..pos + CODEBOOK_ENTRY_HEADER_LEN)
            .ok_or_else(|| format!("the codebook section ends before column {name:?}"))?;
        pos += CODEBOOK_ENTRY_HEADER_LEN;
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
                    width: super::score_width(mode, bits),
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

// ---- block index: per block (u64 offset, u32 first-key offset, u32 crc32), then a final
// entry (u64 end of the blocks section, u32 end of the block keys, u32 0) ----

/// Bytes of one block-index entry.
pub const BLOCK_ENTRY_LEN: usize = 16;

/// Appends one block-index entry.
pub fn push_block_entry(index: &mut Vec<u8>, offset: u64, key_offset: u32, crc: u32) {
    index.extend_from_slice(&offset.to_le_bytes());
    index.extend_from_slice(&key_offset.to_le_bytes());
    index.extend_from_slice(&crc.to_le_bytes());
}

/// Where one block lies, its first key and its checksum.
#[derive(Clone, Debug)]
pub struct BlockEntry {
    /// Byte range in the blocks section.
    pub range: Range<usize>,
    /// Byte range of its first key in the block-keys section.
    pub key: Range<usize>,
    /// CRC-32 of the stored block.
    pub crc: u32,
}

/// Validates the block index against its neighbours: `blocks` entries plus the final one, with
/// offsets ascending to the ends of the two sections. Every later read indexes without checks.
pub fn check_block_index(
    index: &[u8],
    blocks: u64,
    keys_len: usize,
    blocks_len: usize,
) -> Result<(), String> {
    if index.len() as u64 != (blocks + 1) * BLOCK_ENTRY_LEN as u64 {
        return Err(format!(
            "the block index holds {} bytes; {blocks} blocks need {}",
            index.len(),
            (blocks + 1) * BLOCK_ENTRY_LEN as u64
        ));
    }
    let (mut off, mut key) = (0u64, 0u32);
    for (b, e) in index.chunks_exact(BLOCK_ENTRY_LEN).enumerate() {
        let (o, k) = (LE::read_u64(e), LE::read_u32(&e[8..]));
        let first = b == 0;
        if (first && (o != 0 || k != 0)) || o < off || k < key {
            return Err(format!("block {b}'s offsets are out of order"));
        }
        off = o;
        key = k;
    }
    if off != blocks_len as u64 || key as usize != keys_len {
        return Err("the block index does not end at the ends of its sections".into());
    }
    Ok(())
}

/// Entry `b` of a validated block index.
#[inline]
pub fn block_entry(index: &[u8], b: usize) -> BlockEntry {
    let e = &index[b * BLOCK_ENTRY_LEN..];
    let n = &e[BLOCK_ENTRY_LEN..];
    BlockEntry {
        range: LE::read_u64(e) as usize..LE::read_u64(n) as usize,
        key: LE::read_u32(&e[8..]) as usize..LE::read_u32(&n[8..]) as usize,
        crc: LE::read_u32(&e[12..]),
    }
}

// ---- target index: per group (u64 offset, u32 crc32), then u64 end of the targets section ----

/// Bytes of one target-index entry.
pub const GROUP_ENTRY_LEN: usize = 12;

/// Appends one target-index entry.
pub fn push_group_entry(index: &mut Vec<u8>, offset: u64, crc: u32) {
    index.extend_from_slice(&offset.to_le_bytes());
    index.extend_from_slice(&crc.to_le_bytes());
}

/// Validates the target index: `groups` entries then the end offset, ascending.
pub fn check_target_index(index: &[u8], groups: u64, data_len: usize) -> Result<(), String> {
    if index.len() as u64 != groups * GROUP_ENTRY_LEN as u64 + 8 {
        return Err(format!(
            "the target index holds {} bytes; {groups} groups need {}",
            index.len(),
            groups * GROUP_ENTRY_LEN as u64 + 8
        ));
    }
    let mut off = 0u64;
    for g in 0..=groups as usize {
        let o = LE::read_u64(&index[g * GROUP_ENTRY_LEN..]);
        if (g == 0 && o != 0) || o < off {
            return Err(format!("target group {g}'s offset is out of order"));
        }
        off = o;
    }
    if off != data_len as u64 {
        return Err("the target index does not end at the end of the targets".into());
    }
    Ok(())
}

/// Byte range and checksum of group `g` of a validated target index.
#[inline]
pub fn group_entry(index: &[u8], g: usize) -> (Range<usize>, u32) {
    let e = &index[g * GROUP_ENTRY_LEN..];
    let start = LE::read_u64(e) as usize;
    let end = LE::read_u64(&e[GROUP_ENTRY_LEN..]) as usize;
    (start..end, LE::read_u32(&e[8..]))
}

// ---- block skips (2.2, optional): `ceil(blocks / 64) + 1` u32 anchors (resume points before
// block 64 i; the last is the total), then one u8 per block (its points, at most 255), then per
// point 8 bytes: u32 rANS decoder state, u32 holding the byte position in the block's stream
// (bits 0..24) and the source rank (bits 24..32) whose options start there ----

/// Bytes of one resume point.
pub const SKIP_POINT_LEN: usize = 8;

/// Blocks per anchor of the block-skips section.
pub const SKIP_ANCHOR_BLOCKS: usize = 64;

/// Where decoding of a block can resume: before the options of source `rank`, with the rANS
/// decoder in `state` at byte `pos` of the block's stream (keys decoded from the start).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct SkipPoint {
    /// Source rank in the block (at least 1).
    pub rank: usize,
    /// Byte position in the stored block.
    pub pos: usize,
    /// Decoder state there.
    pub state: u32,
}

/// Largest byte position a resume point can hold.
pub const MAX_SKIP_POS: usize = (1 << 24) - 1;

fn skip_head(blocks: usize) -> (usize, usize) {
    let anchors = blocks.div_ceil(SKIP_ANCHOR_BLOCKS) + 1;
    (anchors, anchors * 4 + blocks)
}

/// Builds the block-skips section from each block's resume points (at most 255 per block,
/// ranks ascending, each position at most [`MAX_SKIP_POS`], rank below 256).
pub fn encode_block_skips(points: &[Vec<SkipPoint>]) -> Vec<u8> {
    let total: usize = points.iter().map(Vec::len).sum();
    let (_, head) = skip_head(points.len());
    let mut out = Vec::with_capacity(head + total * SKIP_POINT_LEN);
    let mut before = 0u32;
    for chunk in points.chunks(SKIP_ANCHOR_BLOCKS) {
        out.extend_from_slice(&before.to_le_bytes());
        before += chunk.iter().map(|p| p.len() as u32).sum::<u32>();
    }
    out.extend_from_slice(&before.to_le_bytes());
    out.extend(points.iter().map(|p| p.len() as u8));
    for p in points.iter().flatten() {
        out.extend_from_slice(&p.state.to_le_bytes());
        out.extend_from_slice(&((p.pos as u32) | ((p.rank as u32) << 24)).to_le_bytes());
    }
    out
}

/// Validates a block-skips section for `blocks` blocks of at most `per_block` sources: anchors
/// agreeing with the per-block counts and with the number of points the section holds, ranks
/// ascending within a block from 1 and below `per_block`, states normalized. Later reads index
/// without checks; positions are checked against the block when used.
pub fn check_block_skips(b: &[u8], blocks: u64, per_block: u32) -> Result<(), String> {
    let blocks = blocks as usize;
    let (anchors, head) = skip_head(blocks);
    let bad = |what: &str| Err(format!("the block-skips section is malformed: {what}"));
    if b.len() < head || (b.len() - head) % SKIP_POINT_LEN != 0 {
        return bad("its length");
    }
    let total = (b.len() - head) / SKIP_POINT_LEN;
    let counts = &b[anchors * 4..head];
    let mut at = 0usize;
    for i in 0..anchors {
        if LE::read_u32(&b[i * 4..]) as usize != at {
            return bad("its counts");
        }
        let chunk = counts
            .get(i * SKIP_ANCHOR_BLOCKS..((i + 1) * SKIP_ANCHOR_BLOCKS).min(blocks))
            .unwrap_or(&[]);
        for &n in chunk {
            let mut rank = 0;
            for p in at..at + usize::from(n) {
                if p >= total {
                    return bad("its counts");
                }
                let point = skip_point(b, head, p);
                if point.rank <= rank || point.rank >= per_block as usize {
                    return bad("a source rank");
                }
                if point.state < super::coder::RANS_L {
                    return bad("a coder state");
                }
                rank = point.rank;
            }
            at += usize::from(n);
        }
    }
    if at != total {
        return bad("its counts");
    }
    Ok(())
}

fn skip_point(b: &[u8], head: usize, p: usize) -> SkipPoint {
    let e = &b[head + p * SKIP_POINT_LEN..];
    let w = LE::read_u32(&e[4..]);
    SkipPoint {
        state: LE::read_u32(e),
        pos: (w & 0x00ff_ffff) as usize,
        rank: (w >> 24) as usize,
    }
}

/// The resume points of one block of a validated block-skips section (none without one).
#[derive(Clone, Copy, Debug, Default)]
pub struct SkipPoints<'a> {
    section: &'a [u8],
    head: usize,
    first: usize,
    end: usize,
}

impl<'a> SkipPoints<'a> {
    /// Block `b`'s points in a section validated for `blocks` blocks.
    pub fn of_block(section: &'a [u8], blocks: usize, b: usize) -> SkipPoints<'a> {
        if section.is_empty() {
            return SkipPoints::default();
        }
        let (anchors, head) = skip_head(blocks);
        let counts = &section[anchors * 4..head];
        let anchor = b / SKIP_ANCHOR_BLOCKS;
        let first = LE::read_u32(&section[anchor * 4..]) as usize
            + counts[anchor * SKIP_ANCHOR_BLOCKS..b]
                .iter()
                .map(|&n| usize::from(n))
                .sum::<usize>();
        SkipPoints {
            section,
            head,
            first,
            end: first + usize::from(counts[b]),
        }
    }

    /// Every point, ranks ascending.
    pub fn iter(&self) -> impl Iterator<Item = SkipPoint> + '_ {
        (self.first..self.end).map(|p| skip_point(self.section, self.head, p))
    }

    /// The last point at or before source `rank`.
    pub fn before(&self, rank: usize) -> Option<SkipPoint> {
        self.iter().take_while(|p| p.rank <= rank).last()
    }
}

// ---- group skips (2.2, optional): per target group 6 bytes, u32 rANS decoder state and u16
// byte position in the stored group, of the decoder before target `targets_per_group / 2` of
// the group; both 0 for a group without a point (too few targets, or the position past 65535) ----

/// Bytes of one group's resume point.
pub const GROUP_SKIP_LEN: usize = 6;

/// The target (index in its group) a group's resume point is before.
pub fn group_skip_target(targets_per_group: u32) -> usize {
    (targets_per_group / 2) as usize
}

/// Appends one group's resume point (`None`, or a position past 65535: the group has none).
pub fn push_group_skip(out: &mut Vec<u8>, point: Option<(u32, usize)>) {
    let (state, pos) = point
        .filter(|&(_, pos)| pos <= usize::from(u16::MAX))
        .unwrap_or((0, 0));
    out.extend_from_slice(&state.to_le_bytes());
    out.extend_from_slice(&(pos as u16).to_le_bytes());
}

/// Validates a group-skips section for `groups` groups: its length, and each state either 0
/// (with position 0) or normalized. Positions are checked against the group when used.
pub fn check_group_skips(b: &[u8], groups: u64) -> Result<(), String> {
    if b.len() as u64 != groups * GROUP_SKIP_LEN as u64 {
        return Err(format!(
            "the group-skips section holds {} bytes; {groups} groups need {}",
            b.len(),
            groups * GROUP_SKIP_LEN as u64
        ));
    }
    for e in b.chunks_exact(GROUP_SKIP_LEN) {
        let (state, pos) = (LE::read_u32(e), LE::read_u16(&e[4..]));
        if (state == 0 && pos != 0) || (state != 0 && state < super::coder::RANS_L) {
            return Err("the group-skips section is malformed: a coder state".into());
        }
    }
    Ok(())
}

/// Group `g`'s resume point `(state, position)` in a validated group-skips section (`None`
/// without a section or a point).
#[inline]
pub fn group_skip(b: &[u8], g: usize) -> Option<(u32, usize)> {
    let e = b.get(g * GROUP_SKIP_LEN..(g + 1) * GROUP_SKIP_LEN)?;
    let state = LE::read_u32(e);
    (state != 0).then(|| (state, usize::from(LE::read_u16(&e[4..]))))
}
