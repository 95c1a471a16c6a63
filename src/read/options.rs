//! Decoded options of a source phrase, and the block layout they are decoded from.

use std::sync::Arc;

use crate::error::Result;
use crate::format::read_varint;
use crate::table::{CountColumn, Schema};

use super::Table;

/// The options of one source phrase, in stored order (see the metadata's `option_order`).
#[derive(Clone, Debug, Default)]
pub struct Options {
    schema: Option<Arc<Schema>>,
    text: String,
    ends: Vec<usize>,
    scores: Vec<f64>,
    counts: Vec<u64>,
    links: Vec<(u16, u16)>,
    link_ends: Vec<usize>,
    pub(super) ids: Vec<u32>,
    pub(super) id_ends: Vec<usize>,
    pub(super) scratch: Vec<u8>,
}

impl Options {
    /// The number of options.
    pub fn len(&self) -> usize {
        self.ends.len()
    }

    /// Whether there are none (the phrase was not found).
    pub fn is_empty(&self) -> bool {
        self.ends.is_empty()
    }

    /// Option `i`, best first.
    pub fn get(&self, i: usize) -> Option<TranslationOption<'_>> {
        (i < self.len()).then_some(TranslationOption {
            options: self,
            index: i,
        })
    }

    /// Every option in stored order.
    pub fn iter(&self) -> impl ExactSizeIterator<Item = TranslationOption<'_>> {
        (0..self.len()).map(move |index| TranslationOption {
            options: self,
            index,
        })
    }

    pub(super) fn clear(&mut self) {
        self.text.clear();
        self.ends.clear();
        self.scores.clear();
        self.counts.clear();
        self.links.clear();
        self.link_ends.clear();
        self.ids.clear();
        self.id_ends.clear();
    }

    fn n_scores(&self) -> usize {
        self.schema.as_ref().map_or(0, |s| s.scores.len())
    }

    fn n_counts(&self) -> usize {
        self.schema.as_ref().map_or(0, |s| s.counts.len())
    }
}

/// One translation option: a target phrase with its scores, counts and alignment.
#[derive(Clone, Copy, Debug)]
pub struct TranslationOption<'a> {
    pub(super) options: &'a Options,
    pub(super) index: usize,
}

impl<'a> TranslationOption<'a> {
    /// The target phrase.
    pub fn target(&self) -> &'a str {
        let start = if self.index == 0 {
            0
        } else {
            self.options.ends[self.index - 1]
        };
        &self.options.text[start..self.options.ends[self.index]]
    }

    /// Scores in schema order (quantized values where the table quantizes).
    pub fn scores(&self) -> &'a [f64] {
        let n = self.options.n_scores();
        &self.options.scores[self.index * n..(self.index + 1) * n]
    }

    /// Score `i` in schema order.
    pub fn score(&self, i: usize) -> Option<f64> {
        self.scores().get(i).copied()
    }

    /// The score in column `name`.
    pub fn score_by_name(&self, name: &str) -> Option<f64> {
        let i = self.options.schema.as_ref()?.score_index(name)?;
        self.score(i)
    }

    /// Exact counts in schema order (empty when the table stores none).
    pub fn counts(&self) -> &'a [u64] {
        let n = self.options.n_counts();
        &self.options.counts[self.index * n..(self.index + 1) * n]
    }

    /// One count column, if stored.
    pub fn count(&self, column: CountColumn) -> Option<u64> {
        let i = self.options.schema.as_ref()?.count_index(column)?;
        self.counts().get(i).copied()
    }

    /// Word links `(source index, target index)`; empty when not stored.
    pub fn alignment(&self) -> &'a [(u16, u16)] {
        if self.options.link_ends.is_empty() {
            return &[];
        }
        let start = if self.index == 0 {
            0
        } else {
            self.options.link_ends[self.index - 1]
        };
        &self.options.links[start..self.options.link_ends[self.index]]
    }
}

/// A sub-phrase of a sentence found in the table: tokens `start..end` and its options.
#[derive(Clone, Debug)]
pub struct Span {
    /// First token.
    pub start: usize,
    /// One past the last token.
    pub end: usize,
    /// The options of the sub-phrase.
    pub options: Options,
}

/// Where the columns of one raw block start, and which options belong to one of its sources.
pub(super) struct BlockLayout {
    /// First option of the selected source.
    first: usize,
    /// One past its last option.
    end: usize,
    /// Options in the whole block.
    total: usize,
    scores_start: usize,
    targets_start: usize,
}

impl BlockLayout {
    /// Reads the option counts of a block of `sources` sources, selecting source `rank`.
    pub(super) fn parse(
        table: &Table,
        bytes: &[u8],
        sources: usize,
        rank: usize,
    ) -> Result<BlockLayout> {
        let mut pos = 0;
        let (mut first, mut end, mut total) = (0, 0, 0usize);
        for r in 0..sources {
            let n = read_varint(bytes, &mut pos)
                .filter(|&n| n >= 1 && n <= bytes.len() as u64)
                .ok_or_else(|| table.corrupt("a block's option counts are malformed"))?;
            if r == rank {
                first = total;
                end = total + n as usize;
            }
            total += n as usize;
            if total > bytes.len() {
                return Err(table.corrupt("a block claims more options than it has bytes"));
            }
        }
        let scores_start = pos;
        let width: usize = table.codecs.iter().map(|c| c.width()).sum();
        let targets_start = scores_start + width * total;
        if targets_start > bytes.len() {
            return Err(table.corrupt("a block's score columns are cut off"));
        }
        Ok(BlockLayout {
            first,
            end,
            total,
            scores_start,
            targets_start,
        })
    }

