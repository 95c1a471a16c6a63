//! Decoded options of a source phrase.

use std::sync::Arc;

use crate::table::{CountColumn, Schema};

/// The options of one source phrase, in stored order (see the metadata's `option_order`).
///
/// All options share a few buffers (target text, word ids, scores), so decoding allocates
/// nothing per option, and reusing an `Options` with [`crate::Table::lookup_into`] allocates
/// nothing at all once its buffers have grown.
#[derive(Clone, Debug, Default)]
pub struct Options {
    schema: Option<Arc<Schema>>,
    pub(super) text: String,
    pub(super) ends: Vec<u32>,
    pub(super) ids: Vec<u32>,
    pub(super) id_ends: Vec<u32>,
    pub(super) scores: Vec<f64>,
    pub(super) counts: Vec<u64>,
    pub(super) links: Vec<(u16, u16)>,
    pub(super) link_ends: Vec<u32>,
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
        self.ids.clear();
        self.id_ends.clear();
        self.scores.clear();
        self.counts.clear();
        self.links.clear();
        self.link_ends.clear();
    }

    /// Makes `self` a copy of `other`, reusing `self`'s buffers.
    pub(super) fn copy_from(&mut self, other: &Options) {
        self.schema.clone_from(&other.schema);
        self.text.clear();
        self.text.push_str(&other.text);
        copy(&mut self.ends, &other.ends);
        copy(&mut self.ids, &other.ids);
        copy(&mut self.id_ends, &other.id_ends);
        copy(&mut self.scores, &other.scores);
        copy(&mut self.counts, &other.counts);
        copy(&mut self.links, &other.links);
        copy(&mut self.link_ends, &other.link_ends);
    }

    /// Heap bytes held (for cache accounting).
    pub(super) fn heap_bytes(&self) -> usize {
        self.text.len()
            + 4 * (self.ends.len() + self.ids.len() + self.id_ends.len() + self.link_ends.len())
            + 8 * (self.scores.len() + self.counts.len())
            + 4 * self.links.len()
            + 128
    }

    pub(super) fn set_schema(&mut self, schema: &Arc<Schema>) {
        if self.schema.as_ref().is_none_or(|s| !Arc::ptr_eq(s, schema)) {
            self.schema = Some(schema.clone());
        }
    }

    fn n_scores(&self) -> usize {
        self.schema.as_ref().map_or(0, |s| s.scores.len())
    }

    fn n_counts(&self) -> usize {
        self.schema.as_ref().map_or(0, |s| s.counts.len())
    }
}

fn copy<T: Copy>(to: &mut Vec<T>, from: &[T]) {
    to.clear();
    to.extend_from_slice(from);
}

/// One translation option: a target phrase with its scores, counts and alignment.
#[derive(Clone, Copy, Debug)]
pub struct TranslationOption<'a> {
    options: &'a Options,
    index: usize,
}

fn range(ends: &[u32], i: usize) -> std::ops::Range<usize> {
    let start = if i == 0 { 0 } else { ends[i - 1] as usize };
    start..ends[i] as usize
}

impl<'a> TranslationOption<'a> {
    /// The target phrase (borrowed: no allocation).
    pub fn target(&self) -> &'a str {
        &self.options.text[range(&self.options.ends, self.index)]
    }

    /// The target phrase as word ids; [`crate::Table::word`] gives each word's text.
    pub fn target_ids(&self) -> &'a [u32] {
        &self.options.ids[range(&self.options.id_ends, self.index)]
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
        &self.options.links[range(&self.options.link_ends, self.index)]
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
