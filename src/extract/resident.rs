//! The whole extraction in memory, for corpora whose phrase pairs fit the memory budget.
//!
//! The same job as the map and reduce steps ([`super::shard`], [`super::score`],
//! [`super::sentences`]) with the same output, byte for byte, but no run files, no external
//! sorts and no phrase index: words become integer ids as the corpus is read, phrases become
//! nodes of a prefix tree over those ids, and a phrase-pair occurrence is three integers.
//! The steps, each a function below:
//!
//! 1. [`read_and_extract`]: read the corpus once, keep its sentences as word ids, count the
//!    word links and record every phrase-pair occurrence as (source node, target node,
//!    internal alignment id);
//! 2. [`rank`]: number the distinct phrases and alignments in byte order of their text (a
//!    pre-order walk of each prefix tree with children in byte order of their words), which is
//!    the order of the table;
//! 3. [`aggregate`]: split the occurrences into source ranges of similar size, one per thread;
//!    each thread sorts its range and sums the counts of each pair, keeping its most frequent
//!    alignment (ties: the first in byte order); then the target totals are summed;
//! 4. [`count_sentences`]: for every kept sentence pair, in parallel, the table's sources and
//!    targets present are found by walking the prefix trees, and `df_source`, `df_target` and
//!    `cooc` incremented (counters shared between threads are atomic integers, so the sums do
//!    not depend on the split);
//! 5. [`write_table`]: rows are scored and formatted in blocks by the threads and written in
//!    order.
//!
//! Word-id order equals byte order of the joined phrase text as long as no token holds a byte
//! below the space after its first byte (see [`Vocabulary::orders_like_text`]); otherwise, or
//! when the occurrences outgrow the budget, [`extract_resident`] returns `None` and the caller
//! takes the map/reduce path.

use std::io::Write;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::mpsc;

use rustc_hash::FxHashMap;

use super::cooccurrence::{Cooccurrence, Counts};
use super::corpus::{CorpusPaths, CorpusReader, CorpusStats, SentencePair};
use super::phrases::{write_inside, PhraseFinder, SpanPair};
use super::report::Progress;
use super::runs::RunInfo;
use super::score::{scored_header, Discount, FastMap, Scorer, WordTable, GOOD_TURING_MAX_COUNT};
use super::shard::ShardOptions;
use crate::error::{Error, Result};
use crate::table::{PhrasePair, TsvWriter};

pub(super) const NO_NODE: u32 = u32::MAX;
pub(super) const ROOT: u32 = 0;

/// Words of one side, numbered from 1 in order of first appearance (0 is NULL).
#[derive(Default)]
pub(super) struct Vocabulary {
    ids: FxHashMap<Box<str>, u32>,
    pub(super) words: Vec<Box<str>>,
}

impl Vocabulary {
    pub(super) fn id(&mut self, word: &str) -> u32 {
        if let Some(&id) = self.ids.get(word) {
            return id;
        }
        self.words.push(word.into());
        let id = self.words.len() as u32;
        self.ids.insert(word.into(), id);
        id
    }

    pub(super) fn word(&self, id: u32) -> &str {
        &self.words[id as usize - 1]
    }

    /// Whether comparing phrases word by word (each word by its bytes, a shorter phrase before
    /// its extensions) orders them as their text joined by spaces. The two differ only where one
    /// phrase's word ends (space or end, which compare low) and the other's continues with a
    /// byte below the space.
    pub(super) fn orders_like_text(&self) -> bool {
        self.words
            .iter()
            .all(|w| w.bytes().skip(1).all(|b| b >= b' '))
    }

    /// Each word's position in byte order, indexed by id.
    pub(super) fn byte_ranks(&self) -> Vec<u32> {
        let mut order: Vec<u32> = (1..=self.words.len() as u32).collect();
        order.sort_unstable_by(|&a, &b| self.word(a).cmp(self.word(b)));
        let mut rank = vec![0u32; self.words.len() + 1];
        for (r, &id) in order.iter().enumerate() {
            rank[id as usize] = r as u32;
        }
        rank
    }
}

/// The edges of a prefix tree: `(parent << 32 | word)` to child, in one open-addressed array
/// (linear probing, at most half full) so that a lookup touches one cache line, where a
/// general hash map reads its control bytes and its slots apart. Most of the time of
/// sentence-level counting and of numbering phrases goes to these lookups.
struct ChildMap {
    /// `(key, child)`; `key == EMPTY` marks a free slot.
    slots: Vec<(u64, u32)>,
    len: usize,
    shift: u32,
}

impl Default for ChildMap {
    fn default() -> ChildMap {
        ChildMap {
            slots: vec![(ChildMap::EMPTY, 0); 16],
            len: 0,
            shift: 64 - 4,
        }
    }
}

impl ChildMap {
    /// No edge has it: the root's edges are kept apart, so a parent is never `u32::MAX`.
    const EMPTY: u64 = u64::MAX;

    fn slot(&self, key: u64) -> usize {
        (key.wrapping_mul(0x9E37_79B9_7F4A_7C15) >> self.shift) as usize
    }

    fn get(&self, key: u64) -> Option<u32> {
        let mask = self.slots.len() - 1;
        let mut k = self.slot(key);
        loop {
            let (slot_key, child) = self.slots[k];
            if slot_key == key {
                return Some(child);
            }
            if slot_key == Self::EMPTY {
                return None;
            }
            k = (k + 1) & mask;
        }
    }

    /// The child of `key`, which becomes `child` if it has none.
    fn get_or_insert(&mut self, key: u64, child: u32) -> u32 {
        if 2 * (self.len + 1) > self.slots.len() {
            self.grow();
        }
        let mask = self.slots.len() - 1;
        let mut k = self.slot(key);
        loop {
            let (slot_key, existing) = self.slots[k];
            if slot_key == key {
                return existing;
            }
            if slot_key == Self::EMPTY {
                self.slots[k] = (key, child);
                self.len += 1;
                return child;
            }
            k = (k + 1) & mask;
        }
    }

