//! Byte layout of baler's n-gram language model file (`.balm`), self-contained: its own magic,
//! version and CRC-32 footer. Written by [`crate::lm`] and read back through a memory map.
//!
//! All integers and floats are little-endian; every array starts on a 4-byte boundary.
//!
//! ```text
//! header   magic "BALM\r\n\x1a\0" (8) | version u32 | order u32 | vocabulary size V u32 | 0 u32
//!          | entries per order, u64 × order
//! vocab    string ends u32 × V | UTF-8 words, padded with zeros to 4 bytes
//! order 1  log10 prob f32 × V | log10 back-off f32 × V | first child u32 × (V + 1)    (order > 1)
//! order n  word u32 × c | log10 prob f32 × c | back-off f32 × c | first child u32 × (c + 1)
//! order N  word u32 × c | log10 prob f32 × c
//! footer   CRC-32 (IEEE) of every byte before it, u32
//! ```
//!
//! The entries of order n + 1 are a forward trie: entry `i` of order n owns the entries
//! `child[i]..child[i+1]` of order n + 1, sorted by word id. Order-1 entries are indexed by word
//! id. Back-off weights of entries that never occur as a context are 0.

use crate::error::{Error, Result};
use std::io::{self, Write};
use std::path::Path;

/// The first eight bytes of a language model file.
pub const LM_MAGIC: [u8; 8] = *b"BALM\r\n\x1a\0";
/// The layout version; readers refuse others.
pub const LM_VERSION: u32 = 1;
/// Highest order a file may declare.
pub const LM_MAX_ORDER: usize = 9;

/// The arrays of one order, as the writer hands them over.
#[derive(Clone, Debug, Default)]
pub struct OrderArrays {
    /// Word id of each entry (ignored for order 1, whose entries are the word ids).
    pub words: Vec<u32>,
    /// log10 probability of each entry.
    pub probs: Vec<f32>,
    /// log10 back-off weight (empty for the highest order).
    pub backoffs: Vec<f32>,
    /// `entries + 1` child starts into the next order (empty for the highest order).
    pub children: Vec<u32>,
}

/// A writer that keeps the CRC-32 of everything written through it, in chunks of its buffer.
struct Checked<'a> {
    out: &'a mut dyn Write,
    crc: crc32fast::Hasher,
    buf: Vec<u8>,
    written: usize,
}

impl Checked<'_> {
    fn put(&mut self, bytes: &[u8]) -> io::Result<()> {
        self.buf.extend_from_slice(bytes);
        self.written += bytes.len();
        if self.buf.len() >= 1 << 16 {
            self.drain()?;
        }
        Ok(())
    }

    fn drain(&mut self) -> io::Result<()> {
        self.crc.update(&self.buf);
        self.out.write_all(&self.buf)?;
        self.buf.clear();
        Ok(())
    }

    fn pad4(&mut self) -> io::Result<()> {
        while self.written % 4 != 0 {
            self.put(&[0])?;
        }
        Ok(())
    }

    fn words(&mut self, xs: impl IntoIterator<Item = [u8; 4]>) -> io::Result<()> {
        for x in xs {
            self.put(&x)?;
        }
        Ok(())
    }
}

/// Serialises a model: vocabulary (id order) and one [`OrderArrays`] per order.
pub fn encode(vocab: &[String], orders: &[OrderArrays]) -> Vec<u8> {
    let mut out = Vec::new();
    write(&mut out, vocab, orders).expect("writing to memory cannot fail");
    out
}

/// Writes the same bytes as [`encode`] to `out` as it goes, holding no copy of the model.
pub fn write(out: &mut dyn Write, vocab: &[String], orders: &[OrderArrays]) -> io::Result<()> {
    let mut w = Checked {
        out,
        crc: crc32fast::Hasher::new(),
        buf: Vec::with_capacity(1 << 16),
        written: 0,
    };
    w.put(&LM_MAGIC)?;
    w.put(&LM_VERSION.to_le_bytes())?;
    w.put(&(orders.len() as u32).to_le_bytes())?;
    w.put(&(vocab.len() as u32).to_le_bytes())?;
    w.put(&0u32.to_le_bytes())?;
    for o in orders {
        w.put(&(o.probs.len() as u64).to_le_bytes())?;
    }
    let mut end = 0u32;
    for word in vocab {
        end += word.len() as u32;
        w.put(&end.to_le_bytes())?;
    }
    for word in vocab {
        w.put(word.as_bytes())?;
    }
    w.pad4()?;
    for (n, o) in orders.iter().enumerate() {
        if n > 0 {
            w.words(o.words.iter().map(|x| x.to_le_bytes()))?;
        }
        w.words(o.probs.iter().map(|x| x.to_le_bytes()))?;
        if n + 1 < orders.len() {
            w.words(o.backoffs.iter().map(|x| x.to_le_bytes()))?;
            w.words(o.children.iter().map(|x| x.to_le_bytes()))?;
        }
    }
    w.drain()?;
    let crc = w.crc.finalize();
    w.out.write_all(&crc.to_le_bytes())
}

