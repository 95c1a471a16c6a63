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
    options: &'a Options,
    index: usize,
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

/// Where the columns of one raw block start.
pub(super) struct BlockLayout {
    starts: Vec<usize>,
    scores_start: usize,
    targets_start: usize,
}

impl BlockLayout {
    pub(super) fn parse(table: &Table, bytes: &[u8], sources: usize) -> Result<BlockLayout> {
        let mut pos = 0;
        let mut starts = Vec::with_capacity(sources + 1);
        starts.push(0usize);
        let mut total = 0usize;
        for _ in 0..sources {
            let n = read_varint(bytes, &mut pos)
                .filter(|&n| n >= 1 && n <= bytes.len() as u64)
                .ok_or_else(|| table.corrupt("a block's option counts are malformed"))?;
            total += n as usize;
            starts.push(total);
        }
        if total > bytes.len() {
            return Err(table.corrupt("a block claims more options than it has bytes"));
        }
        let scores_start = pos;
        let width: usize = table.codecs.iter().map(|c| c.width()).sum();
        let targets_start = scores_start + width * total;
        if targets_start > bytes.len() {
            return Err(table.corrupt("a block's score columns are cut off"));
        }
        Ok(BlockLayout {
            starts,
            scores_start,
            targets_start,
        })
    }

    fn total(&self) -> usize {
        *self.starts.last().unwrap()
    }

    /// Decodes the `rank`-th source of the block into `out`.
    pub(super) fn decode_source(
        &self,
        table: &Table,
        bytes: &[u8],
        rank: usize,
        out: &mut Options,
    ) -> Result<()> {
        let data = table.data();
        let total = self.total();
        let (first, end) = (self.starts[rank], self.starts[rank + 1]);
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
        let mut pos = self.targets_start;
        let malformed =
            |what: &str| table.corrupt(format!("a block's {what} are cut off or malformed"));
        for _ in 0..first {
            read_varint(bytes, &mut pos).ok_or_else(|| malformed("target ids"))?;
        }
        for _ in first..end {
            let id = read_varint(bytes, &mut pos).ok_or_else(|| malformed("target ids"))?;
            table
                .sections
                .append_target(data, id, &mut out.text)
                .map_err(|r| table.corrupt(r))?;
            out.ends.push(out.text.len());
        }
        let schema = &table.shared_schema;
        if !schema.alignment && schema.counts.is_empty() {
            return Ok(());
        }
        for _ in end..total {
            read_varint(bytes, &mut pos).ok_or_else(|| malformed("target ids"))?;
        }
        if schema.alignment {
            for k in 0..total {
                let n = read_varint(bytes, &mut pos).ok_or_else(|| malformed("alignments"))?;
                if n > bytes.len() as u64 {
                    return Err(malformed("alignments"));
                }
                let keep = (first..end).contains(&k);
                for _ in 0..n {
                    let i = read_varint(bytes, &mut pos).ok_or_else(|| malformed("alignments"))?;
                    let j = read_varint(bytes, &mut pos).ok_or_else(|| malformed("alignments"))?;
                    if keep {
                        let (Ok(i), Ok(j)) = (u16::try_from(i), u16::try_from(j)) else {
                            return Err(malformed("alignments"));
                        };
                        out.links.push((i, j));
                    }
                }
                if keep {
                    out.link_ends.push(out.links.len());
                }
            }
        }
        let n_counts = schema.counts.len();
        if n_counts > 0 {
            out.counts.resize((end - first) * n_counts, 0);
            for c in 0..n_counts {
                for k in 0..total {
                    let v = read_varint(bytes, &mut pos).ok_or_else(|| malformed("counts"))?;
                    if (first..end).contains(&k) {
                        out.counts[(k - first) * n_counts + c] = v;
                    }
                }
            }
        }
        Ok(())
    }

    /// Parses every column to its end; the block must hold nothing more.
    pub(super) fn check_complete(&self, table: &Table, bytes: &[u8]) -> Result<()> {
        let schema = &table.shared_schema;
        let total = self.total();
        let mut pos = self.targets_start;
        let bad = || table.corrupt("a block's columns are cut off or malformed");
        for _ in 0..total {
            read_varint(bytes, &mut pos).ok_or_else(bad)?;
        }
        if schema.alignment {
            for _ in 0..total {
                let n = read_varint(bytes, &mut pos).ok_or_else(bad)?;
                for _ in 0..n.min(bytes.len() as u64 + 1) * 2 {
                    read_varint(bytes, &mut pos).ok_or_else(bad)?;
                }
            }
        }
        for _ in 0..total * schema.counts.len() {
            read_varint(bytes, &mut pos).ok_or_else(bad)?;
        }
        if pos != bytes.len() {
            return Err(table.corrupt(format!(
                "a block has {} unexplained trailing bytes",
                bytes.len() - pos
            )));
        }
        Ok(())
    }
}