    fn grow(&mut self) {
        let doubled = vec![(Self::EMPTY, 0); self.slots.len() * 2];
        let old = std::mem::replace(&mut self.slots, doubled);
        self.shift -= 1;
        self.len = 0;
        for (key, child) in old {
            if key != Self::EMPTY {
                self.get_or_insert(key, child);
            }
        }
    }
}

/// Phrases of one side as a prefix tree over word ids; node 0 is the empty phrase.
pub(super) struct PhraseTree {
    /// The one-word phrases, by word id (most lookups start there).
    first: Vec<u32>,
    children: ChildMap,
    parent: Vec<u32>,
    word: Vec<u32>,
    /// Whether the node's phrase was extracted (is in the table).
    pub(super) extracted: Vec<bool>,
}

impl PhraseTree {
    pub(super) fn new() -> PhraseTree {
        PhraseTree {
            first: Vec::new(),
            children: ChildMap::default(),
            parent: vec![NO_NODE],
            word: vec![0],
            extracted: vec![false],
        }
    }

    fn key(node: u32, word: u32) -> u64 {
        (u64::from(node) << 32) | u64::from(word)
    }

    pub(super) fn child(&mut self, node: u32, word: u32) -> u32 {
        let next = self.parent.len() as u32;
        let child = if node == ROOT {
            let w = word as usize;
            if w >= self.first.len() {
                self.first
                    .resize((w + 1).max(self.first.len() * 2), NO_NODE);
            }
            if self.first[w] == NO_NODE {
                self.first[w] = next;
            }
            self.first[w]
        } else {
            self.children.get_or_insert(Self::key(node, word), next)
        };
        if child == next {
            self.parent.push(node);
            self.word.push(word);
            self.extracted.push(false);
        }
        child
    }

    fn find(&self, node: u32, word: u32) -> Option<u32> {
        if node == ROOT {
            return self
                .first
                .get(word as usize)
                .copied()
                .filter(|&n| n != NO_NODE);
        }
        self.children.get(Self::key(node, word))
    }

    pub(super) fn len(&self) -> usize {
        self.parent.len()
    }

    /// Calls `reached` with the node of every phrase of at most `max` words occurring in
    /// `words` that the tree holds (extracted or only a prefix), with repeats.
    #[inline]
    pub(super) fn each_in(&self, words: &[u32], max: usize, mut reached: impl FnMut(u32)) {
        for start in 0..words.len() {
            let mut node = ROOT;
            for &w in &words[start..words.len().min(start + max)] {
                match self.find(node, w) {
                    Some(n) => node = n,
                    None => break,
                }
                reached(node);
            }
        }
    }

    /// The nodes of the extracted phrases of at most `max` words occurring in `words` (with
    /// repeats), into `found`.
    pub(super) fn extracted_in(&self, words: &[u32], max: usize, found: &mut Vec<u32>) {
        found.clear();
        self.each_in(words, max, |node| {
            if self.extracted[node as usize] {
                found.push(node);
            }
        });
    }

    /// Bytes held per node, for the memory estimate.
    pub(super) const NODE_BYTES: usize = 4 + 4 + 1 + 2 * 16;

    /// The phrase of `node`, words joined by single spaces, into `out`.
    fn text(&self, node: u32, vocabulary: &Vocabulary, words: &mut Vec<u32>, out: &mut String) {
        words.clear();
        let mut n = node;
        while n != ROOT {
            words.push(self.word[n as usize]);
            n = self.parent[n as usize];
        }
        out.clear();
        for (k, &w) in words.iter().rev().enumerate() {
            if k > 0 {
                out.push(' ');
            }
            out.push_str(vocabulary.word(w));
        }
    }

    /// The word ids of `node`'s phrase, first word first.
    pub(super) fn ids(&self, node: u32, out: &mut Vec<Option<u32>>) {
        out.clear();
        let mut n = node;
        while n != ROOT {
            out.push(Some(self.word[n as usize]));
            n = self.parent[n as usize];
        }
        out.reverse();
    }

    /// Numbers the extracted nodes in byte order of their text: returns each node's rank
    /// (`NO_NODE` for nodes not extracted) and the nodes in rank order.
    pub(super) fn ranks(&self, word_rank: &[u32]) -> (Vec<u32>, Vec<u32>) {
        let n = self.len();
        // Children grouped by parent, each group in byte order of its words.
        let mut order: Vec<u32> = (1..n as u32).collect();
        order.sort_unstable_by_key(|&c| {
            (
                self.parent[c as usize],
                word_rank[self.word[c as usize] as usize],
            )
        });
        let mut first_child = vec![0u32; n + 1];
        for &c in &order {
            first_child[self.parent[c as usize] as usize + 1] += 1;
        }
        for k in 0..n {
            first_child[k + 1] += first_child[k];
        }
        let mut rank = vec![NO_NODE; n];
        let mut by_rank = Vec::new();
        // Pre-order walk: a phrase before its extensions, siblings in byte order.
        let mut stack = vec![ROOT];
        while let Some(node) = stack.pop() {
            if self.extracted[node as usize] {
                rank[node as usize] = by_rank.len() as u32;
                by_rank.push(node);
            }
            let (lo, hi) = (
                first_child[node as usize] as usize,
                first_child[node as usize + 1] as usize,
            );
            stack.extend(order[lo..hi].iter().rev());
        }
        (rank, by_rank)
    }
}

/// The text and word ids of every extracted phrase of one side, by rank, made once so that
/// rows repeating a phrase do not walk the tree again.
struct PhraseTexts {
    text: String,
    /// `text_ends[r]`: end of phrase `r`'s text.
    text_ends: Vec<usize>,
    ids: Vec<Option<u32>>,
    /// `id_ends[r]`: end of phrase `r`'s ids.
    id_ends: Vec<usize>,
}