    /// Decodes the selected source's options into `out`.
    pub(super) fn decode_source(
        &self,
        table: &Table,
        bytes: &[u8],
        out: &mut Options,
    ) -> Result<()> {
        let data = table.data();
        let BlockLayout {
            first, end, total, ..
        } = *self;
        out.clear();
        if out
            .schema
            .as_ref()
            .is_none_or(|s| !Arc::ptr_eq(s, &table.shared_schema))
        {
            out.schema = Some(table.shared_schema.clone());
        }
        let bad_code = || table.corrupt("a score code is outside its codebook");
        for k in first..end {
            let mut col = self.scores_start;
            for codec in &table.codecs {
                let w = codec.width();
                let at = col + k * w;
                out.scores
                    .push(codec.decode(&bytes[at..at + w]).ok_or_else(bad_code)?);
                col += w * total;
            }
        }
        let malformed =
            |what: &str| table.corrupt(format!("a block's {what} are cut off or malformed"));
        let mut pos = self.targets_start;
        skip_varints(bytes, &mut pos, first).ok_or_else(|| malformed("target references"))?;
        for _ in first..end {
            let offset =
                read_varint(bytes, &mut pos).ok_or_else(|| malformed("target references"))?;
            table
                .sections
                .append_target(data, offset, &mut out.text, &mut out.ids)
                .map_err(|r| table.corrupt(r))?;
            out.ends.push(out.text.len());
            out.id_ends.push(out.ids.len());
        }
        let schema = &table.shared_schema;
        if !schema.alignment && schema.counts.is_empty() {
            return Ok(());
        }
        skip_varints(bytes, &mut pos, total - end).ok_or_else(|| malformed("target references"))?;
        if schema.alignment {
            for k in 0..total {
                let n = read_varint(bytes, &mut pos).ok_or_else(|| malformed("alignments"))?;
                if n > bytes.len() as u64 {
                    return Err(malformed("alignments"));
                }
                if !(first..end).contains(&k) {
                    skip_varints(bytes, &mut pos, 2 * n as usize)
                        .ok_or_else(|| malformed("alignments"))?;
                    continue;
                }
                for _ in 0..n {
                    let i = read_varint(bytes, &mut pos).ok_or_else(|| malformed("alignments"))?;
                    let j = read_varint(bytes, &mut pos).ok_or_else(|| malformed("alignments"))?;
                    let (Ok(i), Ok(j)) = (u16::try_from(i), u16::try_from(j)) else {
                        return Err(malformed("alignments"));
                    };
                    out.links.push((i, j));
                }
                out.link_ends.push(out.links.len());
            }
        }
        let n_counts = schema.counts.len();
        if n_counts > 0 {
            out.counts.resize((end - first) * n_counts, 0);
            for c in 0..n_counts {
                skip_varints(bytes, &mut pos, first).ok_or_else(|| malformed("counts"))?;
                for k in 0..end - first {
                    out.counts[k * n_counts + c] =
                        read_varint(bytes, &mut pos).ok_or_else(|| malformed("counts"))?;
                }
                skip_varints(bytes, &mut pos, total - end).ok_or_else(|| malformed("counts"))?;
            }
        }
        Ok(())
    }

    /// Parses every column to its end (the block must hold nothing more) and calls `each_target`
    /// with every target reference.
    pub(super) fn check_complete(
        &self,
        table: &Table,
        bytes: &[u8],
        mut each_target: impl FnMut(u64) -> Result<()>,
    ) -> Result<()> {
        let schema = &table.shared_schema;
        let total = self.total;
        let mut pos = self.targets_start;
        let bad = || table.corrupt("a block's columns are cut off or malformed");
        for _ in 0..total {
            each_target(read_varint(bytes, &mut pos).ok_or_else(bad)?)?;
        }
        if schema.alignment {
            for _ in 0..total {
                let n = read_varint(bytes, &mut pos).ok_or_else(bad)?;
                if n > bytes.len() as u64 {
                    return Err(bad());
                }
                skip_varints(bytes, &mut pos, 2 * n as usize).ok_or_else(bad)?;
            }
        }
        skip_varints(bytes, &mut pos, total * schema.counts.len()).ok_or_else(bad)?;
        if pos != bytes.len() {
            return Err(table.corrupt(format!(
                "a block has {} unexplained trailing bytes",
                bytes.len() - pos
            )));
        }
        Ok(())
    }
}

/// Skips `n` varints by counting their final bytes (those below 0x80).
#[inline]
fn skip_varints(bytes: &[u8], pos: &mut usize, n: usize) -> Option<()> {
    if n == 0 {
        return Some(());
    }
    let rest = bytes.get(*pos..)?;
    let mut seen = 0;
    for (i, &b) in rest.iter().enumerate() {
        if b < 0x80 {
            seen += 1;
            if seen == n {
                *pos += i + 1;
                return Some(());
            }
        }
    }
    None
}
