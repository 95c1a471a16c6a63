//! Reading tables in the `direct` layout (byte layout in [`crate::format::direct`]): a hash
//! probe finds a phrase's record, whose options are read in place.
//!
//! Every chunk of the hash, records and text sections is checked (CRC-32, and UTF-8 for text)
//! the first time anything is read from it; a bit per chunk remembers it. Nothing is decoded or
//! cached beyond that: the record is the cache.

use std::fmt;
use std::ops::Range;
use std::path::PathBuf;
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::{Arc, OnceLock};

use byteorder::{ByteOrder, LittleEndian as LE};
use rustc_hash::{FxHashMap, FxHashSet};

use crate::error::{Error, Result};
use crate::format::direct::{self as layout, Record, CHUNK};
use crate::format::read_varint;
use crate::format::sections::{Codec, Vocabulary};
use crate::format::Meta;
use crate::mmap::Storage;
use crate::table::Schema;

use super::options::{Body, Options, Span};
use super::VerifyReport;

/// The three chunked sections.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Part {
    Hash = 0,
    Records = 1,
    Text = 2,
}

impl Part {
    fn name(self) -> &'static str {
        match self {
            Part::Hash => "hash",
            Part::Records => "records",
            Part::Text => "text",
        }
    }
}

/// What every read of a `direct` table shares (options read in place hold it too).
pub(crate) struct Shared {
    path: PathBuf,
    storage: Arc<Storage>,
    schema: Arc<Schema>,
    codecs: Vec<Codec>,
    /// Per score column: its offset in an option's codes, its width, and the code limit to
    /// check (codes of a codebook smaller than its width allows).
    columns: Vec<(usize, usize, Option<usize>)>,
    code_bytes: usize,
    with_extras: bool,
    alignment: bool,
    counts: usize,
    sources: u64,
    vocabulary: Arc<Vocabulary>,
    words: OnceLock<FxHashMap<Box<str>, u32>>,
    sections: [Range<usize>; 3],
    sums: Range<usize>,
    /// First chunk number of each part in the chunk sums.
    first_chunk: [usize; 3],
    checked: Box<[AtomicU64]>,
    slots: usize,
}

impl Shared {
    /// Validates the direct layout's sections (sizes only: their chunks are checked when read).
    #[allow(clippy::too_many_arguments)]
    pub(super) fn open(
        path: PathBuf,
        storage: Arc<Storage>,
        meta: &Meta,
        schema: Arc<Schema>,
        codecs: Vec<Codec>,
        vocabulary: Arc<Vocabulary>,
        hash: Range<usize>,
        records: Range<usize>,
        text: Range<usize>,
        sums: Range<usize>,
    ) -> std::result::Result<Shared, String> {
        let slots = hash.len() / 8;
        if hash.len() % 8 != 0 || slots < 2 || !slots.is_power_of_two() {
            return Err(format!(
                "the hash section holds {} bytes, not a power of two (at least 2) of 8-byte slots",
                hash.len()
            ));
        }
        if records.len() as u64 > layout::MAX_RECORDS_BYTES {
            return Err("the records section is larger than slots can address".into());
        }
        let counts = [hash.len(), records.len(), text.len()].map(layout::chunks_of);
        let total: usize = counts.iter().sum();
        if sums.len() != 4 * total {
            return Err(format!(
                "the chunks section holds {} bytes; {total} chunks need {}",
                sums.len(),
                4 * total
            ));
        }
        let mut columns = Vec::with_capacity(codecs.len());
        let mut at = 0;
        for c in &codecs {
            let limit = match c {
                Codec::F32 => None,
                Codec::Book { width, values } => {
                    (values.len() < 1usize << (8 * width)).then_some(values.len())
                }
            };
            columns.push((at, c.width(), limit));
            at += c.width();
        }
        Ok(Shared {
            path,
            storage,
            schema,
            codecs,
            columns,
            code_bytes: at,
            with_extras: meta.alignment || !meta.counts.is_empty(),
            alignment: meta.alignment,
            counts: meta.counts.len(),
            sources: meta.sources,
            vocabulary,
            words: OnceLock::new(),
            sections: [hash, records, text],
            sums,
            first_chunk: [0, counts[0], counts[0] + counts[1]],
            checked: (0..total.div_ceil(64)).map(|_| AtomicU64::new(0)).collect(),
            slots,
        })
    }