impl PhraseTexts {
    fn new(side: &Side, nodes: &[u32]) -> PhraseTexts {
        let mut texts = PhraseTexts {
            text: String::new(),
            text_ends: Vec::with_capacity(nodes.len()),
            ids: Vec::new(),
            id_ends: Vec::with_capacity(nodes.len()),
        };
        let (mut scratch, mut text, mut ids) = (Vec::new(), String::new(), Vec::new());
        for &node in nodes {
            side.tree
                .text(node, &side.vocabulary, &mut scratch, &mut text);
            texts.text.push_str(&text);
            texts.text_ends.push(texts.text.len());
            side.tree.ids(node, &mut ids);
            texts.ids.extend_from_slice(&ids);
            texts.id_ends.push(texts.ids.len());
        }
        texts
    }

    fn text(&self, rank: usize) -> &str {
        let start = if rank == 0 {
            0
        } else {
            self.text_ends[rank - 1]
        };
        &self.text[start..self.text_ends[rank]]
    }

    fn ids(&self, rank: usize) -> &[Option<u32>] {
        let start = if rank == 0 { 0 } else { self.id_ends[rank - 1] };
        &self.ids[start..self.id_ends[rank]]
    }
}

/// Sentences of one side as word ids.
#[derive(Default)]
pub(super) struct Sentences {
    pub(super) words: Vec<u32>,
    pub(super) ends: Vec<usize>,
}

impl Sentences {
    pub(super) fn get(&self, k: usize) -> &[u32] {
        let start = if k == 0 { 0 } else { self.ends[k - 1] };
        &self.words[start..self.ends[k]]
    }
}

/// One side of the corpus as read: its words, sentences and phrases.
pub(super) struct Side {
    pub(super) vocabulary: Vocabulary,
    pub(super) sentences: Sentences,
    pub(super) tree: PhraseTree,
    /// The phrase node of every phrase-pair occurrence, in order.
    pub(super) occurrences: Vec<u32>,
}

impl Side {
    pub(super) fn new() -> Side {
        Side {
            vocabulary: Vocabulary::default(),
            sentences: Sentences::default(),
            tree: PhraseTree::new(),
            occurrences: Vec::new(),
        }
    }

    /// Appends the tokens of `text` (starting at the offsets `starts`) as a sentence.
    pub(super) fn push_sentence(&mut self, text: &str, starts: &[u32]) {
        for k in 0..starts.len() - 1 {
            let word = &text[starts[k] as usize..starts[k + 1] as usize - 1];
            let id = self.vocabulary.id(word);
            self.sentences.words.push(id);
        }
        self.sentences.ends.push(self.sentences.words.len());
    }

    pub(super) fn bytes(&self) -> usize {
        self.sentences.words.len() * 4 + self.vocabulary.words.len() * 48
    }
}

/// One side's spans of a batch of sentences, for [`intern_spans`].
#[derive(Default)]
pub(super) struct SpanBatch {
    pub(super) words: Vec<u32>,
    /// `sentence_ends[k]`: end of sentence `k` in `words`.
    pub(super) sentence_ends: Vec<usize>,
    /// `(start, end)` token spans; `span_ends[k]`: end of sentence `k`'s spans.
    pub(super) spans: Vec<(u16, u16)>,
    pub(super) span_ends: Vec<usize>,
}

impl SpanBatch {
    pub(super) fn push(&mut self, words: &[u32], spans: impl Iterator<Item = (u16, u16)>) {
        self.words.extend_from_slice(words);
        self.sentence_ends.push(self.words.len());
        self.spans.extend(spans);
        self.span_ends.push(self.spans.len());
    }
}

/// Turns one side's spans into phrase nodes (one thread per side, beside the reader).
fn intern_spans(
    batches: mpsc::Receiver<SpanBatch>,
    max: usize,
    nodes: &AtomicUsize,
) -> (PhraseTree, Vec<u32>) {
    let mut tree = PhraseTree::new();
    let mut occurrences = Vec::new();
    let mut memo = Vec::new();
    for batch in batches {
        let (mut word_start, mut span_start) = (0, 0);
        for (&word_end, &span_end) in batch.sentence_ends.iter().zip(&batch.span_ends) {
            let words = &batch.words[word_start..word_end];
            memo.clear();
            memo.resize(words.len() * max, NO_NODE);
            for &(start, end) in &batch.spans[span_start..span_end] {
                let (start, end) = (usize::from(start), usize::from(end));
                let node = span_node(&mut tree, words, start, end, max, &mut memo);
                tree.extracted[node as usize] = true;
                occurrences.push(node);
            }
            (word_start, span_start) = (word_end, span_end);
        }
        nodes.store(tree.len(), Ordering::Relaxed);
    }
    (tree, occurrences)
}

/// The node of `words[start..end]`, through the memo of this sentence's spans
/// (`memo[start * max + length - 1]`).
pub(super) fn span_node(
    tree: &mut PhraseTree,
    words: &[u32],
    start: usize,
    end: usize,
    max: usize,
    memo: &mut [u32],
) -> u32 {
    let slot = start * max + (end - start - 1);
    if memo[slot] != NO_NODE {
        return memo[slot];
    }
    let parent = if end - start == 1 {
        ROOT
    } else {
        span_node(tree, words, start, end - 1, max, memo)
    };
    let node = tree.child(parent, words[end - 1]);
    memo[slot] = node;
    node
}

/// Everything [`read_and_extract`] gathers.
pub(super) struct Extracted {
    pub(super) source: Side,
    pub(super) target: Side,
    /// The internal alignment id of every phrase-pair occurrence.
    pub(super) occurrence_alignments: Vec<u32>,
    /// Internal alignments as text, by id.
    pub(super) alignments: Vec<Box<str>>,
    /// Word-link counts (source word, target word), 0 being NULL.
    pub(super) links: FastMap<(u32, u32), u64>,
    pub(super) stats: CorpusStats,
}

