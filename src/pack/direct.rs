//! Pack's steps for the `direct` layout (byte layout in [`crate::format::direct`]): records and
//! target text streamed to temporary files in source order, then the hash over sources and
//! prefix keys, and the chunk checksums.

use std::fs::{File, OpenOptions};
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};

use crate::error::{Error, Result};
use crate::format::block::BlockShape;
use crate::format::direct::{self as layout, Record};
use crate::format::MAX_BLOCK_BYTES;

use super::blocks::PackedOption;

/// Pass 2's sink for the `direct` layout.
pub(super) struct DirectWriter<'a> {
    records: BufWriter<File>,
    records_path: PathBuf,
    records_len: u64,
    text: BufWriter<File>,
    text_path: PathBuf,
    text_len: u64,
    shape: &'a BlockShape,
    order_column: Option<usize>,
    /// (mixed hash, record offset) of every source.
    entries: Vec<(u64, u64)>,
    /// Prefix keys (a source's first words), each once, concatenated.
    prefixes: Vec<u8>,
    prefix_ends: Vec<usize>,
    previous: Vec<u8>,
    sources: u64,
    record: Vec<u8>,
    codes: Vec<u8>,
    ends: Vec<u32>,
    extras: Vec<u8>,
    max_record: usize,
    /// Bytes by component: keys, score codes per column, text ends, extras.
    pub sizes: Sizes,
    /// Options whose buffers can be reused.
    pub spare: Vec<PackedOption>,
}

/// Bytes of each part of the records, for the size report.
#[derive(Clone, Debug, Default)]
pub(super) struct Sizes {
    pub keys: u64,
    pub codes: Vec<u64>,
    pub ends: u64,
    pub extras: u64,
    pub text: u64,
    pub prefix_records: u64,
    pub hash: u64,
    pub chunks: u64,
}

/// What the direct writer produced: the three large sections (two as files) and the chunk
/// checksums.
pub(super) struct DirectSections {
    pub sources: u64,
    pub hash: Vec<u8>,
    pub records: (PathBuf, u64, u32),
    pub text: (PathBuf, u64, u32),
    pub chunks: Vec<u8>,
    pub max_record: usize,
    pub sizes: Sizes,
}

impl<'a> DirectWriter<'a> {
    pub fn new(temp: &Path, shape: &'a BlockShape, order_column: Option<usize>) -> Result<Self> {
        let create = |name: &str| -> Result<(BufWriter<File>, PathBuf)> {
            let path = temp.join(name);
            let file = File::create(&path).map_err(|e| Error::io(&path, "creating", e))?;
            Ok((BufWriter::with_capacity(1 << 20, file), path))
        };
        let (records, records_path) = create("records")?;
        let (text, text_path) = create("text")?;
        Ok(DirectWriter {
            records,
            records_path,
            records_len: 0,
            text,
            text_path,
            text_len: 0,
            shape,
            order_column,
            entries: Vec::new(),
            prefixes: Vec::new(),
            prefix_ends: Vec::new(),
            previous: Vec::new(),
            sources: 0,
            record: Vec::new(),
            codes: Vec::new(),
            ends: Vec::new(),
            extras: Vec::new(),
            max_record: 0,
            sizes: Sizes {
                codes: vec![0; shape.widths.len()],
                ..Sizes::default()
            },
            spare: Vec::new(),
        })
    }

    /// Sorts a source's options into the documented order and writes its record and text;
    /// empties `group`.
    pub fn add_source(&mut self, source: &[u8], group: &mut Vec<PackedOption>) -> Result<()> {
        if group.is_empty() {
            return Ok(());
        }
        if let Some(c) = self.order_column {
            // The group arrives in target byte order and the sort is stable (as in the compact
            // layout), so ties stay in target byte order.
            group.sort_by(|a, b| b.scores[c].total_cmp(&a.scores[c]));
        }
        // Prefix keys: the source's first words. Keys starting with `p ` are contiguous in
        // byte order, so one the previous source also continues was collected already.
        for (i, &b) in source.iter().enumerate() {
            if b == b' ' {
                let shared = self.previous.len() > i
                    && self.previous[..=i] == source[..=i]
                    && self.sources > 0;
                if !shared {
                    self.prefixes.extend_from_slice(&source[..i]);
                    self.prefix_ends.push(self.prefixes.len());
                }
            }
        }
        self.codes.clear();
        self.ends.clear();
        self.extras.clear();
        let mut text = 0u64;
        let text_start = self.text_len;
        for o in group.iter() {
            for (c, &code) in o.codes.iter().enumerate() {
                match self.shape.widths[c] {
                    1 => self.codes.push(code as u8),
                    2 => self.codes.extend_from_slice(&(code as u16).to_le_bytes()),
                    _ => self.codes.extend_from_slice(&code.to_le_bytes()),
                }
                self.sizes.codes[c] += self.shape.widths[c] as u64;
            }
            self.text
                .write_all(&o.target)
                .map_err(|e| Error::io(&self.text_path, "writing", e))?;
            text += o.target.len() as u64;
            let end = u32::try_from(text).map_err(|_| {
                Error::invalid(
                    "layout",
                    "a source's target phrases take over 4 GiB; use the compact layout",
                )
            })?;
            self.ends.push(end);
            layout::encode_extras(
                &mut self.extras,
                self.shape.alignment.then_some(&o.alignment[..]),
                &o.counts,
            );
        }
        self.text_len += text;
        self.record.clear();
        layout::encode_record(
            &mut self.record,
            source,
            self.sources,
            text_start,
            &self.codes,
            &self.ends,
            self.shape.alignment || self.shape.counts > 0,
            &self.extras,
        );
        let wide = self.ends.last().is_some_and(|&e| e > u32::from(u16::MAX));
        self.sizes.ends += (self.ends.len() * if wide { 4 } else { 2 }) as u64;
        self.sizes.extras += self.extras.len() as u64;
        self.sizes.text += text;
        self.sizes.keys += (self.record.len()
            - self.codes.len()
            - self.ends.len() * if wide { 4 } else { 2 }
            - self.extras.len()) as u64;
        if self.record.len() as u64 > MAX_BLOCK_BYTES {
            return Err(Error::invalid(
                "layout",
                format!(
                    "the record of {:?} takes {} bytes, over the {MAX_BLOCK_BYTES}-byte limit; \
                     use the compact layout",
                    String::from_utf8_lossy(source),
                    self.record.len()
                ),
            ));
        }
        self.max_record = self.max_record.max(self.record.len());
        self.entries
            .push((layout::hash_key(source), self.records_len));
        self.records
            .write_all(&self.record)
            .map_err(|e| Error::io(&self.records_path, "writing", e))?;
        self.records_len += self.record.len() as u64;
        self.previous.clear();
        self.previous.extend_from_slice(source);
        self.sources += 1;
        self.spare.append(group);
        Ok(())
    }