/// A 4-byte little-endian array inside the file.
#[derive(Clone, Copy, Debug, Default)]
struct Array {
    start: usize,
    len: usize,
}

/// Where one order's arrays lie.
#[derive(Clone, Copy, Debug, Default)]
struct OrderLayout {
    entries: usize,
    words: Array,
    probs: Array,
    backoffs: Array,
    children: Array,
}

/// A validated view of a model file's bytes: every array bound-checked and every child range
/// checked to be increasing and inside the next order, so lookups cannot leave the file.
#[derive(Clone, Debug)]
pub struct LmLayout {
    order: usize,
    vocab_ends: Array,
    vocab_text: usize,
    orders: Vec<OrderLayout>,
}

#[inline]
fn u32_at(bytes: &[u8], at: usize) -> u32 {
    u32::from_le_bytes(bytes[at..at + 4].try_into().expect("4 bytes"))
}

impl LmLayout {
    /// Checks magic, version, sizes, checksum and the trie's child ranges.
    pub fn parse(bytes: &[u8], path: &Path) -> Result<LmLayout> {
        let bad = |reason: String| Error::corrupt(path, reason);
        if bytes.len() < 28 || bytes[..8] != LM_MAGIC {
            return Err(bad("not a baler language model (bad magic)".into()));
        }
        let version = u32_at(bytes, 8);
        if version != LM_VERSION {
            return Err(bad(format!(
                "language model layout version {version}, this baler reads {LM_VERSION}"
            )));
        }
        let body = bytes.len() - 4;
        let stored = u32_at(bytes, body);
        let actual = crc32fast::hash(&bytes[..body]);
        if stored != actual {
            return Err(bad(format!(
                "checksum mismatch (stored {stored:08x}, computed {actual:08x})"
            )));
        }
        let order = u32_at(bytes, 12) as usize;
        let vocab = u32_at(bytes, 16) as usize;
        if order == 0 || order > LM_MAX_ORDER {
            return Err(bad(format!("implausible order {order}")));
        }
        let mut pos = 24 + 8 * order;
        if pos > body {
            return Err(bad("header cut off".into()));
        }
        let mut counts = Vec::with_capacity(order);
        for n in 0..order {
            let c = u64::from_le_bytes(bytes[24 + 8 * n..32 + 8 * n].try_into().expect("8"));
            counts.push(usize::try_from(c).map_err(|_| bad("entry count too large".into()))?);
        }
        if counts[0] != vocab {
            return Err(bad("order 1 does not cover the vocabulary".into()));
        }
        let mut take = |len: usize, what: &str| -> Result<Array> {
            let bytes_needed = len
                .checked_mul(4)
                .filter(|&b| pos + b <= body)
                .ok_or_else(|| bad(format!("{what} array runs past the end of the file")))?;
            let a = Array { start: pos, len };
            pos += bytes_needed;
            Ok(a)
        };
        let vocab_ends = take(vocab, "vocabulary")?;
        let text_len = if vocab == 0 {
            0
        } else {
            u32_at(bytes, vocab_ends.start + 4 * (vocab - 1)) as usize
        };
        let vocab_text = pos;
        if vocab_text + text_len > body {
            return Err(bad("vocabulary text runs past the end of the file".into()));
        }
        let mut prev = 0;
        for i in 0..vocab {
            let e = u32_at(bytes, vocab_ends.start + 4 * i) as usize;
            if e < prev || std::str::from_utf8(&bytes[vocab_text + prev..vocab_text + e]).is_err() {
                return Err(bad(format!("vocabulary word {i} is malformed")));
            }
            prev = e;
        }
        pos = (vocab_text + text_len).div_ceil(4) * 4;
        let mut take = |len: usize, what: &str| -> Result<Array> {
            let bytes_needed = len
                .checked_mul(4)
                .filter(|&b| pos + b <= body)
                .ok_or_else(|| bad(format!("{what} array runs past the end of the file")))?;
            let a = Array { start: pos, len };
            pos += bytes_needed;
            Ok(a)
        };
        let mut orders = Vec::with_capacity(order);
        for (n, &c) in counts.iter().enumerate() {
            let mut o = OrderLayout {
                entries: c,
                ..OrderLayout::default()
            };
            if n > 0 {
                o.words = take(c, "word")?;
            }
            o.probs = take(c, "probability")?;
            if n + 1 < order {
                o.backoffs = take(c, "back-off")?;
                o.children = take(c + 1, "child")?;
            }
            orders.push(o);
        }
        if pos != body {
            return Err(bad(format!("{} unexplained bytes", body - pos)));
        }
        // The trie's ranges must be increasing and end exactly at the next order's size, and
        // every word id must be in the vocabulary.
        for n in 0..order {
            let o = orders[n];
            for i in 0..if n > 0 { o.entries } else { 0 } {
                if u32_at(bytes, o.words.start + 4 * i) as usize >= vocab {
                    return Err(bad(format!(
                        "order {} entry {i} has an unknown word",
                        n + 1
                    )));
                }
            }
            if n + 1 < order {
                let mut prev = 0;
                for i in 0..=o.entries {
                    let c = u32_at(bytes, o.children.start + 4 * i) as usize;
                    if c < prev || (i == 0 && c != 0) {
                        return Err(bad(format!("order {} child ranges go backwards", n + 1)));
                    }
                    prev = c;
                }
                if prev != orders[n + 1].entries {
                    return Err(bad(format!(
                        "order {} child ranges do not cover order {}",
                        n + 1,
                        n + 2
                    )));
                }
            }
        }
        Ok(LmLayout {
            order,
            vocab_ends,
            vocab_text,
            orders,
        })
    }