    fn corrupt(&self, reason: impl Into<String>) -> Error {
        Error::corrupt(&self.path, reason)
    }

    #[inline]
    fn section(&self, part: Part) -> &[u8] {
        &self.storage.bytes()[self.sections[part as usize].clone()]
    }

    /// Checks every chunk of `part` that `range` touches, unless checked before.
    #[inline]
    fn ensure(&self, part: Part, range: Range<usize>) -> Result<()> {
        if range.is_empty() {
            return Ok(());
        }
        for c in range.start / CHUNK..=(range.end - 1) / CHUNK {
            let bit = self.first_chunk[part as usize] + c;
            if self.checked[bit / 64].load(Ordering::Relaxed) & (1 << (bit % 64)) == 0 {
                self.check_chunk(part, c)?;
            }
        }
        Ok(())
    }

    /// Checks chunk `c` of `part` (its CRC-32; UTF-8 for text) and remembers it.
    #[cold]
    fn check_chunk(&self, part: Part, c: usize) -> Result<()> {
        let bytes = self.section(part);
        let Some(chunk) = bytes.get(c * CHUNK..((c + 1) * CHUNK).min(bytes.len())) else {
            return Err(self.corrupt(format!(
                "a read beyond the {} section's end (chunk {c})",
                part.name()
            )));
        };
        let bit = self.first_chunk[part as usize] + c;
        let sums = &self.storage.bytes()[self.sums.clone()];
        if crc32fast::hash(chunk) != LE::read_u32(&sums[4 * bit..]) {
            return Err(self.corrupt(format!("{} chunk {c} fails its checksum", part.name())));
        }
        if part == Part::Text && !layout::text_chunk_is_utf8(bytes, c) {
            return Err(self.corrupt(format!("text chunk {c} is not UTF-8")));
        }
        self.checked[bit / 64].fetch_or(1 << (bit % 64), Ordering::Relaxed);
        Ok(())
    }

    #[inline]
    fn slot(&self, i: usize) -> Result<u64> {
        self.ensure(Part::Hash, 8 * i..8 * i + 8)?;
        Ok(LE::read_u64(&self.section(Part::Hash)[8 * i..]))
    }

    /// The record at `offset`, its bytes checked.
    fn record(&self, offset: usize) -> Result<Record> {
        let records = self.section(Part::Records);
        match Record::parse(records, offset, self.code_bytes, self.with_extras) {
            Ok(r) => {
                // The parse read only bytes of `offset..end`: checked now, they were sound.
                self.ensure(Part::Records, offset..r.end)?;
                Ok(r)
            }
            Err(what) => {
                // Damage shows as a checksum failure of the chunk(s) the record starts in.
                let end = records.len().min(offset.saturating_add(2 * CHUNK));
                self.ensure(Part::Records, offset.min(end)..end)?;
                Err(self.corrupt(format!(
                    "the record at {offset} of the records section is malformed: {what}"
                )))
            }
        }
    }

    fn key_of(&self, r: &Record) -> &[u8] {
        &self.section(Part::Records)[r.key..r.key + r.key_len]
    }

    /// The record of `key` (its mixed hash given) and its continues flag.
    #[inline]
    fn find(&self, mixed: u64, key: &[u8]) -> Result<Option<(Record, bool)>> {
        let mask = self.slots - 1;
        let tag = layout::tag_of(mixed);
        let mut i = mixed as usize & mask;
        for _ in 0..self.slots {
            let s = self.slot(i)?;
            if layout::slot_empty(s) {
                return Ok(None);
            }
            if layout::tag_of(s) == tag {
                let r = self.record(layout::slot_offset(s) as usize)?;
                if self.key_of(&r) == key {
                    return Ok(Some((r, s & layout::CONTINUES != 0)));
                }
            }
            i = (i + 1) & mask;
        }
        Ok(None)
    }

