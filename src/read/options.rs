//! Decoded options of a source phrase.

use std::sync::{Arc, OnceLock};

use crate::table::{CountColumn, Schema};

use super::direct::View;

/// The options of one source phrase, in stored order (see the metadata's `option_order`).
///
/// All options share a few buffers (target text, word ids, scores), so decoding allocates
/// nothing per option. The buffers sit behind a shared pointer: the reader's cache of recently
/// used sources hands out the same buffers again without copying them, so cloning an
/// `Options` is cheap, and reusing one with [`crate::Table::lookup_into`] allocates nothing
/// once its buffers have grown (unless they are shared with the cache).
///
/// Options of a table in the `direct` layout are read in place from the file: the target text
/// is borrowed from it, a score is decoded when asked for, and the rest (word ids, all scores
/// as a slice, counts, alignments) is decoded once, the first time it is asked for.
#[derive(Clone, Debug)]
pub struct Options {
    pub(super) body: Arc<Body>,
    pub(super) view: Option<DirectOptions>,
}

impl Default for Options {
    /// No options (allocates nothing: the empty buffers are shared).
    fn default() -> Options {
        Options {
            body: empty_body(),
            view: None,
        }
    }
}

/// A `direct` table's options, read in place, with their decoded form once asked for.
#[derive(Clone, Debug)]
pub(super) struct DirectOptions {
    pub(super) view: View,
    /// The options' text, validated as a whole once (one pass over a run of bytes is far
    /// cheaper than checking each short target on every call).
    pub(super) text: OnceLock<Box<str>>,
    pub(super) decoded: OnceLock<Box<Body>>,
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
        match &self.view {
            Some(d) => d.view.len(),
            None => self.body.ends.len(),
        }
    }

    /// Whether there are none (the phrase was not found).
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Option `i`, best first.
    pub fn get(&self, i: usize) -> Option<TranslationOption<'_>> {
        (i < self.len()).then_some(TranslationOption {
            of: self.of(),
            index: i,
        })
    }

    /// Every option in stored order.
    pub fn iter(&self) -> impl ExactSizeIterator<Item = TranslationOption<'_>> {
        let of = self.of();
        (0..self.len()).map(move |index| TranslationOption { of, index })
    }

    fn of(&self) -> Of<'_> {
        match &self.view {
            Some(d) => Of::Direct(d),
            None => Of::Body(&self.body),
        }
    }

    /// Options read in place from a `direct` table.
    pub(super) fn direct(view: View, decoded: Option<Body>) -> Options {
        let cell = OnceLock::new();
        if let Some(body) = decoded {
            let _ = cell.set(Box::new(body));
        }
        Options {
            body: empty_body(),
            view: Some(DirectOptions {
                view,
                text: OnceLock::new(),
                decoded: cell,
            }),
        }
    }

    /// Empties the options and returns their buffers for filling: the same buffers when no one
    /// else holds them, fresh ones when the cache shares them (nothing is copied).
    pub(super) fn clear_for_fill(&mut self, schema: &Arc<Schema>) -> &mut Body {
        self.view = None;
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
        self.view = None;
        match Arc::get_mut(&mut self.body) {
            Some(body) => body.clear(),
            None => self.body = empty_body(),
        }
    }

    /// Makes `self` share `other`'s buffers (no copy).
    pub(super) fn share(&mut self, other: &Options) {
        self.body = other.body.clone();
        self.view = other.view.clone();
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

/// One shared empty body, so that options read in place allocate nothing.
fn empty_body() -> Arc<Body> {
    static EMPTY: OnceLock<Arc<Body>> = OnceLock::new();
    EMPTY.get_or_init(Arc::default).clone()
}

impl Body {
    /// A body for `schema`, to be filled.
    pub(super) fn for_schema(schema: &Arc<Schema>) -> Body {
        Body {
            schema: Some(schema.clone()),
            ..Body::default()
        }
    }

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
    of: Of<'a>,
    index: usize,
}

/// Where an option's data is: decoded buffers, or a `direct` table's record.
#[derive(Clone, Copy, Debug)]
enum Of<'a> {
    Body(&'a Body),
    Direct(&'a DirectOptions),
}

fn range(ends: &[u32], i: usize) -> std::ops::Range<usize> {
    let start = if i == 0 { 0 } else { ends[i - 1] as usize };
    start..ends[i] as usize
}

impl<'a> TranslationOption<'a> {
    /// The decoded buffers (for a `direct` table, decoded the first time one asks).
    fn body(&self) -> &'a Body {
        match self.of {
            Of::Body(b) => b,
            Of::Direct(d) => d.decoded.get_or_init(|| Box::new(d.view.decode())),
        }
    }

    /// The target phrase (borrowed: no allocation).
    pub fn target(&self) -> &'a str {
        match self.of {
            Of::Body(b) => &b.text[range(&b.ends, self.index)],
            Of::Direct(d) => {
                let text = d.text.get_or_init(|| d.view.text());
                // The ends were checked to lie on character boundaries when the options were
                // read, so `get` cannot fail.
                text.get(d.view.range(self.index)).unwrap_or("")
            }
        }
    }

    /// The target phrase as word ids; [`crate::Table::word`] gives each word's text.
    pub fn target_ids(&self) -> &'a [u32] {
        let b = self.body();
        &b.ids[range(&b.id_ends, self.index)]
    }

    /// Scores in schema order (quantized values where the table quantizes).
    pub fn scores(&self) -> &'a [f64] {
        let b = self.body();
        let n = b.n_scores();
        &b.scores[self.index * n..(self.index + 1) * n]
    }

    /// Score `i` in schema order.
    pub fn score(&self, i: usize) -> Option<f64> {
        match self.of {
            Of::Body(_) => self.scores().get(i).copied(),
            Of::Direct(d) => d.view.score(self.index, i),
        }
    }

    /// The score in column `name`.
    pub fn score_by_name(&self, name: &str) -> Option<f64> {
        let i = match self.of {
            Of::Body(b) => b.schema.as_ref()?.score_index(name)?,
            Of::Direct(d) => d.view.schema().score_index(name)?,
        };
        self.score(i)
    }

    /// Exact counts in schema order (empty when the table stores none).
    pub fn counts(&self) -> &'a [u64] {
        let b = self.body();
        let n = b.n_counts();
        &b.counts[self.index * n..(self.index + 1) * n]
    }

    /// One count column, if stored.
    pub fn count(&self, column: CountColumn) -> Option<u64> {
        let i = self.body().schema.as_ref()?.count_index(column)?;
        self.counts().get(i).copied()
    }

    /// Word links `(source index, target index)`; empty when not stored.
    pub fn alignment(&self) -> &'a [(u16, u16)] {
        let b = self.body();
        if b.link_ends.is_empty() {
            return &[];
        }
        &b.links[range(&b.link_ends, self.index)]
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
