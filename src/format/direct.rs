//! The `direct` layout (format 2.1), writer and reader side by side: a table laid out to be
//! read in place, for speed, at several times the size of the `compact` layout.
//!
//! Four sections replace the compact layout's blocks, groups and their indexes:
//!
//! - **hash** (id 10): an open-addressing table of `u64` slots (a power of two of them, linear
//!   probing) over every source phrase and every *prefix key* (a source's first words, for the
//!   walk over a sentence's sub-phrases). A slot is `record offset + 1` in bits 0..40 (0: empty),
//!   the *continues* flag in bit 40 (some source starts with this key followed by a space) and
//!   the key's hash tag in bits 41..64.
//! - **records** (id 11): one record per source in byte order, then one per prefix key that is
//!   not a source. A record: varint key length, the key's bytes, varint `n << 1 | wide` (`n`
//!   options, 0 for a prefix key; `wide`: 4-byte text ends, else 2-byte); when `n > 0`: varint
//!   source ordinal, varint start of its text in the text section, then `n` options' score
//!   codes (fixed width, option-major), `n` little-endian text ends (cumulative, relative to the
//!   start), and when the table stores alignments or counts a varint byte length followed by,
//!   per option, varint link count, the links' two indexes, and each count.
//! - **text** (id 12): every option's target phrase as UTF-8, in record order.
//! - **chunks** (id 13): a CRC-32 per [`CHUNK`]-byte chunk of the hash, records and text
//!   sections, in that order. A reader checks a chunk's CRC (and, for text, that it is UTF-8)
//!   the first time it reads from it, so a flipped bit is reported, never read as an answer.
//!
//! A lookup hashes the phrase, probes the slots, compares the key in the record and reads the
//! options in place: a bounded amount of data (one record and its text).

use byteorder::{ByteOrder, LittleEndian as LE};

use super::varint::{read_varint, write_varint};

/// Bytes per checksummed chunk of the hash, records and text sections.
pub const CHUNK: usize = 4096;

/// Bits of a slot holding `record offset + 1`.
pub const OFFSET_BITS: u32 = 40;
/// The slot bit saying some source continues the key with a space.
pub const CONTINUES: u64 = 1 << OFFSET_BITS;
/// Shift of the tag in a slot.
pub const TAG_SHIFT: u32 = OFFSET_BITS + 1;
/// Largest records section a slot can address.
pub const MAX_RECORDS_BYTES: u64 = (1 << OFFSET_BITS) - 2;

/// FNV-1a 64 offset basis: the hash state of the empty key.
pub const HASH_START: u64 = 0xcbf2_9ce4_8422_2325;

/// Feeds `bytes` into an FNV-1a 64 hash state (so a key's hash extends word by word).
#[inline]
pub fn hash_update(mut h: u64, bytes: &[u8]) -> u64 {
    for &b in bytes {
        h = (h ^ u64::from(b)).wrapping_mul(0x0100_0000_01b3);
    }
    h
}

/// The final mix of a hash state: the slot is `mixed & (slots - 1)`, the tag `mixed >> 41`.
#[inline]
pub fn hash_finish(h: u64) -> u64 {
    let h = (h ^ (h >> 31)).wrapping_mul(0x9e37_79b9_7f4a_7c15);
    h ^ (h >> 32)
}

/// The mixed hash of a whole key.
#[inline]
pub fn hash_key(key: &[u8]) -> u64 {
    hash_finish(hash_update(HASH_START, key))
}

/// The tag bits of a mixed hash, in slot position.
#[inline]
pub fn tag_of(mixed: u64) -> u64 {
    (mixed >> TAG_SHIFT) << TAG_SHIFT
}

/// A slot for a record at `offset`.
#[inline]
pub fn slot(offset: u64, continues: bool, mixed: u64) -> u64 {
    (offset + 1) | if continues { CONTINUES } else { 0 } | tag_of(mixed)
}

/// The record offset of a non-empty slot.
#[inline]
pub fn slot_offset(s: u64) -> u64 {
    (s & ((1 << OFFSET_BITS) - 1)) - 1
}

/// Whether a slot is empty.
#[inline]
pub fn slot_empty(s: u64) -> bool {
    s & ((1 << OFFSET_BITS) - 1) == 0
}

/// Number of slots for `keys` keys: a power of two with at least a quarter of them empty.
pub fn slot_count(keys: u64) -> u64 {
    (keys + keys / 3 + 1).next_power_of_two().max(2)
}

/// Inserts a slot for a key of mixed hash `mixed` (slots: a power of two, not full).
pub fn insert(slots: &mut [u64], mixed: u64, value: u64) -> usize {
    let mask = slots.len() - 1;
    let mut i = mixed as usize & mask;
    while !slot_empty(slots[i]) {
        i = (i + 1) & mask;
    }
    slots[i] = value;
    i
}