    /// The options of record `r`, read in place after checking their text and codes.
    fn options(self: &Arc<Self>, r: &Record) -> Result<Options> {
        let records = self.section(Part::Records);
        let text = self.section(Part::Text);
        let len = r.text_len(records);
        let start = usize::try_from(r.text_start)
            .ok()
            .filter(|&s| s <= text.len() && len <= text.len() - s)
            .ok_or_else(|| self.corrupt("a record's text lies outside the text section"))?;
        self.ensure(Part::Text, start..start + len)?;
        let boundary = |p: usize| p >= text.len() || !layout::is_continuation(text[p]);
        let mut prev = 0;
        let mut ok = boundary(start);
        for i in 0..r.n {
            let e = r.text_end(records, i);
            ok &= e >= prev && boundary(start + e);
            prev = e;
        }
        if !ok {
            return Err(self.corrupt(format!(
                "the text ends of the record at {} are out of order or place",
                r.key
            )));
        }
        for &(at, width, limit) in &self.columns {
            if let Some(limit) = limit {
                let w = self.code_bytes;
                let bad = (0..r.n).any(|i| {
                    let p = r.codes + i * w + at;
                    let code = if width == 1 {
                        usize::from(records[p])
                    } else {
                        usize::from(LE::read_u16(&records[p..]))
                    };
                    code >= limit
                });
                if bad {
                    return Err(self.corrupt("a score code is outside its codebook"));
                }
            }
        }
        let base = self.sections[1].start;
        let view = View {
            shared: self.clone(),
            n: r.n,
            wide: r.wide,
            codes: base + r.codes,
            ends: base + r.ends,
            text: self.sections[2].start + start,
            extras: (base + r.extras.0, r.extras.1),
        };
        let decoded = if self.with_extras {
            Some(view.decode_checked().map_err(|what| {
                self.corrupt(format!("the record at {} has malformed {what}", r.start))
            })?)
        } else {
            None
        };
        Ok(Options::direct(view, decoded))
    }

    fn words(&self) -> &FxHashMap<Box<str>, u32> {
        self.words.get_or_init(|| {
            (0..self.vocabulary.len() as u32)
                .filter_map(|id| Some((Box::from(self.vocabulary.word(id)?), id)))
                .collect()
        })
    }

    /// The options of `source`, read in place.
    pub(super) fn lookup_into(self: &Arc<Self>, source: &str, out: &mut Options) -> Result<bool> {
        let key = source.as_bytes();
        match self.find(layout::hash_key(key), key)? {
            Some((r, _)) if r.n > 0 => {
                *out = self.options(&r)?;
                Ok(true)
            }
            _ => {
                out.clear();
                Ok(false)
            }
        }
    }

    /// The source ordinal of `source`.
    pub(super) fn source_ordinal(&self, source: &str) -> Result<Option<u64>> {
        let key = source.as_bytes();
        match self.find(layout::hash_key(key), key)? {
            Some((r, _)) if r.n > 0 => {
                if r.ordinal >= self.sources {
                    return Err(self.corrupt("a source ordinal is out of range"));
                }
                Ok(Some(r.ordinal))
            }
            _ => Ok(None),
        }
    }

    /// Every sub-phrase of `tokens` of at most `max_len` tokens in the table; each start's
    /// walk stops when the slot of the phrase so far says no source continues it.
    pub(super) fn spans(self: &Arc<Self>, tokens: &[&str], max_len: usize) -> Result<Vec<Span>> {
        let mut out = Vec::new();
        let mut key: Vec<u8> = Vec::new();
        for start in 0..tokens.len() {
            key.clear();
            let mut h = layout::HASH_START;
            for (end, token) in tokens.iter().enumerate().skip(start).take(max_len) {
                if end > start {
                    key.push(b' ');
                    h = layout::hash_update(h, b" ");
                }
                key.extend_from_slice(token.as_bytes());
                h = layout::hash_update(h, token.as_bytes());
                let Some((r, continues)) = self.find(layout::hash_finish(h), &key)? else {
                    break;
                };
                if r.n > 0 {
                    out.push(Span {
                        start,
                        end: end + 1,
                        options: self.options(&r)?,
                    });
                }
                if !continues {
                    break;
                }
            }
        }
        Ok(out)
    }