    /// The model's order.
    pub fn order(&self) -> usize {
        self.order
    }

    /// Vocabulary size.
    pub fn vocab_len(&self) -> usize {
        self.vocab_ends.len
    }

    /// Entries of order `n` (1-based).
    pub fn entries(&self, n: usize) -> usize {
        self.orders[n - 1].entries
    }

    /// Word `id` (valid ids only).
    pub fn word<'b>(&self, bytes: &'b [u8], id: u32) -> &'b str {
        let i = id as usize;
        let end = u32_at(bytes, self.vocab_ends.start + 4 * i) as usize;
        let start = if i == 0 {
            0
        } else {
            u32_at(bytes, self.vocab_ends.start + 4 * (i - 1)) as usize
        };
        std::str::from_utf8(&bytes[self.vocab_text + start..self.vocab_text + end])
            .expect("checked by parse")
    }

    /// Word id of entry `i` of order `n` (for order 1, `i` itself).
    #[inline]
    pub fn entry_word(&self, bytes: &[u8], n: usize, i: usize) -> u32 {
        if n == 1 {
            return i as u32;
        }
        u32_at(bytes, self.orders[n - 1].words.start + 4 * i)
    }

    /// log10 probability of entry `i` of order `n`.
    #[inline]
    pub fn prob(&self, bytes: &[u8], n: usize, i: usize) -> f32 {
        f32::from_bits(u32_at(bytes, self.orders[n - 1].probs.start + 4 * i))
    }

    /// log10 back-off weight of entry `i` of order `n` (0 for the highest order).
    #[inline]
    pub fn backoff(&self, bytes: &[u8], n: usize, i: usize) -> f32 {
        if n == self.order {
            return 0.0;
        }
        f32::from_bits(u32_at(bytes, self.orders[n - 1].backoffs.start + 4 * i))
    }

    /// The entry of order `n + 1` under entry `parent` of order `n` whose word is `word`.
    #[inline]
    pub fn child(&self, bytes: &[u8], n: usize, parent: usize, word: u32) -> Option<usize> {
        if n >= self.order {
            return None;
        }
        let o = &self.orders[n - 1];
        let (mut lo, mut hi) = (
            u32_at(bytes, o.children.start + 4 * parent) as usize,
            u32_at(bytes, o.children.start + 4 * (parent + 1)) as usize,
        );
        let words = self.orders[n].words.start;
        while lo < hi {
            let mid = (lo + hi) / 2;
            let w = u32_at(bytes, words + 4 * mid);
            match w.cmp(&word) {
                std::cmp::Ordering::Less => lo = mid + 1,
                std::cmp::Ordering::Greater => hi = mid,
                std::cmp::Ordering::Equal => return Some(mid),
            }
        }
        None
    }

    /// The child range of entry `parent` of order `n` (empty for the highest order).
    pub fn children(&self, bytes: &[u8], n: usize, parent: usize) -> std::ops::Range<usize> {
        if n >= self.order {
            return 0..0;
        }
        let o = &self.orders[n - 1];
        u32_at(bytes, o.children.start + 4 * parent) as usize
            ..u32_at(bytes, o.children.start + 4 * (parent + 1)) as usize
    }
}
