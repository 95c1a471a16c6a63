//! Decoded options of a source phrase.

use std::sync::Arc;

use crate::table::{CountColumn, Schema};

/// The options of one source phrase, in stored order (see the metadata's `option_order`).
///
/// All options share a few buffers (target text, word ids, scores), so decoding allocates
/// nothing per option. The buffers sit behind a shared pointer: the reader's cache of recently
/// used sources hands out the same buffers again without copying them, so cloning an
/// `Options` is cheap, and reusing one with [`crate::Table::lookup_into`] allocates nothing
/// once its buffers have grown (unless they are shared with the cache).
#[derive(Clone, Debug, Default)]
pub struct Options {
    pub(super) body: Arc<Body>,
}

/// The buffers of [`Options`].
#[derive(Clone, Debug, Default)]
pub(super) struct Body {
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
        self.body.ends.len()
    }

    /// Whether there are none (the phrase was not found).
    pub fn is_empty(&self) -> bool {
        self.body.ends.is_empty()
    }

    /// Option `i`, best first.
    pub fn get(&self, i: usize) -> Option<TranslationOption<'_>> {
        (i < self.len()).then_some(TranslationOption {
            options: &self.body,
            index: i,
        })
    }

    /// Every option in stored order.
    pub fn iter(&self) -> impl ExactSizeIterator<Item = TranslationOption<'_>> {
        let body = &*self.body;
        (0..self.len()).map(move |index| TranslationOption {
            options: body,
            index,
        })
    }

    /// Empties the options and returns their buffers for filling: the same buffers when no one
    /// else holds them, fresh ones when the cache shares them (nothing is copied).
    pub(super) fn clear_for_fill(&mut self, schema: &Arc<Schema>) -> &mut Body {
        if Arc::get_mut(&mut self.body).is_none() {
            self.body = Arc::new(Body::default());
        }
        let body = Arc::get_mut(&mut self.body).expect("unique after replacement");
        body.clear();
        if body.schema.as_ref().is_none_or(|s| !Arc::ptr_eq(s, schema)) {
            body.schema = Some(schema.clone());
        }
        body
    }

    /// Empties the options (shared buffers are let go, not cleared).
    pub(super) fn clear(&mut self) {
        match Arc::get_mut(&mut self.body) {
            Some(body) => body.clear(),
            None => self.body = Arc::new(Body::default()),
        }
    }

    /// Makes `self` share `other`'s buffers (no copy).
    pub(super) fn share(&mut self, other: &Options) {
        self.body = other.body.clone();
    }

    /// Heap bytes held, by capacity (for cache accounting).
    pub(super) fn heap_bytes(&self) -> usize {
        let b = &*self.body;
        b.text.capacity()
            + 4 * (b.ends.capacity()
                + b.ids.capacity()
                + b.id_ends.capacity()
                + b.link_ends.capacity())
            + 8 * (b.scores.capacity() + b.counts.capacity())
            + 4 * b.links.capacity()
            + 192
    }

    /// Drops the spare capacity of the two buffers whose size is not known in advance (before
    /// the buffers go into a cache).
    pub(super) fn shrink(&mut self) {
        if let Some(b) = Arc::get_mut(&mut self.body) {
            b.text.shrink_to_fit();
            b.ids.shrink_to_fit();
        }
    }
}

impl Body {
    fn clear(&mut self) {
        self.text.clear();
        self.ends.clear();
        self.ids.clear();
        self.id_ends.clear();
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
    options: &'a Body,
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