/// Numbers the distinct internal alignments by their text, in order of first sight.
#[derive(Default)]
pub(super) struct AlignmentNumbers {
    ids: FxHashMap<Box<str>, u32>,
}

impl AlignmentNumbers {
    /// The number of the alignment `text`, added to `alignments` (by number) if new; whether
    /// it was new.
    pub(super) fn number(&mut self, text: &str, alignments: &mut Vec<Box<str>>) -> (u32, bool) {
        if let Some(&a) = self.ids.get(text) {
            return (a, false);
        }
        let a = alignments.len() as u32;
        alignments.push(text.into());
        self.ids.insert(text.into(), a);
        (a, true)
    }
}

/// Counts a sentence pair's word links into `links`, and a NULL link (word 0) for every
/// unaligned word on either side; `aligned` is scratch space reused between calls.
pub(super) fn count_word_links(
    links: &mut FastMap<(u32, u32), u64>,
    pair_links: &[(u16, u16)],
    (f, e): (&[u32], &[u32]),
    aligned: &mut (Vec<bool>, Vec<bool>),
) {
    let (source_aligned, target_aligned) = aligned;
    source_aligned.clear();
    source_aligned.resize(f.len(), false);
    target_aligned.clear();
    target_aligned.resize(e.len(), false);
    for &(i, j) in pair_links {
        let (i, j) = (usize::from(i), usize::from(j));
        source_aligned[i] = true;
        target_aligned[j] = true;
        *links.entry((f[i], e[j])).or_insert(0) += 1;
    }
    for i in (0..f.len()).filter(|&i| !source_aligned[i]) {
        *links.entry((f[i], 0)).or_insert(0) += 1;
    }
    for j in (0..e.len()).filter(|&j| !target_aligned[j]) {
        *links.entry((0, e[j])).or_insert(0) += 1;
    }
}

impl Extracted {
    /// Nothing read yet.
    pub(super) fn new() -> Extracted {
        Extracted {
            source: Side::new(),
            target: Side::new(),
            occurrence_alignments: Vec::new(),
            alignments: Vec::new(),
            links: FastMap::default(),
            stats: CorpusStats::default(),
        }
    }
}

/// Sentence pairs per batch sent to the span threads.
const BATCH: usize = 1024;

/// Step 1. `None` when the job outgrows `memory`. This thread reads the corpus, numbers the
/// words, finds the phrase pairs and numbers their alignments; one thread per side numbers
/// the phrases.
fn read_and_extract(paths: &CorpusPaths, options: &ShardOptions) -> Result<Option<Extracted>> {
    let max = options.limits.max_length;
    let mut reader = CorpusReader::open(paths, options.corpus)?;
    let progress = Progress::new("extract", reader.total_bytes(), options.progress);
    let counter = reader.progress_counter();
    let mut x = Extracted::new();
    let (source_nodes, target_nodes) = (AtomicUsize::new(0), AtomicUsize::new(0));
    let (source_tx, source_rx) = mpsc::sync_channel::<SpanBatch>(4);
    let (target_tx, target_rx) = mpsc::sync_channel::<SpanBatch>(4);
    let fits = std::thread::scope(|scope| -> Result<bool> {
        let source_thread = scope.spawn(|| intern_spans(source_rx, max, &source_nodes));
        let target_thread = scope.spawn(|| intern_spans(target_rx, max, &target_nodes));
        let read = read_spans(
            &mut reader,
            options,
            &mut x,
            &source_tx,
            &target_tx,
            || source_nodes.load(Ordering::Relaxed) + target_nodes.load(Ordering::Relaxed),
            |sentences| progress.update(counter.load(Ordering::Relaxed), sentences),
        );
        drop((source_tx, target_tx));
        let (tree, occurrences) = source_thread.join().expect("phrase thread panicked");
        (x.source.tree, x.source.occurrences) = (tree, occurrences);
        let (tree, occurrences) = target_thread.join().expect("phrase thread panicked");
        (x.target.tree, x.target.occurrences) = (tree, occurrences);
        read
    });
    progress.finish();
    if !fits? {
        return Ok(None);
    }
    x.stats = reader.stats();
    Ok(Some(x))
}

/// The reading half of [`read_and_extract`]; false when the budget is exceeded.
fn read_spans(
    reader: &mut CorpusReader,
    options: &ShardOptions,
    x: &mut Extracted,
    source_tx: &mpsc::SyncSender<SpanBatch>,
    target_tx: &mpsc::SyncSender<SpanBatch>,
    nodes: impl Fn() -> usize,
    progress: impl Fn(u64),
) -> Result<bool> {
    let mut alignment_ids = AlignmentNumbers::default();
    let mut alignment_bytes = 0usize;
    let mut pair = SentencePair::default();
    let mut finder = PhraseFinder::default();
    let mut spans: Vec<SpanPair> = Vec::new();
    let mut text = String::new();
    let mut aligned = (Vec::new(), Vec::new());
    let (mut source_batch, mut target_batch) = (SpanBatch::default(), SpanBatch::default());
    let budget = options.memory as usize;
    while reader.next_pair(&mut pair)? {
        let (ns, nt) = (pair.source_len(), pair.target_len());
        x.source.push_sentence(&pair.source, &pair.source_starts);
        x.target.push_sentence(&pair.target, &pair.target_starts);
        let f = x.source.sentences.get(x.source.sentences.ends.len() - 1);
        let e = x.target.sentences.get(x.target.sentences.ends.len() - 1);
        // Word links, and NULL links for unaligned words.
        count_word_links(&mut x.links, &pair.links, (f, e), &mut aligned);
        // Phrase pairs: spans to the phrase threads, alignments numbered here.
        spans.clear();
        finder.find(ns, nt, &pair.links, options.limits, |p| spans.push(p));
        let span = |a: usize, b: usize| (a as u16, b as u16);
        source_batch.push(f, spans.iter().map(|p| span(p.source_start, p.source_end)));
        target_batch.push(e, spans.iter().map(|p| span(p.target_start, p.target_end)));
        for &p in &spans {
            text.clear();
            write_inside(&pair.links, p, &mut text);
            let (a, new) = alignment_ids.number(&text, &mut x.alignments);
            if new {
                alignment_bytes += 2 * text.len() + 48;
            }
            x.occurrence_alignments.push(a);
        }
        if source_batch.sentence_ends.len() == BATCH {
            let ok = source_tx.send(std::mem::take(&mut source_batch)).is_ok()
                && target_tx.send(std::mem::take(&mut target_batch)).is_ok();
            assert!(ok, "the phrase threads outlive the reader");
            progress(x.source.sentences.ends.len() as u64);
            // The occurrences (three numbers each) are held about three times over at the
            // peak of the later steps: as read, as sorted keys, and as pairs.
            let used = x.occurrence_alignments.capacity() * 12 * 3
                + nodes() * PhraseTree::NODE_BYTES
                + x.source.bytes()
                + x.target.bytes()
                + x.links.len() * 24
                + alignment_bytes;
            if used > budget {
                return Ok(false);
            }
        }
    }
    let ok = source_tx.send(source_batch).is_ok() && target_tx.send(target_batch).is_ok();
    assert!(ok, "the phrase threads outlive the reader");
    Ok(true)
}