/// Appends one record. `codes` holds `n × code bytes`; `ends` the `n` text ends relative to
/// `text_start`; `extras` the per-option alignments and counts (empty when the table has
/// neither, then not written at all when `with_extras` is false).
#[allow(clippy::too_many_arguments)]
pub fn encode_record(
    out: &mut Vec<u8>,
    key: &[u8],
    ordinal: u64,
    text_start: u64,
    codes: &[u8],
    ends: &[u32],
    with_extras: bool,
    extras: &[u8],
) {
    write_varint(out, key.len() as u64);
    out.extend_from_slice(key);
    let n = ends.len() as u64;
    let wide = ends.last().is_some_and(|&e| e > u32::from(u16::MAX));
    write_varint(out, n << 1 | u64::from(wide));
    if n == 0 {
        return;
    }
    write_varint(out, ordinal);
    write_varint(out, text_start);
    out.extend_from_slice(codes);
    for &e in ends {
        if wide {
            out.extend_from_slice(&e.to_le_bytes());
        } else {
            out.extend_from_slice(&(e as u16).to_le_bytes());
        }
    }
    if with_extras {
        write_varint(out, extras.len() as u64);
        out.extend_from_slice(extras);
    }
}

/// Appends a prefix key's record (no options).
pub fn encode_prefix_record(out: &mut Vec<u8>, key: &[u8]) {
    encode_record(out, key, 0, 0, &[], &[], false, &[]);
}

/// Appends one option's alignment and counts to a record's extras.
pub fn encode_extras(out: &mut Vec<u8>, alignment: Option<&[(u16, u16)]>, counts: &[u64]) {
    if let Some(links) = alignment {
        write_varint(out, links.len() as u64);
        for &(i, j) in links {
            write_varint(out, u64::from(i));
            write_varint(out, u64::from(j));
        }
    }
    for &c in counts {
        write_varint(out, c);
    }
}

/// The parsed head of a record: where each part lies, as offsets into the records section.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Record {
    /// Offset of the record.
    pub start: usize,
    /// Offset of the key.
    pub key: usize,
    /// Key length.
    pub key_len: usize,
    /// Options (0 for a prefix key).
    pub n: usize,
    /// Whether text ends take 4 bytes.
    pub wide: bool,
    /// Source ordinal.
    pub ordinal: u64,
    /// Start of the options' text in the text section.
    pub text_start: u64,
    /// Offset of the score codes.
    pub codes: usize,
    /// Offset of the text ends.
    pub ends: usize,
    /// Offset and length of the extras.
    pub extras: (usize, usize),
    /// Offset one past the record.
    pub end: usize,
}

impl Record {
    /// Parses the record at `at` of `records`; `code_bytes` per option, `with_extras` when the
    /// table stores alignments or counts. `Err` names what is malformed. Only the bytes the
    /// record spans are read: callers check the chunks of `at..` as far as [`Record::end`].
    pub fn parse(
        records: &[u8],
        at: usize,
        code_bytes: usize,
        with_extras: bool,
    ) -> Result<Record, &'static str> {
        let mut pos = at;
        let key_len = read_varint(records, &mut pos).ok_or("a key length")? as usize;
        let key = pos;
        pos = pos
            .checked_add(key_len)
            .filter(|&p| p <= records.len())
            .ok_or("a key runs past the records")?;
        let head = read_varint(records, &mut pos).ok_or("an option count")?;
        let n = head >> 1;
        let wide = head & 1 == 1;
        let mut r = Record {
            start: at,
            key,
            key_len,
            n: 0,
            wide,
            ordinal: 0,
            text_start: 0,
            codes: pos,
            ends: pos,
            extras: (pos, 0),
            end: pos,
        };
        if n == 0 {
            return if wide { Err("an option count") } else { Ok(r) };
        }
        r.ordinal = read_varint(records, &mut pos).ok_or("a source ordinal")?;
        r.text_start = read_varint(records, &mut pos).ok_or("a text start")?;
        let width = if wide { 4 } else { 2 };
        let fixed = (n as usize)
            .checked_mul(code_bytes + width)
            .filter(|&b| b <= records.len() - pos)
            .ok_or("options run past the records")?;
        r.n = n as usize;
        r.codes = pos;
        r.ends = pos + r.n * code_bytes;
        pos += fixed;
        if with_extras {
            let len = read_varint(records, &mut pos).ok_or("an extras length")? as usize;
            if len > records.len() - pos {
                return Err("extras run past the records");
            }
            r.extras = (pos, len);
            pos += len;
        } else {
            r.extras = (pos, 0);
        }
        r.end = pos;
        Ok(r)
    }

    /// Text end of option `i` (relative to [`Record::text_start`]).
    #[inline]
    pub fn text_end(&self, records: &[u8], i: usize) -> usize {
        if self.wide {
            LE::read_u32(&records[self.ends + 4 * i..]) as usize
        } else {
            usize::from(LE::read_u16(&records[self.ends + 2 * i..]))
        }
    }

    /// Total text bytes of the options.
    pub fn text_len(&self, records: &[u8]) -> usize {
        if self.n == 0 {
            0
        } else {
            self.text_end(records, self.n - 1)
        }
    }
}