    /// Builds the hash over every source and prefix key (prefix keys that are not sources get
    /// a record of their own after the sources'), then the chunk checksums.
    pub fn finish(mut self) -> Result<DirectSections> {
        let werr = |p: &Path, e| Error::io(p, "writing", e);
        self.records
            .flush()
            .map_err(|e| werr(&self.records_path, e))?;
        self.text.flush().map_err(|e| werr(&self.text_path, e))?;
        drop(self.records);
        drop(self.text);
        let keys = self.entries.len() as u64 + self.prefix_ends.len() as u64;
        let mut slots = vec![0u64; layout::slot_count(keys) as usize];
        for &(mixed, offset) in &self.entries {
            layout::insert(&mut slots, mixed, layout::slot(offset, false, mixed));
        }
        drop(std::mem::take(&mut self.entries));
        let mapped = crate::mmap::map_file(&self.records_path)?;
        let written = mapped.bytes();
        let mut tail: Vec<u8> = Vec::new();
        let base = self.records_len;
        let key_at = |offset: u64, tail: &[u8]| -> Vec<u8> {
            // Records written by this process; a failure to parse one is a bug.
            let (bytes, at) = if offset < base {
                (written, offset as usize)
            } else {
                (tail, (offset - base) as usize)
            };
            let r = Record::parse(bytes, at, 0, false).expect("own record head");
            bytes[r.key..r.key + r.key_len].to_vec()
        };
        let mask = slots.len() - 1;
        let mut start = 0;
        for &end in &self.prefix_ends {
            let p = &self.prefixes[start..end];
            start = end;
            let mixed = layout::hash_key(p);
            let mut i = mixed as usize & mask;
            loop {
                let s = slots[i];
                if layout::slot_empty(s) {
                    let offset = base + tail.len() as u64;
                    layout::encode_prefix_record(&mut tail, p);
                    self.sizes.prefix_records = tail.len() as u64;
                    slots[i] = layout::slot(offset, true, mixed);
                    break;
                }
                if s & !((1 << layout::TAG_SHIFT) - 1) == layout::tag_of(mixed)
                    && key_at(layout::slot_offset(s), &tail) == p
                {
                    slots[i] |= layout::CONTINUES;
                    break;
                }
                i = (i + 1) & mask;
            }
        }
        drop(mapped);
        if base + tail.len() as u64 > layout::MAX_RECORDS_BYTES {
            return Err(Error::invalid(
                "layout",
                "the records exceed the direct layout's 1 TiB; use the compact layout",
            ));
        }
        let mut file = OpenOptions::new()
            .append(true)
            .open(&self.records_path)
            .map_err(|e| Error::io(&self.records_path, "opening", e))?;
        file.write_all(&tail)
            .map_err(|e| werr(&self.records_path, e))?;
        drop(file);
        let mut hash = Vec::with_capacity(slots.len() * 8);
        for s in &slots {
            hash.extend_from_slice(&s.to_le_bytes());
        }
        drop(slots);
        let mut chunks = Vec::new();
        layout::push_chunk_sums(&mut chunks, &hash);
        let sum_file = |path: &Path, chunks: &mut Vec<u8>| -> Result<(u64, u32)> {
            let m = crate::mmap::map_file(path)?;
            layout::push_chunk_sums(chunks, m.bytes());
            Ok((m.bytes().len() as u64, crc32fast::hash(m.bytes())))
        };
        let (records_len, records_crc) = sum_file(&self.records_path, &mut chunks)?;
        let (text_len, text_crc) = sum_file(&self.text_path, &mut chunks)?;
        self.sizes.hash = hash.len() as u64;
        self.sizes.chunks = chunks.len() as u64;
        Ok(DirectSections {
            sources: self.sources,
            hash,
            records: (self.records_path, records_len, records_crc),
            text: (self.text_path, text_len, text_crc),
            chunks,
            max_record: self.max_record,
            sizes: self.sizes,
        })
    }
}