/// Step 2's result: phrase and alignment numbers in table order.
pub(super) struct Ranks {
    pub(super) source_rank: Vec<u32>,
    pub(super) source_nodes: Vec<u32>,
    pub(super) target_rank: Vec<u32>,
    pub(super) target_nodes: Vec<u32>,
    pub(super) alignment_rank: Vec<u32>,
}

/// Step 2.
fn rank(x: &Extracted) -> Ranks {
    let ((source_rank, source_nodes), (target_rank, target_nodes)) = rank_both(
        (&x.source.tree, &x.source.vocabulary.byte_ranks()),
        (&x.target.tree, &x.target.vocabulary.byte_ranks()),
    );
    Ranks {
        source_rank,
        source_nodes,
        target_rank,
        target_nodes,
        alignment_rank: alignment_ranks(&x.alignments),
    }
}

/// What [`PhraseTree::ranks`] gives: each node's rank, and the extracted nodes by rank.
pub(super) type TreeRanks = (Vec<u32>, Vec<u32>);

/// [`PhraseTree::ranks`] of a source and a target tree (each with its words' byte ranks), the
/// two on two threads.
pub(super) fn rank_both(
    source: (&PhraseTree, &[u32]),
    target: (&PhraseTree, &[u32]),
) -> (TreeRanks, TreeRanks) {
    std::thread::scope(|scope| {
        let targets = scope.spawn(|| target.0.ranks(target.1));
        let sources = source.0.ranks(source.1);
        (sources, targets.join().expect("ranking thread panicked"))
    })
}

/// Each alignment's position in byte order of its text, by id.
pub(super) fn alignment_ranks(alignments: &[Box<str>]) -> Vec<u32> {
    let mut order: Vec<u32> = (0..alignments.len() as u32).collect();
    order.sort_unstable_by(|&a, &b| alignments[a as usize].cmp(&alignments[b as usize]));
    let mut alignment_rank = vec![0u32; order.len()];
    for (r, &a) in order.iter().enumerate() {
        alignment_rank[a as usize] = r as u32;
    }
    alignment_rank
}

/// One distinct phrase pair.
#[derive(Clone, Copy)]
struct Pair {
    target: u32,
    alignment: u32,
    count: u64,
}

/// The pairs of one range of sources, in table order.
struct Range {
    first_source: u32,
    /// `offsets[k]..offsets[k + 1]`: the pairs of source `first_source + k`.
    offsets: Vec<usize>,
    pairs: Vec<Pair>,
}

/// Step 3's result.
pub(super) struct Table {
    ranges: Vec<Range>,
    source_totals: Vec<u64>,
    source_distinct: Vec<u32>,
    pub(super) target_totals: Vec<u64>,
    pub(super) target_distinct: Vec<u32>,
    pub(super) histogram: Vec<u64>,
    /// Distinct pairs of this table (rows written).
    pub(super) pairs: u64,
    /// Distinct pairs of the whole job, for the discount (more than `pairs` when this table
    /// is one source range of it).
    pub(super) scored_pairs: u64,
}

/// Boundaries splitting sources `0..n` into `parts` ranges of about equal weight.
fn split_by_weight(weights: &[u64], parts: usize) -> Vec<usize> {
    let total: u64 = weights.iter().sum();
    let mut bounds = vec![0];
    let mut acc = 0u64;
    for (k, &w) in weights.iter().enumerate() {
        acc += w;
        let next = bounds.len() as u64;
        if bounds.len() < parts && acc * parts as u64 >= total * next {
            bounds.push(k + 1);
        }
    }
    while bounds.len() <= parts {
        bounds.push(weights.len());
    }
    *bounds.last_mut().expect("not empty") = weights.len();
    bounds
}

