//! Source blocks (writer and reader side by side): the sources of one block, front coded, with
//! every option's target reference, score codes, alignment and counts, as one symbol stream.
//!
//! Symbols of a block of `n` sources, in order (models in brackets, see [`ModelIds`]):
//!
//! 1. per source `r`: when `r > 0`, the bytes its key shares with key `r - 1` [key-lcp], the
//!    length of the rest [key-len] and the rest's bytes [key-byte] (key 0 is the block's first
//!    key, stored in the block-keys section); then its option count minus one [option-count];
//! 2. per source, per option `j`: the target's rank [target-ref, context `min(j, 3)`]; per score
//!    column its code: one byte [score, context below] for codes of up to 8 bits, else the
//!    code's 2 or 4 little-endian bytes [wide-score]; if alignments are stored, the link count
//!    [link-count] and each link's source and target index [link-index]; each count [count].
//!
//! The context of a one-byte score code of option `j` is `code(j - 1) >> 4` (0..=15) for
//! `j > 0`, and `16 + min(n, 8) - 1` for the first option of a source with `n` options.

use super::coder::{SymbolSink, SymbolSource};
use super::sections::SkipPoints;

/// Score contexts per column.
pub const SCORE_CONTEXTS: usize = 24;

/// Model ids, fixed by the number of score columns.
#[derive(Clone, Copy, Debug)]
pub struct ModelIds {
    scores: usize,
}

impl ModelIds {
    /// Key bytes shared with the previous key.
    pub const KEY_LCP: usize = 0;
    /// Length of the unshared rest of a key.
    pub const KEY_LEN: usize = 1;
    /// A byte of the unshared rest of a key.
    pub const KEY_BYTE: usize = 2;
    /// Options of a source, minus one.
    pub const OPTION_COUNT: usize = 3;
    /// Target ranks: contexts 0..=3.
    pub const TARGET_REF: usize = 4;
    /// Bytes of 16- and 32-bit score codes.
    pub const WIDE_SCORE: usize = 8;
    /// Links of an option.
    pub const LINK_COUNT: usize = 9;
    /// One index of a link.
    pub const LINK_INDEX: usize = 10;
    /// An exact count.
    pub const COUNT: usize = 11;
    /// Words of a target, minus one.
    pub const TARGET_LEN: usize = 12;
    /// A target word id.
    pub const TARGET_WORD: usize = 13;
    const SCORE: usize = 14;

    /// Ids for a table with `scores` score columns.
    pub fn new(scores: usize) -> ModelIds {
        ModelIds { scores }
    }

    /// Total number of models.
    pub fn count(&self) -> usize {
        Self::SCORE + self.scores * SCORE_CONTEXTS
    }

    /// The model of column `c`'s one-byte codes in context `ctx`.
    #[inline]
    pub fn score(&self, c: usize, ctx: usize) -> usize {
        Self::SCORE + c * SCORE_CONTEXTS + ctx
    }

    /// The component a model's symbols are reported under (see [`COMPONENTS`]).
    pub fn component(&self, model: usize) -> usize {
        match model {
            Self::KEY_LCP | Self::KEY_LEN | Self::KEY_BYTE | Self::OPTION_COUNT => 0,
            4..=7 => 2,
            Self::WIDE_SCORE => 4,
            Self::LINK_COUNT | Self::LINK_INDEX => 5,
            Self::COUNT => 6,
            Self::TARGET_LEN | Self::TARGET_WORD => 1,
            m => 7 + (m - Self::SCORE) / SCORE_CONTEXTS,
        }
    }
}

/// Names of the size-report components: keys, targets, target references, (unused), wide score
/// bytes, alignments, counts, then one per score column.
pub const COMPONENTS: [&str; 7] = [
    "keys",
    "targets",
    "target-refs",
    "-",
    "wide-scores",
    "alignments",
    "counts",
];