/// Most bytes a record head can take before its key (a varint), and after it (three varints).
pub const HEAD_BYTES: usize = 10;

/// The CRC-32 of each [`CHUNK`]-byte chunk of `bytes`, appended to `out`.
pub fn push_chunk_sums(out: &mut Vec<u8>, bytes: &[u8]) {
    for c in bytes.chunks(CHUNK) {
        out.extend_from_slice(&crc32fast::hash(c).to_le_bytes());
    }
}

/// Chunks of a section of `len` bytes.
pub fn chunks_of(len: usize) -> usize {
    len.div_ceil(CHUNK)
}

/// Whether `chunk` (chunk `c` of a text section `text`) is UTF-8 on its own terms: the
/// characters that start in it (a chunk may begin with at most three continuation bytes of a
/// character that started before it, and its last character may run into the next chunk) form
/// valid UTF-8. Every chunk passing means the whole section is UTF-8.
pub fn text_chunk_is_utf8(text: &[u8], c: usize) -> bool {
    let start = char_start_at_or_after(text, c * CHUNK);
    let end = char_start_at_or_after(text, ((c + 1) * CHUNK).min(text.len()));
    match (start, end) {
        (Some(s), Some(e)) => s <= e && std::str::from_utf8(&text[s..e]).is_ok(),
        _ => false,
    }
}

/// The first position at or after `at` (within three bytes) that does not hold a UTF-8
/// continuation byte, or the end; `None` when four continuation bytes follow in a row.
fn char_start_at_or_after(text: &[u8], at: usize) -> Option<usize> {
    (at..(at + 4).min(text.len() + 1)).find(|&p| p == text.len() || !is_continuation(text[p]))
}

/// Whether `b` is a UTF-8 continuation byte.
#[inline]
pub fn is_continuation(b: u8) -> bool {
    b & 0xC0 == 0x80
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn records_round_trip_and_slots_hold_their_parts() {
        let mut out = vec![7u8];
        encode_record(
            &mut out,
            b"el barco",
            3,
            100,
            &[1, 2, 3, 4],
            &[4, 9],
            true,
            &[1, 0, 0, 5],
        );
        let r = Record::parse(&out, 1, 2, true).unwrap();
        assert_eq!(&out[r.key..r.key + r.key_len], b"el barco");
        assert_eq!((r.n, r.wide, r.ordinal, r.text_start), (2, false, 3, 100));
        assert_eq!(&out[r.codes..r.codes + 4], &[1, 2, 3, 4]);
        assert_eq!((r.text_end(&out, 0), r.text_end(&out, 1)), (4, 9));
        assert_eq!(&out[r.extras.0..r.extras.0 + r.extras.1], &[1, 0, 0, 5]);
        assert_eq!(r.end, out.len());
        let at = out.len();
        encode_prefix_record(&mut out, b"el");
        let p = Record::parse(&out, at, 2, true).unwrap();
        assert_eq!((p.n, p.end), (0, out.len()));
        // Cut short, a record is an error, not a panic.
        for cut in 1..at {
            let _ = Record::parse(&out[..cut], 1, 2, true);
        }
        let h = hash_key(b"el barco");
        let s = slot(12345, true, h);
        assert_eq!((slot_offset(s), s & CONTINUES != 0), (12345, true));
        assert_eq!(s & !((1 << TAG_SHIFT) - 1), tag_of(h));
        assert!(slot_empty(0) && !slot_empty(slot(0, false, h)));
        // The hash extends word by word.
        let part = hash_update(HASH_START, b"el");
        assert_eq!(hash_finish(hash_update(part, b" barco")), h);
    }

    #[test]
    fn text_chunks_check_utf8_across_their_borders() {
        // "é" (two bytes) straddling the first chunk border is fine; a lone continuation byte
        // is not.
        let mut text = vec![b'a'; CHUNK - 1];
        text.extend_from_slice("é".as_bytes());
        text.extend_from_slice(b"bc");
        assert!((0..chunks_of(text.len())).all(|c| text_chunk_is_utf8(&text, c)));
        let mut bad = text.clone();
        bad[10] = 0x80;
        assert!(!text_chunk_is_utf8(&bad, 0));
        let mut bad = text.clone();
        bad[CHUNK - 1] = b'x'; // the border's continuation byte has no lead any more
        assert!(!(0..2).all(|c| text_chunk_is_utf8(&bad, c)));
    }
}