/// Step 3. Consumes the occurrences: `[source node, target node, alignment id]`.
pub(super) fn aggregate(occurrences: [Vec<u32>; 3], ranks: &Ranks, threads: usize) -> Table {
    let sources = ranks.source_nodes.len();
    let targets = ranks.target_nodes.len();
    let mut per_source = vec![0u64; sources];
    for &node in &occurrences[0] {
        per_source[ranks.source_rank[node as usize] as usize] += 1;
    }
    let bounds = split_by_weight(&per_source, threads);
    drop(per_source);
    // Keys (source, target, alignment) in table order, bucketed by source range.
    let mut buckets: Vec<Vec<u128>> = vec![Vec::new(); threads];
    let bucket_of = |s: usize| bounds[1..].partition_point(|&b| b <= s);
    let [sources_of, targets_of, alignments_of] = occurrences;
    for k in 0..sources_of.len() {
        let s = ranks.source_rank[sources_of[k] as usize];
        let t = ranks.target_rank[targets_of[k] as usize];
        let a = ranks.alignment_rank[alignments_of[k] as usize];
        let key = (u128::from(s) << 64) | (u128::from(t) << 32) | u128::from(a);
        buckets[bucket_of(s as usize)].push(key);
    }
    let mut alignment_of_rank = vec![0u32; ranks.alignment_rank.len()];
    for (a, &r) in ranks.alignment_rank.iter().enumerate() {
        alignment_of_rank[r as usize] = a as u32;
    }
    let alignment_of_rank = &alignment_of_rank;
    let ranges: Vec<Range> = std::thread::scope(|scope| {
        let handles: Vec<_> = buckets
            .into_iter()
            .enumerate()
            .map(|(k, keys)| {
                let first = bounds[k] as u32;
                let end = bounds[k + 1] as u32;
                scope.spawn(move || sum_range(keys, first, end, alignment_of_rank))
            })
            .collect();
        handles
            .into_iter()
            .map(|h| h.join().expect("aggregation thread panicked"))
            .collect()
    });
    let mut table = Table {
        ranges: Vec::new(),
        source_totals: Vec::with_capacity(sources),
        source_distinct: Vec::with_capacity(sources),
        target_totals: vec![0; targets],
        target_distinct: vec![0; targets],
        histogram: vec![0; GOOD_TURING_MAX_COUNT as usize + 2],
        pairs: 0,
        scored_pairs: 0,
    };
    let top = table.histogram.len() - 1;
    for range in &ranges {
        for k in 0..range.offsets.len() - 1 {
            let options = &range.pairs[range.offsets[k]..range.offsets[k + 1]];
            table
                .source_totals
                .push(options.iter().map(|p| p.count).sum());
            table.source_distinct.push(options.len() as u32);
        }
        for p in &range.pairs {
            table.target_totals[p.target as usize] += p.count;
            table.target_distinct[p.target as usize] += 1;
            table.histogram[(p.count as usize).min(top)] += 1;
        }
        table.pairs += range.pairs.len() as u64;
    }
    table.ranges = ranges;
    table.scored_pairs = table.pairs;
    table
}

/// Sorts one source range's keys and sums them into pairs.
fn sum_range(mut keys: Vec<u128>, first: u32, end: u32, alignment_of_rank: &[u32]) -> Range {
    keys.sort_unstable();
    let mut range = Range {
        first_source: first,
        offsets: vec![0],
        pairs: Vec::new(),
    };
    let mut source = first;
    let mut k = 0;
    while k < keys.len() {
        let pair_key = keys[k] >> 32;
        let s = (pair_key >> 32) as u32;
        while source < s {
            range.offsets.push(range.pairs.len());
            source += 1;
        }
        let (mut count, mut best, mut best_count) = (0u64, 0u32, 0u64);
        while k < keys.len() && keys[k] >> 32 == pair_key {
            let alignment = keys[k] as u32;
            let mut n = 0u64;
            while k < keys.len() && keys[k] as u32 == alignment && keys[k] >> 32 == pair_key {
                n += 1;
                k += 1;
            }
            if n > best_count {
                (best, best_count) = (alignment, n);
            }
            count += n;
        }
        range.pairs.push(Pair {
            target: pair_key as u32,
            alignment: alignment_of_rank[best as usize],
            count,
        });
    }
    while source < end {
        range.offsets.push(range.pairs.len());
        source += 1;
    }
    range
}

/// Step 4: the sentence-level counts ([`Cooccurrence`]: pairs numbered as the ranges
/// concatenated, sources and targets by rank), sentences split between the threads.
///
/// `df_target`, when given (by target rank), is taken as counted elsewhere over every sentence
/// pair; then sentence pairs that hold none of the sources (most of them, when the sources are
/// one range of many) are not searched for targets.
pub(super) fn count_sentences(
    x: &Extracted,
    ranks: &Ranks,
    table: &Table,
    max: usize,
    threads: usize,
    df_target: Option<&[u32]>,
) -> Counts {
    // Each source's options: its pairs' targets, sorted, and the index of its first pair.
    let mut pair_start = Vec::with_capacity(ranks.source_nodes.len() + 1);
    let mut targets = Vec::with_capacity(table.pairs as usize);
    for range in &table.ranges {
        for k in 0..range.offsets.len() - 1 {
            pair_start.push(targets.len());
            let options = &range.pairs[range.offsets[k]..range.offsets[k + 1]];
            targets.extend(options.iter().map(|p| p.target));
        }
    }
    pair_start.push(targets.len());
    let counts = Cooccurrence::new(pair_start, targets, ranks.target_nodes.len());
    let sentences = x.source.sentences.ends.len();
    let per_thread = sentences.div_ceil(threads.max(1)).max(1);
    let counts_ref = &counts;
    std::thread::scope(|scope| {
        for first in (0..sentences).step_by(per_thread) {
            let last = (first + per_thread).min(sentences);
            scope.spawn(move || {
                let (mut s_found, mut t_found) = (Vec::new(), Vec::new());
                for k in first..last {
                    find_phrases(&x.source, &ranks.source_rank, k, max, &mut s_found);
                    if s_found.is_empty() && df_target.is_some() {
                        continue;
                    }
                    find_phrases(&x.target, &ranks.target_rank, k, max, &mut t_found);
                    counts_ref.add_sentence(&mut s_found, &mut t_found);
                }
            });
        }
    });
    let mut counts = counts.into_counts();
    if let Some(df) = df_target {
        counts.set_df_target(df);
    }
    counts
}

/// The ranks of the extracted phrases occurring in sentence `k` of `side` (with repeats).
fn find_phrases(side: &Side, rank: &[u32], k: usize, max: usize, found: &mut Vec<u32>) {
    found.clear();
    side.tree.each_in(side.sentences.get(k), max, |node| {
        if rank[node as usize] != NO_NODE {
            found.push(rank[node as usize]);
        }
    });
}