/// How much of a block's options to decode (its keys and option counts are always decoded).
#[derive(Clone, Copy, Debug)]
pub enum Upto<'k> {
    /// The options of the first `n` sources.
    Sources(usize),
    /// The options of the source equal to this key, if the block holds it (none otherwise),
    /// from the last resume point at or before it (else from the first source).
    Key(&'k [u8]),
    /// The options of source `r` (from the last resume point at or before it) and of every
    /// source after it when `to_end`.
    Source(usize, bool),
    /// Like [`Upto::Key`], but keys are decoded only as far as needed: up to the first key not
    /// below this one when it is missing, or when a resume point lets decoding jump to its
    /// options; the records then hold only the keys up to it (for one lookup, not a cache).
    Lookup(&'k [u8]),
}

/// The decoded form of a block, also what the writer fills before encoding.
#[derive(Clone, Debug, Default)]
pub struct BlockRecords {
    /// Keys' bytes, concatenated.
    pub key_bytes: Vec<u8>,
    /// End of each key in `key_bytes`.
    pub key_ends: Vec<u32>,
    /// End of each source's options (cumulative option counts).
    pub option_ends: Vec<u32>,
    /// Target rank of each option.
    pub targets: Vec<u32>,
    /// Score codes of each option, `width` little-endian bytes per column.
    pub codes: Vec<u8>,
    /// Links of every option, concatenated.
    pub links: Vec<(u16, u16)>,
    /// End of each option's links (empty when alignments are not stored).
    pub link_ends: Vec<u32>,
    /// Counts, `n_counts` per option.
    pub counts: Vec<u64>,
    /// End of the sources whose options are decoded (all of them once fully decoded).
    pub with_options: usize,
    /// First source whose options are decoded (0 unless decoding resumed inside the block):
    /// the option columns above start with its options.
    pub options_from: usize,
}

/// What a block's layout depends on.
#[derive(Clone, Debug)]
pub struct BlockShape {
    /// Bytes per score code, per column (1, 2 or 4).
    pub widths: Vec<usize>,
    /// Whether alignments are stored.
    pub alignment: bool,
    /// Count columns.
    pub counts: usize,
}

impl BlockShape {
    /// Bytes of score codes per option.
    pub fn code_bytes(&self) -> usize {
        self.widths.iter().sum()
    }
}

impl BlockRecords {
    /// Empties every column.
    pub fn clear(&mut self) {
        self.key_bytes.clear();
        self.key_ends.clear();
        self.option_ends.clear();
        self.targets.clear();
        self.codes.clear();
        self.links.clear();
        self.link_ends.clear();
        self.counts.clear();
        self.with_options = 0;
        self.options_from = 0;
    }

    /// Whether source `r`'s options are decoded.
    #[inline]
    pub fn has_options(&self, r: usize) -> bool {
        r >= self.options_from && r < self.with_options
    }

    /// Index of option `k` (numbered over the whole block) in the decoded option columns.
    #[inline]
    pub fn local(&self, k: usize) -> usize {
        k - self.options(self.options_from).start
    }

    /// Target rank of option `k` (its source's options decoded).
    #[inline]
    pub fn target(&self, k: usize) -> u32 {
        self.targets[self.local(k)]
    }

    /// Score codes of option `k`, `per` bytes.
    #[inline]
    pub fn codes_of(&self, k: usize, per: usize) -> &[u8] {
        let i = self.local(k);
        &self.codes[i * per..(i + 1) * per]
    }

    /// Links of option `k` (empty when alignments are not stored).
    #[inline]
    pub fn links_of(&self, k: usize) -> &[(u16, u16)] {
        if self.link_ends.is_empty() {
            return &[];
        }
        let i = self.local(k);
        let start = if i == 0 {
            0
        } else {
            self.link_ends[i - 1] as usize
        };
        &self.links[start..self.link_ends[i] as usize]
    }

    /// Counts of option `k`, `n` of them.
    #[inline]
    pub fn counts_of(&self, k: usize, n: usize) -> &[u64] {
        let i = self.local(k);
        &self.counts[i * n..(i + 1) * n]
    }

    /// Number of sources.
    pub fn sources(&self) -> usize {
        self.key_ends.len()
    }

    /// Key of source `r`.
    #[inline]
    pub fn key(&self, r: usize) -> &[u8] {
        let start = if r == 0 {
            0
        } else {
            self.key_ends[r - 1] as usize
        };
        &self.key_bytes[start..self.key_ends[r] as usize]
    }

    /// Options of source `r`, as a range of option indexes.
    #[inline]
    pub fn options(&self, r: usize) -> std::ops::Range<usize> {
        let start = if r == 0 {
            0
        } else {
            self.option_ends[r - 1] as usize
        };
        start..self.option_ends[r] as usize
    }

    /// Rough heap bytes (for cache accounting).
    pub fn heap_bytes(&self) -> usize {
        self.key_bytes.len()
            + 4 * (self.key_ends.len() + self.option_ends.len() + self.targets.len())
            + self.codes.len()
            + 4 * self.links.len()
            + 4 * self.link_ends.len()
            + 8 * self.counts.len()
            + 256
    }

    /// Index of the first key not below `key` (binary search; keys ascend).
    pub fn lower_bound(&self, key: &[u8]) -> usize {
        let (mut lo, mut hi) = (0, self.sources());
        while lo < hi {
            let mid = (lo + hi) / 2;
            if self.key(mid) < key {
                lo = mid + 1;
            } else {
                hi = mid;
            }
        }
        lo
    }

    /// Writes the block's symbols (key 0 excluded: it lives in the block-keys section).
    pub fn encode(&self, shape: &BlockShape, ids: &ModelIds, sink: &mut impl SymbolSink) {
        for r in 0..self.sources() {
            if r > 0 {
                let (prev, key) = (self.key(r - 1), self.key(r));
                let lcp = prev.iter().zip(key).take_while(|(a, b)| a == b).count();
                sink.number(ModelIds::KEY_LCP, lcp as u64);
                sink.number(ModelIds::KEY_LEN, (key.len() - lcp) as u64);
                for &b in &key[lcp..] {
                    sink.byte(ModelIds::KEY_BYTE, b);
                }
            }
            sink.number(ModelIds::OPTION_COUNT, self.options(r).len() as u64 - 1);
        }
        let per = shape.code_bytes();
        for r in 0..self.sources() {
            sink.mark(r);
            let range = self.options(r);
            let n = range.len();
            for (j, k) in range.enumerate() {
                sink.number(ModelIds::TARGET_REF + j.min(3), u64::from(self.targets[k]));
                let mut at = k * per;
                for (c, &w) in shape.widths.iter().enumerate() {
                    if w == 1 {
                        let ctx = score_context(j, n, || self.codes[at - per]);
                        sink.byte(ids.score(c, ctx), self.codes[at]);
                    } else {
                        for &b in &self.codes[at..at + w] {
                            sink.byte(ModelIds::WIDE_SCORE, b);
                        }
                    }
                    at += w;
                }
                if shape.alignment {
                    let start = if k == 0 {
                        0
                    } else {
                        self.link_ends[k - 1] as usize
                    };
                    let links = &self.links[start..self.link_ends[k] as usize];
                    sink.number(ModelIds::LINK_COUNT, links.len() as u64);
                    for &(i, t) in links {
                        sink.number(ModelIds::LINK_INDEX, u64::from(i));
                        sink.number(ModelIds::LINK_INDEX, u64::from(t));
                    }
                }
                for c in 0..shape.counts {
                    sink.number(ModelIds::COUNT, self.counts[k * shape.counts + c]);
                }
            }
        }
    }

    /// Decodes a block of `sources` sources whose first key is `first_key`: every key and
    /// option count, and the options `upto` asks for (the stream is read no further: keys
    /// alone cost a fraction of the block), resuming at one of `points` when `upto` asks for
    /// one source; `Err` says what is malformed.
    /// `max_options` bounds the option count (the metadata's pair count). Only a full decode
    /// (`upto >= sources`) checks that the stream ends where it should; the block's checksum,
    /// checked before decoding, guards the rest.
    #[allow(clippy::too_many_arguments)]
    pub fn decode(
        &mut self,
        first_key: &[u8],
        sources: usize,
        upto: Upto<'_>,
        shape: &BlockShape,
        ids: &ModelIds,
        max_options: u64,
        src: &mut impl SymbolSource,
        points: SkipPoints<'_>,
    ) -> Result<(), &'static str> {
        self.clear();
        self.key_bytes.reserve(sources * (first_key.len() + 8));
        self.key_ends.reserve_exact(sources);
        self.option_ends.reserve_exact(sources);
        let mut total = 0u64;
        let mut found = false;
        for r in 0..sources {
            if r == 0 {
                self.key_bytes.extend_from_slice(first_key);
            } else {
                let prev_start = if r == 1 {
                    0
                } else {
                    self.key_ends[r - 2] as usize
                };
                let prev_len = self.key_bytes.len() - prev_start;
                let lcp = src.number(ModelIds::KEY_LCP).ok_or("a key")? as usize;
                let len = src.number(ModelIds::KEY_LEN).ok_or("a key")?;
                if lcp > prev_len || len > super::MAX_BLOCK_BYTES {
                    return Err("a key's shared prefix or length");
                }
                self.key_bytes
                    .extend_from_within(prev_start..prev_start + lcp);
                for _ in 0..len {
                    self.key_bytes
                        .push(src.byte(ModelIds::KEY_BYTE).ok_or("a key")?);
                }
                let key = &self.key_bytes[prev_start + prev_len..];
                if key <= &self.key_bytes[prev_start..prev_start + prev_len] {
                    return Err("keys out of order");
                }
            }
            self.key_ends.push(self.key_bytes.len() as u32);
            let n = src
                .number(ModelIds::OPTION_COUNT)
                .ok_or("an option count")?
                + 1;
            total += n;
            if total > max_options {
                return Err("option counts beyond the table's pairs");
            }
            self.option_ends.push(total as u32);
            if let (Upto::Lookup(want), false) = (upto, found) {
                // Stop at the first key above the wanted one (it is missing), or at the wanted
                // one when a resume point leads to its options; without one, the options are
                // reached only past every key.
                let key = self.key(r);
                if key > want || (key == want && r > 0 && points.before(r).is_some()) {
                    break;
                }
                found = key == want;
            }
        }
        let per = shape.code_bytes();
        let (from, upto) = match upto {
            Upto::Sources(n) => (0, n.min(sources)),
            Upto::Key(key) | Upto::Lookup(key) => {
                let r = self.lower_bound(key);
                if r < self.sources() && self.key(r) == key {
                    (r, r + 1)
                } else {
                    (0, 0)
                }
            }
            Upto::Source(r, to_end) if r < sources => (r, if to_end { sources } else { r + 1 }),
            Upto::Source(..) => (0, 0),
        };
        let from = match points.before(from) {
            Some(p) if from > 0 => {
                if !src.resume(p.state, p.pos) {
                    return Err("a resume point");
                }
                p.rank
            }
            _ => 0,
        };
        let base = if from == 0 {
            0
        } else {
            self.option_ends[from - 1] as usize
        };
        let wanted = if upto == 0 {
            0
        } else {
            self.option_ends[upto - 1] as usize - base
        };
        self.targets.reserve_exact(wanted);
        self.codes.reserve_exact(wanted * per);
        self.counts.reserve_exact(wanted * shape.counts);
        if shape.alignment {
            self.link_ends.reserve_exact(wanted);
            self.links.reserve(wanted * 4);
        }
        for r in from..upto {
            let range = self.options(r);
            let n = range.len();
            for (j, k) in range.enumerate() {
                let k = k - base;
                let t = src
                    .number(ModelIds::TARGET_REF + j.min(3))
                    .ok_or("a target reference")?;
                self.targets
                    .push(u32::try_from(t).map_err(|_| "a target reference")?);
                let mut at = k * per;
                for (c, &w) in shape.widths.iter().enumerate() {
                    if w == 1 {
                        let ctx = score_context(j, n, || self.codes[at - per]);
                        let b = src.byte(ids.score(c, ctx)).ok_or("a score code")?;
                        self.codes.push(b);
                    } else {
                        for _ in 0..w {
                            let b = src.byte(ModelIds::WIDE_SCORE).ok_or("a score code")?;
                            self.codes.push(b);
                        }
                    }
                    at += w;
                }
                if shape.alignment {
                    let links = src.number(ModelIds::LINK_COUNT).ok_or("an alignment")?;
                    if links > u64::from(u16::MAX) * 8 {
                        return Err("an alignment");
                    }
                    for _ in 0..links {
                        let i = src.number(ModelIds::LINK_INDEX).ok_or("an alignment")?;
                        let t = src.number(ModelIds::LINK_INDEX).ok_or("an alignment")?;
                        let (Ok(i), Ok(t)) = (u16::try_from(i), u16::try_from(t)) else {
                            return Err("an alignment");
                        };
                        self.links.push((i, t));
                    }
                    self.link_ends.push(self.links.len() as u32);
                }
                for _ in 0..shape.counts {
                    self.counts
                        .push(src.number(ModelIds::COUNT).ok_or("a count")?);
                }
            }
        }
        self.with_options = upto;
        self.options_from = if upto == 0 { 0 } else { from };
        if upto == sources && !src.finished() {
            return Err("the block's end");
        }
        Ok(())
    }
}