    /// A cursor over the sources in byte order.
    pub(super) fn cursor(self: &Arc<Self>) -> Cursor {
        Cursor {
            shared: self.clone(),
            offset: 0,
            done: 0,
            previous: Vec::new(),
        }
    }

    /// Checks every chunk, every record, the hash and the prefix flags.
    pub(super) fn verify(self: &Arc<Self>, report: &mut VerifyReport) -> Result<()> {
        for part in [Part::Hash, Part::Records, Part::Text] {
            let len = self.section(part).len();
            for c in 0..layout::chunks_of(len) {
                self.check_chunk(part, c)?;
                report.blocks += 1;
            }
        }
        let words = self.words();
        let mut cursor = self.cursor();
        let mut keys: Vec<(usize, bool)> = Vec::new();
        let mut prefixes: FxHashSet<&[u8]> = FxHashSet::default();
        let mut targets: FxHashSet<Box<str>> = FxHashSet::default();
        let records = self.section(Part::Records);
        while let Some((r, options)) = cursor.next_record()? {
            let key = self.key_of(&r);
            for (i, &b) in key.iter().enumerate() {
                if b == b' ' {
                    prefixes.insert(&key[..i]);
                }
            }
            for o in options.iter() {
                if o.target().split(' ').any(|w| !words.contains_key(w)) {
                    return Err(self.corrupt(format!(
                        "the target {:?} has a word outside the vocabulary",
                        o.target()
                    )));
                }
                targets.insert(Box::from(o.target()));
                report.pairs += 1;
            }
            keys.push((r.start, true));
        }
        let mut offset = cursor.offset;
        while offset < records.len() {
            let r = self.record(offset)?;
            if r.n != 0 {
                return Err(self.corrupt(format!(
                    "the record at {offset} has options but follows the last source"
                )));
            }
            keys.push((offset, false));
            offset = r.end;
        }
        let mut filled = 0usize;
        for i in 0..self.slots {
            filled += usize::from(!layout::slot_empty(self.slot(i)?));
        }
        if filled != keys.len() {
            return Err(self.corrupt(format!(
                "the hash holds {filled} keys, the records {}",
                keys.len()
            )));
        }
        for &(offset, source) in &keys {
            let r = self.record(offset)?;
            let key = self.key_of(&r);
            let found = self.find(layout::hash_key(key), key)?;
            let Some((f, continues)) = found.filter(|(f, _)| f.key == r.key) else {
                return Err(
                    self.corrupt(format!("the hash does not lead to the record at {offset}"))
                );
            };
            let _ = f;
            let expected = prefixes.contains(key);
            if continues != expected || (!source && !expected) {
                return Err(self.corrupt(format!(
                    "the record at {offset} has a wrong prefix flag or no reason to exist"
                )));
            }
        }
        report.targets = targets.len() as u64;
        Ok(())
    }
}

/// Walks the sources' records in byte order.
pub(crate) struct Cursor {
    shared: Arc<Shared>,
    offset: usize,
    done: u64,
    previous: Vec<u8>,
}

impl Cursor {
    /// The next source's record and options; `None` after the last source.
    fn next_record(&mut self) -> Result<Option<(Record, Options)>> {
        let s = &self.shared;
        if self.done == s.sources {
            return Ok(None);
        }
        let r = s.record(self.offset)?;
        if r.n == 0 || r.ordinal != self.done {
            return Err(s.corrupt(format!(
                "the record at {} is not source {}",
                self.offset, self.done
            )));
        }
        let key = s.key_of(&r);
        if self.done > 0 && key <= self.previous.as_slice() {
            return Err(s.corrupt(format!("the source at {} is out of order", self.offset)));
        }
        self.previous.clear();
        self.previous.extend_from_slice(key);
        let options = s.options(&r)?;
        self.offset = r.end;
        self.done += 1;
        Ok(Some((r, options)))
    }

    /// The next source phrase and its options.
    pub(super) fn next_source(&mut self) -> Result<Option<(String, Options)>> {
        let Some((r, options)) = self.next_record()? else {
            return Ok(None);
        };
        let key = std::str::from_utf8(self.shared.key_of(&r))
            .map_err(|_| self.shared.corrupt("a source phrase is not UTF-8"))?;
        Ok(Some((key.to_string(), options)))
    }
}