/// Rows scored and formatted per block by each thread.
const ROWS_PER_BLOCK: usize = 1 << 15;

/// What [`write_table`] shares between calls when the table is written in source ranges.
pub(super) struct Writing<'a> {
    /// Whether to write the header (the first range does).
    pub(super) header: bool,
    /// The word translation table ([`word_table`]).
    pub(super) words: &'a WordTable,
    /// The alignments' links by id ([`alignment_links`]).
    pub(super) links: &'a [Vec<(u16, u16)>],
    /// Whether to make the text of every target once (fast when all rows are written in one
    /// call; a source range's rows find their targets' text in the tree instead).
    pub(super) cache_targets: bool,
}

/// The word translation table of the corpus's word links.
pub(super) fn word_table(x: &Extracted) -> WordTable {
    WordTable::from_ids(
        x.links.clone(),
        totals(&x.links, x.source.vocabulary.words.len(), |k| k.0),
        totals(&x.links, x.target.vocabulary.words.len(), |k| k.1),
    )
}

/// The links of every alignment, by id.
pub(super) fn alignment_links(alignments: &[Box<str>]) -> Result<Vec<Vec<(u16, u16)>>> {
    alignments.iter().map(|a| parse_alignment(a)).collect()
}

/// Step 5: the table to `out`.
#[allow(clippy::too_many_arguments)]
pub(super) fn write_table<W: Write>(
    x: &Extracted,
    ranks: &Ranks,
    table: &Table,
    counts: &Counts,
    info: &RunInfo,
    discount: Discount,
    threads: usize,
    mut out: W,
    output_name: &std::path::Path,
    writing: &Writing,
) -> Result<()> {
    let werr = |e| Error::io(output_name, "writing", e);
    let header = scored_header(info, discount, true);
    // The one TSV writer formats the rows; each block's writer starts with the header, cut off.
    let header_len = TsvWriter::new(Vec::new(), &header)
        .map_err(werr)?
        .into_inner()
        .len();
    if writing.header {
        out.write_all(
            &TsvWriter::new(Vec::new(), &header)
                .map_err(werr)?
                .into_inner(),
        )
        .map_err(werr)?;
    }
    let (words, links) = (writing.words, writing.links);
    let scorer = Scorer::new(discount, &table.histogram, table.scored_pairs);
    let target_texts = writing
        .cache_targets
        .then(|| PhraseTexts::new(&x.target, &ranks.target_nodes));
    let mut blocks = Vec::new();
    let mut pair_base = 0usize;
    for (r, range) in table.ranges.iter().enumerate() {
        let n = range.offsets.len() - 1;
        let mut k = 0;
        while k < n {
            let mut end = k + 1;
            while end < n && range.offsets[end] - range.offsets[k] < ROWS_PER_BLOCK {
                end += 1;
            }
            blocks.push(RowBlock {
                range: r,
                first: k,
                end,
                first_pair: pair_base + range.offsets[k],
            });
            k = end;
        }
        pair_base += range.pairs.len();
    }
    let context = RowContext {
        x,
        ranks,
        table,
        counts,
        words,
        scorer: &scorer,
        links,
        target_texts: target_texts.as_ref(),
        header: &header,
        header_len,
    };
    // Threads take blocks in turn; this thread writes them in order as they arrive.
    let next_block = AtomicUsize::new(0);
    let (tx, rx) = mpsc::sync_channel::<(usize, std::io::Result<Vec<u8>>)>(threads * 2);
    std::thread::scope(|scope| -> Result<()> {
        for _ in 0..threads.max(1) {
            let (context, blocks, next_block, tx) = (&context, &blocks, &next_block, tx.clone());
            scope.spawn(move || loop {
                let k = next_block.fetch_add(1, Ordering::Relaxed);
                let Some(&block) = blocks.get(k) else { break };
                if tx.send((k, context.format_block(block))).is_err() {
                    break;
                }
            });
        }
        drop(tx);
        let mut waiting = std::collections::BTreeMap::new();
        let mut next = 0;
        let written = (|| -> Result<()> {
            for (k, text) in &rx {
                waiting.insert(k, text.map_err(werr)?);
                while let Some(text) = waiting.remove(&next) {
                    out.write_all(&text).map_err(werr)?;
                    next += 1;
                }
            }
            Ok(())
        })();
        // On an error, stop the threads: they find no more blocks.
        next_block.store(blocks.len(), Ordering::Relaxed);
        drop(rx);
        written
    })?;
    // No flush here: the caller finishes the output once every range is written (a flush per
    // range would end a compressed output's block early, so its bytes would depend on the
    // number of ranges, that is on the memory budget).
    Ok(())
}

fn totals(
    links: &FastMap<(u32, u32), u64>,
    words: usize,
    side: impl Fn(&(u32, u32)) -> u32,
) -> Vec<u64> {
    let mut totals = vec![0u64; words + 1];
    for (key, &n) in links {
        totals[side(key) as usize] += n;
    }
    totals
}

/// The links of an alignment this module wrote (with [`write_inside`]).
fn parse_alignment(text: &str) -> Result<Vec<(u16, u16)>> {
    crate::table::split_links(text)
        .map(|link| match link {
            Ok((i, j)) => Ok((i as u16, j as u16)),
            Err(_) => Err(Error::Internal(
                "an alignment written by extraction reads back",
            )),
        })
        .collect()
}

/// The rows of sources `first..end` of range `range`, scored and formatted by one thread.
#[derive(Clone, Copy)]
struct RowBlock {
    range: usize,
    first: usize,
    end: usize,
    /// The number, over all ranges, of the block's first pair (its counts' index).
    first_pair: usize,
}