/// Context of a one-byte score code of option `j` of `n`; `prev` gives the previous option's
/// code of the same column.
#[inline]
fn score_context(j: usize, n: usize, prev: impl FnOnce() -> u8) -> usize {
    if j == 0 {
        16 + n.min(8) - 1
    } else {
        usize::from(prev() >> 4)
    }
}

/// Writes the symbols of one target (its word ids).
pub fn encode_target(words: &[u32], sink: &mut impl SymbolSink) {
    sink.number(ModelIds::TARGET_LEN, words.len() as u64 - 1);
    for &w in words {
        sink.number(ModelIds::TARGET_WORD, u64::from(w));
    }
}

/// Reads one target's word ids onto `out`; `vocabulary` bounds the ids.
pub fn decode_target(
    src: &mut impl SymbolSource,
    vocabulary: u64,
    out: &mut Vec<u32>,
) -> Result<usize, &'static str> {
    let n = src
        .number(ModelIds::TARGET_LEN)
        .ok_or("a target's length")?
        + 1;
    if n > super::MAX_BLOCK_BYTES {
        return Err("a target's length");
    }
    for _ in 0..n {
        let w = src.number(ModelIds::TARGET_WORD).ok_or("a target word")?;
        if w >= vocabulary {
            return Err("a target word outside the vocabulary");
        }
        out.push(w as u32);
    }
    Ok(n as usize)
}