/// A record's options in place (see [`Options`]).
#[derive(Clone)]
pub(crate) struct View {
    shared: Arc<Shared>,
    n: usize,
    wide: bool,
    /// File offsets of the codes, the text ends and the text.
    codes: usize,
    ends: usize,
    text: usize,
    extras: (usize, usize),
}

impl fmt::Debug for View {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("View")
            .field("options", &self.n)
            .field("text", &self.text)
            .finish()
    }
}

impl View {
    pub(super) fn len(&self) -> usize {
        self.n
    }

    pub(super) fn schema(&self) -> &Schema {
        &self.shared.schema
    }

    #[inline]
    fn end(&self, data: &[u8], i: usize) -> usize {
        if self.wide {
            LE::read_u32(&data[self.ends + 4 * i..]) as usize
        } else {
            usize::from(LE::read_u16(&data[self.ends + 2 * i..]))
        }
    }

    /// Byte range of option `i`'s target in [`View::text`].
    #[inline]
    pub(super) fn range(&self, i: usize) -> Range<usize> {
        let data = self.shared.storage.bytes();
        let start = if i == 0 { 0 } else { self.end(data, i - 1) };
        start..self.end(data, i)
    }

    /// The text of every option, copied out of the file (checked as UTF-8 with its chunks,
    /// its ends on character boundaries when the options were read).
    pub(super) fn text(&self) -> Box<str> {
        let data = self.shared.storage.bytes();
        let len = if self.n == 0 {
            0
        } else {
            self.end(data, self.n - 1)
        };
        Box::from(std::str::from_utf8(&data[self.text..self.text + len]).unwrap_or(""))
    }

    /// The target text of option `i`.
    pub(super) fn target(&self, i: usize) -> &str {
        let data = self.shared.storage.bytes();
        let r = self.range(i);
        std::str::from_utf8(&data[self.text + r.start..self.text + r.end]).unwrap_or("")
    }

    /// Score column `c` of option `i`.
    #[inline]
    pub(super) fn score(&self, i: usize, c: usize) -> Option<f64> {
        let s = &*self.shared;
        let codec = s.codecs.get(c)?;
        let at = self.codes + i * s.code_bytes + s.columns[c].0;
        codec.decode(&s.storage.bytes()[at..at + codec.width()])
    }

    /// Every option decoded into buffers (target ids, scores, alignments, counts); cannot fail
    /// for tables without alignments and counts (whose extras are decoded, and checked, when
    /// the options are read).
    pub(super) fn decode(&self) -> Body {
        self.decode_checked().unwrap_or_default()
    }

    fn decode_checked(&self) -> std::result::Result<Body, &'static str> {
        let s = &*self.shared;
        let mut b = Body::for_schema(&s.schema);
        let words = s.words();
        let data = s.storage.bytes();
        let extras = &data[self.extras.0..self.extras.0 + self.extras.1];
        let mut pos = 0;
        let mut next = || read_varint(extras, &mut pos).ok_or("alignments or counts");
        for i in 0..self.n {
            let t = self.target(i);
            b.text.push_str(t);
            b.ends.push(b.text.len() as u32);
            // A word missing from the vocabulary (possible only in a file that passes its
            // checksums without being written by baler; `verify` reports it) has no id.
            b.ids.extend(
                t.split(' ')
                    .map(|w| words.get(w).copied().unwrap_or(u32::MAX)),
            );
            b.id_ends.push(b.ids.len() as u32);
            for c in 0..s.codecs.len() {
                b.scores.push(self.score(i, c).unwrap_or(f64::NAN));
            }
            if s.alignment {
                let links = next()?;
                if links > u64::from(u16::MAX) * 8 {
                    return Err("alignments");
                }
                for _ in 0..links {
                    let (Ok(x), Ok(y)) = (u16::try_from(next()?), u16::try_from(next()?)) else {
                        return Err("alignments");
                    };
                    b.links.push((x, y));
                }
                b.link_ends.push(b.links.len() as u32);
            }
            for _ in 0..s.counts {
                b.counts.push(next()?);
            }
        }
        if pos != extras.len() {
            return Err("alignments or counts (trailing bytes)");
        }
        Ok(b)
    }
}