struct RowContext<'a> {
    x: &'a Extracted,
    ranks: &'a Ranks,
    table: &'a Table,
    counts: &'a Counts,
    words: &'a WordTable,
    scorer: &'a Scorer,
    links: &'a [Vec<(u16, u16)>],
    target_texts: Option<&'a PhraseTexts>,
    header: &'a crate::table::Header,
    header_len: usize,
}

impl RowContext<'_> {
    fn format_block(&self, block: RowBlock) -> std::io::Result<Vec<u8>> {
        let RowBlock {
            range,
            first,
            end,
            first_pair,
        } = block;
        let range = &self.table.ranges[range];
        let rows = range.offsets[end] - range.offsets[first];
        let mut writer = TsvWriter::new(Vec::with_capacity(rows * 160), self.header)?;
        writer.get_mut().drain(..self.header_len);
        let mut row = PhrasePair {
            scores: vec![0.0; 4],
            counts: vec![0; 6],
            ..Default::default()
        };
        let mut f = Vec::new();
        let mut e_ids = Vec::new();
        let mut scratch = Vec::new();
        for k in first..end {
            let s = range.first_source as usize + k;
            let node = self.ranks.source_nodes[s];
            self.x.source.tree.text(
                node,
                &self.x.source.vocabulary,
                &mut scratch,
                &mut row.source,
            );
            self.x.source.tree.ids(node, &mut f);
            let (cs, ns) = (self.table.source_totals[s], self.table.source_distinct[s]);
            let df_source = self.counts.df_source(s);
            for p in range.offsets[k]..range.offsets[k + 1] {
                let pair = range.pairs[p];
                let t = pair.target as usize;
                let e = match self.target_texts {
                    Some(texts) => {
                        row.target.clear();
                        row.target.push_str(texts.text(t));
                        texts.ids(t)
                    }
                    None => {
                        let node = self.ranks.target_nodes[t];
                        let side = &self.x.target;
                        side.tree
                            .text(node, &side.vocabulary, &mut scratch, &mut row.target);
                        side.tree.ids(node, &mut e_ids);
                        &e_ids
                    }
                };
                let (ct, nt) = (self.table.target_totals[t], self.table.target_distinct[t]);
                let links = &self.links[pair.alignment as usize];
                let (p_t_given_s, p_s_given_t) =
                    self.scorer
                        .probabilities(pair.count, cs, ct, u64::from(ns), u64::from(nt));
                let (lex_t, lex_s) = self.words.lexical_weights_ids(&f, e, links);
                row.scores
                    .copy_from_slice(&[p_t_given_s, p_s_given_t, lex_t, lex_s]);
                let pair_index = first_pair + p - range.offsets[first];
                row.counts.copy_from_slice(&[
                    pair.count,
                    cs,
                    ct,
                    u64::from(self.counts.cooc(pair_index)),
                    u64::from(df_source),
                    u64::from(self.counts.df_target(t)),
                ]);
                writer.write_pair_aligned(&row, &self.x.alignments[pair.alignment as usize])?;
            }
        }
        Ok(writer.into_inner())
    }
}

/// What [`extract_resident`] did.
pub(crate) struct ResidentSummary {
    pub(crate) info: RunInfo,
    pub(crate) pairs: u64,
    pub(crate) sources: u64,
    pub(crate) targets: u64,
    pub(crate) step_seconds: [f64; 4],
    /// Corpus passes of the sentence-level counting (one per source range processed).
    pub(crate) passes: u64,
}

/// Why [`extract_resident`] wrote nothing.
pub(crate) enum Declined {
    /// The corpus outgrew `--memory`.
    OverBudget,
    /// Some word holds a byte below the space after its first byte.
    WordOrder,
}

/// Runs the whole extraction in memory and writes the table to `out`; declined (nothing
/// written) when the corpus does not fit `options.memory` or its words do not order like
/// their text.
pub(crate) fn extract_resident<W: Write>(
    paths: &CorpusPaths,
    options: &ShardOptions,
    discount: Discount,
    out: W,
    output_name: &std::path::Path,
) -> Result<std::result::Result<ResidentSummary, Declined>> {
    let threads = options.threads.max(1);
    let mut lap = std::time::Instant::now();
    let mut steps = [0.0; 4];
    let mut next_lap = |k: usize| {
        steps[k] += lap.elapsed().as_secs_f64();
        lap = std::time::Instant::now();
    };
    let Some(mut x) = read_and_extract(paths, options)? else {
        return Ok(Err(Declined::OverBudget));
    };
    if !x.source.vocabulary.orders_like_text() || !x.target.vocabulary.orders_like_text() {
        return Ok(Err(Declined::WordOrder));
    }
    next_lap(0);
    let ranks = rank(&x);
    let occurrences = [
        std::mem::take(&mut x.source.occurrences),
        std::mem::take(&mut x.target.occurrences),
        std::mem::take(&mut x.occurrence_alignments),
    ];
    let pair_occurrences = occurrences[0].len() as u64;
    let table = aggregate(occurrences, &ranks, threads);
    next_lap(1);
    let max = options.limits.max_length;
    let counts = count_sentences(&x, &ranks, &table, max, threads, None);
    next_lap(2);
    let words = word_table(&x);
    let links = alignment_links(&x.alignments)?;
    let info = RunInfo {
        corpus: x.stats,
        max_length: max,
        max_sentence_length: options.corpus.max_sentence_length,
        unaligned_edges: options.limits.unaligned_edges,
        pair_occurrences,
        shards: Vec::new(),
    };
    write_table(
        &x,
        &ranks,
        &table,
        &counts,
        &info,
        discount,
        threads,
        out,
        output_name,
        &Writing {
            header: true,
            words: &words,
            links: &links,
            cache_targets: true,
        },
    )?;
    next_lap(3);
    Ok(Ok(ResidentSummary {
        info,
        pairs: table.pairs,
        sources: ranks.source_nodes.len() as u64,
        targets: ranks.target_nodes.len() as u64,
        step_seconds: steps,
        passes: 1,
    }))
}