#[cfg(test)]
mod tests {
    use super::super::coder::{Counter, Models, PlainSink, PlainSource, RansSink, RansSource};
    use super::*;

    fn sample() -> (BlockRecords, BlockShape) {
        let mut b = BlockRecords::default();
        for (i, key) in ["el", "el barco", "el barco rojo", "la"].iter().enumerate() {
            b.key_bytes.extend_from_slice(key.as_bytes());
            b.key_ends.push(b.key_bytes.len() as u32);
            for j in 0..=i {
                b.targets.push((i * 7 + j) as u32);
                b.codes.extend_from_slice(&[(200 - j * 30) as u8, 3, 4, 0]);
                b.links.push((0, j as u16));
                b.link_ends.push(b.links.len() as u32);
                b.counts.push(j as u64 + 1);
            }
            b.option_ends.push(b.targets.len() as u32);
        }
        b.with_options = 4;
        let shape = BlockShape {
            widths: vec![1, 1, 2],
            alignment: true,
            counts: 1,
        };
        (b, shape)
    }

    #[test]
    fn plain_and_rans_blocks_round_trip() {
        let (b, shape) = sample();
        let ids = ModelIds::new(3);
        let mut plain = PlainSink::default();
        b.encode(&shape, &ids, &mut plain);
        let mut back = BlockRecords::default();
        back.decode(
            b.key(0),
            4,
            Upto::Sources(4),
            &shape,
            &ids,
            100,
            &mut PlainSource::new(&plain.out),
            SkipPoints::default(),
        )
        .unwrap();
        assert_eq!(format!("{back:?}"), format!("{b:?}"));

        let mut counter = Counter::new(ids.count());
        b.encode(&shape, &ids, &mut counter);
        let models = Models::from_counts(&counter.counts);
        let mut sink = RansSink::new(&models);
        b.encode(&shape, &ids, &mut sink);
        let mut coded = Vec::new();
        sink.finish(&mut coded);
        let mut src = RansSource::new(&models, &coded).unwrap();
        back.decode(
            b.key(0),
            4,
            Upto::Sources(4),
            &shape,
            &ids,
            100,
            &mut src,
            SkipPoints::default(),
        )
        .unwrap();
        assert_eq!(format!("{back:?}"), format!("{b:?}"));
        // Keys alone, then the options of the first two sources: a prefix of the full decode.
        for (how, upto) in [
            (Upto::Sources(0), 0),
            (Upto::Sources(2), 2),
            (Upto::Key(b"el barco"), 2),
            (Upto::Key(b"el barc"), 0),
        ] {
            let mut part = BlockRecords::default();
            let mut src = RansSource::new(&models, &coded).unwrap();
            part.decode(
                b.key(0),
                4,
                how,
                &shape,
                &ids,
                100,
                &mut src,
                SkipPoints::default(),
            )
            .unwrap();
            assert_eq!(part.key_bytes, b.key_bytes);
            assert_eq!(part.option_ends, b.option_ends);
            assert_eq!(part.with_options, upto);
            let n = if upto == 0 {
                0
            } else {
                b.option_ends[upto - 1] as usize
            };
            assert_eq!(part.targets, b.targets[..n]);
            assert_eq!(part.codes, b.codes[..n * 4]);
        }
    }

    #[test]
    fn decoding_resumes_at_recorded_points() {
        use super::super::sections::{encode_block_skips, SkipPoint};
        let (b, shape) = sample();
        let ids = ModelIds::new(3);
        let mut counter = Counter::new(ids.count());
        b.encode(&shape, &ids, &mut counter);
        let models = Models::from_counts(&counter.counts);
        let mut sink = RansSink::new(&models);
        b.encode(&shape, &ids, &mut sink);
        let mut coded = Vec::new();
        sink.finish(&mut coded);
        let points: Vec<SkipPoint> = sink
            .resume_points
            .iter()
            .filter(|p| p.0 > 0)
            .map(|&(rank, pos, state)| SkipPoint { rank, pos, state })
            .collect();
        assert_eq!(points.iter().map(|p| p.rank).collect::<Vec<_>>(), [1, 2, 3]);
        let section = encode_block_skips(&[points]);
        super::super::sections::check_block_skips(&section, 1, 16).unwrap();
        let skips = SkipPoints::of_block(&section, 1, 0);
        for r in 0..4 {
            for to_end in [false, true] {
                let mut part = BlockRecords::default();
                let mut src = RansSource::new(&models, &coded).unwrap();
                part.decode(
                    b.key(0),
                    4,
                    Upto::Source(r, to_end),
                    &shape,
                    &ids,
                    100,
                    &mut src,
                    skips,
                )
                .unwrap();
                assert_eq!(part.options_from, r);
                for q in r..if to_end { 4 } else { r + 1 } {
                    assert!(part.has_options(q));
                    for k in b.options(q) {
                        assert_eq!(part.target(k), b.target(k));
                        assert_eq!(part.codes_of(k, 4), b.codes_of(k, 4));
                        assert_eq!(part.links_of(k), b.links_of(k));
                        assert_eq!(part.counts_of(k, 1), b.counts_of(k, 1));
                    }
                }
                if !to_end {
                    let mut look = BlockRecords::default();
                    let mut src = RansSource::new(&models, &coded).unwrap();
                    look.decode(
                        b.key(0),
                        4,
                        Upto::Lookup(b.key(r)),
                        &shape,
                        &ids,
                        100,
                        &mut src,
                        skips,
                    )
                    .unwrap();
                    assert!(look.has_options(r));
                    for k in b.options(r) {
                        assert_eq!(look.target(k), b.target(k), "lookup of source {r}");
                        assert_eq!(look.counts_of(k, 1), b.counts_of(k, 1));
                    }
                }
                // Decoding to the end checks that the stream ends there.
                assert_eq!(part.with_options, if to_end { 4 } else { r + 1 });
            }
        }
    }
}
