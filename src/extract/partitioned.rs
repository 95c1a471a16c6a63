//! Range-partitioned extraction: the in-memory machinery of [`super::resident`], one source
//! range at a time, for corpora whose phrase pairs outgrow the memory budget.
//!
//! 1. [`sample`]: the first sentence pairs give split words (quantiles of the source and of
//!    the target tokens, in byte order) and an estimate of the occurrences, which decides
//!    between this path and the fully resident one;
//! 2. pass 1 ([`read_into_buckets`]) reads the corpus once: words become ids, sentences are
//!    kept as ids, word links are counted, and every phrase-pair occurrence is appended as
//!    integers (word ids of both phrases, alignment id) to the *source bucket* of its first
//!    source word, and its target's word ids to the *target bucket* of its first target
//!    word. Buckets follow the byte order of the first word, so buckets in order are phrases
//!    in order;
//! 3. target totals ([`target_totals`]): consecutive target buckets, as many as fit the
//!    budget, become a prefix tree whose nodes count their occurrences; the totals are
//!    written in byte order of the targets to one file;
//! 4. consecutive source buckets are grouped so that each group fits the budget left beside
//!    what every group shares (sentences, word links); each group is then a small resident
//!    job: its sources and its targets become prefix trees, the occurrences are summed by
//!    source range in parallel, `count_target` is read from the totals file in one forward
//!    scan (the group's targets sorted the same way), the sentence-level counts are found in
//!    parallel over the sentences kept as ids (a target's `df_target` does not depend on
//!    which other targets are tracked), and the rows are scored and written in order.
//!
//! Every count is an integer summed by key and every score computed from the summed counts,
//! so the output is byte-identical to the resident and map/reduce paths at any budget and
//! thread count. The discounts need statistics over the whole table (count histogram,
//! distinct sources per target), which this path does not gather: with a discount the
//! caller takes the map/reduce path.

use std::cmp::Ordering as Order;
use std::io::{BufWriter, Read, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::Ordering;
use std::sync::mpsc;

use super::corpus::{CorpusPaths, CorpusReader, SentencePair};
use super::phrases::{write_inside, PhraseFinder, SpanPair};
use super::report::Progress;
use super::resident::{
    aggregate, alignment_links, alignment_ranks, count_sentences, count_word_links, rank_both,
    word_table, write_table, AlignmentNumbers, Extracted, PhraseTree, Ranks, ResidentSummary,
    Sentences, Vocabulary, Writing, ROOT,
};
use super::runs::RunInfo;
use super::score::Discount;
use super::shard::ShardOptions;
use crate::error::{Error, Result};
use crate::files::TempDir;

/// Sentence pairs read by [`sample`].
const SAMPLE_PAIRS: usize = 5_000;
/// Bucket files per side in pass 1 (groups of consecutive buckets are processed together).
const BUCKETS: usize = 64;
/// Memory per phrase-pair occurrence while a source group is processed: the occurrence as
/// read (12 bytes), as a sort key (16), as summed pairs with their sentence counters, and its
/// share of the group's two prefix trees (most phrases of a large corpus occur once).
const GROUP_BYTES_PER_OCCURRENCE: u64 = 320;
/// Memory per target occurrence while target totals are counted (a tree node at worst).
const TARGET_BYTES_PER_OCCURRENCE: u64 = 80;
/// What the fully resident path holds per occurrence, its trees included.
const RESIDENT_BYTES_PER_OCCURRENCE: u64 = 120;
/// A corpus whose source file times this fits the budget takes the resident path without a
/// sample (about 1 occurrence per source byte in natural and synthetic text, measured).
pub(crate) const BYTES_PER_CORPUS_BYTE: u64 = 256;

/// What [`sample`] learnt from the first sentence pairs.
pub(crate) struct Sample {
    /// Split keys of each side (phrases of one or two words) in strictly increasing order: a
    /// phrase with `k` split keys `<=` it goes to bucket `k`. Two words, so that the phrases
    /// of one frequent first word can spread over several buckets.
    split_keys: [Vec<Key>; 2],
    /// Phrase-pair occurrences expected in the whole corpus.
    estimated_occurrences: u64,
}

impl Sample {
    /// Whether the fully resident path is expected to fit `memory`.
    pub(crate) fn resident_fits(&self, memory: u64) -> bool {
        self.estimated_occurrences
            .saturating_mul(RESIDENT_BYTES_PER_OCCURRENCE)
            <= memory
    }
}

/// A split key: the first one or two words of a phrase.
type Key = Vec<Box<str>>;

/// Compares phrases word by word, a phrase before its extensions: byte order of their text
/// when no word holds a byte below the space after its first byte (checked after pass 1).
fn compare_words<'a, 'b>(
    a: impl IntoIterator<Item = &'a str>,
    b: impl IntoIterator<Item = &'b str>,
) -> Order {
    let (mut a, mut b) = (a.into_iter(), b.into_iter());
    loop {
        match (a.next(), b.next()) {
            (None, None) => return Order::Equal,
            (None, Some(_)) => return Order::Less,
            (Some(_), None) => return Order::Greater,
            (Some(x), Some(y)) => match x.cmp(y) {
                Order::Equal => {}
                other => return other,
            },
        }
    }
}

/// Where the phrases starting with one word go.
#[derive(Clone, Copy)]
struct WordBucket {
    /// The bucket of the one-word phrase.
    bucket: u8,
    /// Whether some split key starts with this word and goes on (then longer phrases are
    /// placed by [`bucket_of_phrase`]).
    split: bool,
}

fn word_bucket(keys: &[Key], word: &str) -> WordBucket {
    let bucket = keys.partition_point(|k| compare_words(k.iter().map(|w| &**w), [word]).is_le());
    let split = keys.iter().any(|k| k.len() > 1 && &*k[0] == word);
    WordBucket {
        bucket: bucket as u8,
        split,
    }
}

fn bucket_of_phrase<'a>(keys: &[Key], phrase: impl Iterator<Item = &'a str> + Clone) -> u8 {
    keys.partition_point(|k| compare_words(k.iter().map(|w| &**w), phrase.clone()).is_le()) as u8
}

fn quantiles(mut keys: Vec<Key>) -> Vec<Key> {
    keys.sort_unstable_by(|a, b| compare_words(a.iter().map(|w| &**w), b.iter().map(|w| &**w)));
    let mut split: Vec<Key> = Vec::new();
    for k in 1..BUCKETS {
        let Some(key) = keys.get(k * keys.len() / BUCKETS) else {
            break;
        };
        let after =
            |last: &Key| compare_words(last.iter().map(|w| &**w), key.iter().map(|w| &**w)).is_lt();
        if split.last().is_none_or(after) {
            split.push(key.clone());
        }
    }
    split
}

/// The one- or two-word prefixes starting at every token of a sentence.
fn prefixes(pair: &SentencePair, source: bool, keys: &mut Vec<Key>) {
    let (n, word) = if source {
        (
            pair.source_len(),
            SentencePair::source_phrase as fn(&SentencePair, usize, usize) -> &str,
        )
    } else {
        (
            pair.target_len(),
            SentencePair::target_phrase as fn(&SentencePair, usize, usize) -> &str,
        )
    };
    for k in 0..n {
        keys.push(
            (k..n.min(k + 2))
                .map(|j| word(pair, j, j + 1).into())
                .collect(),
        );
    }
}

/// Reads the first sentence pairs of the corpus: split words and the expected occurrences.
pub(crate) fn sample(paths: &CorpusPaths, options: &ShardOptions) -> Result<Sample> {
    let mut reader = CorpusReader::open(paths, options.corpus)?;
    let total = reader.total_bytes();
    let mut pair = SentencePair::default();
    let mut finder = PhraseFinder::default();
    let (mut source_words, mut target_words) = (Vec::new(), Vec::new());
    let (mut occurrences, mut bytes, mut pairs) = (0u64, 0u64, 0usize);
    let mut complete = true;
    while reader.next_pair(&mut pair)? {
        pairs += 1;
        bytes += pair.source.len() as u64 + 1;
        let (ns, nt) = (pair.source_len(), pair.target_len());
        prefixes(&pair, true, &mut source_words);
        prefixes(&pair, false, &mut target_words);
        finder.find(ns, nt, &pair.links, options.limits, |_| occurrences += 1);
        if pairs == SAMPLE_PAIRS {
            complete = false;
            break;
        }
    }
    let estimated_occurrences = match total {
        Some(total) if !complete && bytes > 0 => {
            (occurrences as f64 * total as f64 / bytes as f64) as u64
        }
        _ => occurrences,
    };
    Ok(Sample {
        split_keys: [quantiles(source_words), quantiles(target_words)],
        estimated_occurrences,
    })
}

/// One batch of sentence pairs for the writing thread of pass 1.
#[derive(Default)]
struct PartBatch {
    /// Words of each sentence: source then target.
    words: Vec<u32>,
    /// Per sentence: end of its source words, end of its target words.
    ends: Vec<(usize, usize)>,
    /// Per sentence: end of its occurrences.
    occurrence_ends: Vec<usize>,
    /// Per occurrence: source bucket, source span, target bucket, target span, alignment.
    occurrences: Vec<([u8; 2], [u16; 4], u32)>,
}

/// Sentence pairs per batch.
const BATCH: usize = 1024;

/// The bucket files of one side.
struct Buckets {
    paths: Vec<PathBuf>,
    writers: Vec<BufWriter<std::fs::File>>,
    /// Occurrences in each bucket.
    counts: Vec<u64>,
}

impl Buckets {
    fn create(dir: &Path, side: &str, n: usize) -> Result<Buckets> {
        let mut b = Buckets {
            paths: Vec::new(),
            writers: Vec::new(),
            counts: vec![0; n],
        };
        for k in 0..n {
            let path = dir.join(format!("{side}-{k:03}.occ"));
            let file = std::fs::File::create(&path).map_err(|e| Error::io(&path, "creating", e))?;
            b.writers.push(BufWriter::with_capacity(128 << 10, file));
            b.paths.push(path);
        }
        Ok(b)
    }

    /// Appends one record of little-endian integers.
    fn push(&mut self, bucket: usize, record: &[u8]) -> Result<()> {
        self.counts[bucket] += 1;
        self.writers[bucket]
            .write_all(record)
            .map_err(|e| Error::io(&self.paths[bucket], "writing", e))
    }

    fn finish(&mut self) -> Result<()> {
        for (w, path) in self.writers.iter_mut().zip(&self.paths) {
            w.flush().map_err(|e| Error::io(path, "writing", e))?;
        }
        self.writers.clear();
        Ok(())
    }
}

fn put(record: &mut Vec<u8>, v: u32) {
    record.extend_from_slice(&v.to_le_bytes());
}

/// The writing thread of pass 1: each occurrence to its source bucket as
/// `[source length, target length, source ids, target ids, alignment]` and its target to its
/// target bucket as `[target length, target ids]`.
fn write_buckets(batches: mpsc::Receiver<PartBatch>, buckets: &mut [Buckets; 2]) -> Result<()> {
    let mut record = Vec::with_capacity(64);
    for batch in batches {
        let (mut word_start, mut occurrence_start) = (0, 0);
        for (&(source_end, target_end), &occurrence_end) in
            batch.ends.iter().zip(&batch.occurrence_ends)
        {
            let f = &batch.words[word_start..source_end];
            let e = &batch.words[source_end..target_end];
            for &(bucket, [s0, s1, t0, t1], alignment) in
                &batch.occurrences[occurrence_start..occurrence_end]
            {
                let source = &f[usize::from(s0)..usize::from(s1)];
                let target = &e[usize::from(t0)..usize::from(t1)];
                record.clear();
                put(&mut record, source.len() as u32);
                put(&mut record, target.len() as u32);
                source
                    .iter()
                    .chain(target)
                    .for_each(|&w| put(&mut record, w));
                put(&mut record, alignment);
                buckets[0].push(usize::from(bucket[0]), &record)?;
                record.clear();
                put(&mut record, target.len() as u32);
                target.iter().for_each(|&w| put(&mut record, w));
                buckets[1].push(usize::from(bucket[1]), &record)?;
            }
            (word_start, occurrence_start) = (target_end, occurrence_end);
        }
    }
    buckets[0].finish()?;
    buckets[1].finish()
}

/// Pass 1's result.
struct Pass1 {
    /// Sentences, vocabularies, alignments, word links (no trees, no occurrences).
    x: Extracted,
    pair_occurrences: u64,
    /// Bytes held by `x` for the rest of the job.
    shared_bytes: u64,
}

/// Pass 1: reads the corpus into the buckets.
fn read_into_buckets(
    paths: &CorpusPaths,
    options: &ShardOptions,
    sample: &Sample,
    buckets: &mut [Buckets; 2],
) -> Result<Pass1> {
    let mut reader = CorpusReader::open(paths, options.corpus)?;
    let progress = Progress::new("extract", reader.total_bytes(), options.progress);
    let counter = reader.progress_counter();
    let mut x = Extracted::new();
    let (tx, rx) = mpsc::sync_channel::<PartBatch>(4);
    let mut pair_occurrences = 0u64;
    let (read, written) = std::thread::scope(|scope| {
        let writer = scope.spawn(|| write_buckets(rx, buckets));
        let read = (|| -> Result<()> {
            let mut alignment_ids = AlignmentNumbers::default();
            let mut bucket_of_word: [Vec<WordBucket>; 2] = [Vec::new(), Vec::new()];
            let mut pair = SentencePair::default();
            let mut finder = PhraseFinder::default();
            let mut spans: Vec<SpanPair> = Vec::new();
            let mut text = String::new();
            let mut aligned = (Vec::new(), Vec::new());
            let mut batch = PartBatch::default();
            let mut sentences = 0u64;
            while reader.next_pair(&mut pair)? {
                let (ns, nt) = (pair.source_len(), pair.target_len());
                x.source.push_sentence(&pair.source, &pair.source_starts);
                x.target.push_sentence(&pair.target, &pair.target_starts);
                for (k, side) in [&x.source, &x.target].into_iter().enumerate() {
                    let words = &side.vocabulary.words;
                    let known = &mut bucket_of_word[k];
                    while known.len() < words.len() {
                        known.push(word_bucket(&sample.split_keys[k], &words[known.len()]));
                    }
                }
                sentences += 1;
                let f = x.source.sentences.get(x.source.sentences.ends.len() - 1);
                let e = x.target.sentences.get(x.target.sentences.ends.len() - 1);
                count_word_links(&mut x.links, &pair.links, (f, e), &mut aligned);
                spans.clear();
                finder.find(ns, nt, &pair.links, options.limits, |p| spans.push(p));
                pair_occurrences += spans.len() as u64;
                batch.words.extend_from_slice(f);
                let source_end = batch.words.len();
                batch.words.extend_from_slice(e);
                batch.ends.push((source_end, batch.words.len()));
                for &p in &spans {
                    text.clear();
                    write_inside(&pair.links, p, &mut text);
                    let (a, _) = alignment_ids.number(&text, &mut x.alignments);
                    let side = |k: usize, ids: &[u32], vocabulary: &Vocabulary| {
                        let first = bucket_of_word[k][ids[0] as usize - 1];
                        if first.split && ids.len() > 1 {
                            let words = ids.iter().map(|&w| vocabulary.word(w));
                            bucket_of_phrase(&sample.split_keys[k], words)
                        } else {
                            first.bucket
                        }
                    };
                    let bucket = [
                        side(0, &f[p.source_start..p.source_end], &x.source.vocabulary),
                        side(1, &e[p.target_start..p.target_end], &x.target.vocabulary),
                    ];
                    let span = [p.source_start, p.source_end, p.target_start, p.target_end]
                        .map(|v| v as u16);
                    batch.occurrences.push((bucket, span, a));
                }
                batch.occurrence_ends.push(batch.occurrences.len());
                if batch.ends.len() == BATCH {
                    if tx.send(std::mem::take(&mut batch)).is_err() {
                        // The writing thread stopped: its error is reported.
                        return Ok(());
                    }
                    progress.update(counter.load(Ordering::Relaxed), sentences);
                }
            }
            let _ = tx.send(batch);
            Ok(())
        })();
        drop(tx);
        let written = writer.join().map_err(|_| Error::WorkerPanicked {
            worker: "bucket writer",
        })?;
        Ok::<_, Error>((read, written))
    })?;
    progress.finish();
    read?;
    written?;
    x.stats = reader.stats();
    let alignment_bytes: usize = x.alignments.iter().map(|a| 2 * a.len() + 48).sum();
    let shared_bytes =
        (x.source.bytes() + x.target.bytes() + x.links.len() * 24 * 2 + alignment_bytes) as u64;
    Ok(Pass1 {
        x,
        pair_occurrences,
        shared_bytes,
    })
}

/// Groups consecutive buckets so that each group's occurrences fit `available` bytes.
fn groups(counts: &[u64], per_occurrence: u64, available: u64) -> Vec<std::ops::Range<usize>> {
    let mut groups = Vec::new();
    let (mut start, mut held) = (0, 0u64);
    for (k, &n) in counts.iter().enumerate() {
        let bytes = n * per_occurrence;
        if k > start && held + bytes > available {
            groups.push(start..k);
            (start, held) = (k, 0);
        }
        held += bytes;
    }
    if start < counts.len() {
        groups.push(start..counts.len());
    }
    groups
}

fn damaged(path: &Path, reason: &str) -> Error {
    Error::DamagedTemporary {
        what: "occurrence bucket",
        reason: format!("{}: {reason}", path.display()),
    }
}

/// The little-endian integers of a bucket file.
fn read_values(path: &Path) -> Result<Vec<u32>> {
    let bytes = std::fs::read(path).map_err(|e| Error::io(path, "reading", e))?;
    if bytes.len() % 4 != 0 {
        return Err(damaged(path, "length is not a whole number of integers"));
    }
    Ok(bytes
        .chunks_exact(4)
        .map(|c| u32::from_le_bytes([c[0], c[1], c[2], c[3]]))
        .collect())
}

/// The node of the phrase `words` in `tree`, added with its prefixes if new.
fn intern(tree: &mut PhraseTree, words: &[u32]) -> u32 {
    let node = words.iter().fold(ROOT, |node, &w| tree.child(node, w));
    tree.extracted[node as usize] = true;
    node
}

/// Checks a phrase length read back from a bucket.
fn length(path: &Path, len: u32, max: usize, rest: usize) -> Result<usize> {
    let len = len as usize;
    if len == 0 || len > max || len > rest {
        return Err(damaged(path, "a phrase length is out of range"));
    }
    Ok(len)
}

/// Step 3: the occurrences (`count_target`) and the sentence pairs holding it (`df_target`) of
/// every target, in byte order of the targets, into `out` as `[length, big-endian word ranks,
/// count (u64), df (u32)]` records. Returns the number of targets.
///
/// `df_target` is counted here, one target bucket at a time, so that the source ranges need
/// not look for targets in sentence pairs that hold none of their sources: a bucket's tree only
/// has the bucket's first words at its root, so across all buckets each target-side position is
/// walked about once (the others stop at the root).
#[allow(clippy::too_many_arguments)]
fn target_totals(
    buckets: &Buckets,
    groups: &[std::ops::Range<usize>],
    max: usize,
    word_rank: &[u32],
    sentences: &Sentences,
    threads: usize,
    out: &Path,
) -> Result<u64> {
    let werr = |e| Error::io(out, "writing", e);
    let file = std::fs::File::create(out).map_err(|e| Error::io(out, "creating", e))?;
    let mut w = BufWriter::with_capacity(1 << 20, file);
    let mut targets = 0u64;
    let mut ids = Vec::new();
    for group in groups {
        // Each bucket holds its own targets (a target is in exactly one bucket, buckets in
        // byte order), so the group's buckets get a tree each, built `threads` at a time.
        let paths = &buckets.paths[group.clone()];
        let next = std::sync::atomic::AtomicUsize::new(0);
        let mut built: Vec<(usize, Result<BucketTree>)> = std::thread::scope(|scope| {
            let workers: Vec<_> = (0..threads.max(1).min(paths.len()))
                .map(|_| {
                    scope.spawn(|| {
                        let mut done = Vec::new();
                        loop {
                            let b = next.fetch_add(1, Ordering::Relaxed);
                            let Some(path) = paths.get(b) else { break };
                            done.push((b, bucket_target_tree(path, max)));
                        }
                        done
                    })
                })
                .collect();
            workers
                .into_iter()
                .flat_map(|h| h.join().expect("tree thread panicked"))
                .collect()
        });
        built.sort_by_key(|(b, _)| *b);
        for (_, bucket) in built {
            let (tree, counts) = bucket?;
            let df = sentence_frequencies(&tree, sentences, max, threads);
            let (_, by_rank) = tree.ranks(word_rank);
            for &node in &by_rank {
                tree.ids(node, &mut ids);
                w.write_all(&(ids.len() as u32).to_le_bytes())
                    .map_err(werr)?;
                // Words as big-endian ranks: the bytes of two targets compare as the targets do.
                for id in &ids {
                    w.write_all(&word_rank[id.expect("a word") as usize].to_be_bytes())
                        .map_err(werr)?;
                }
                w.write_all(&counts[node as usize].to_le_bytes())
                    .map_err(werr)?;
                w.write_all(&df[node as usize].to_le_bytes())
                    .map_err(werr)?;
            }
            targets += by_rank.len() as u64;
        }
    }
    w.flush().map_err(werr)?;
    Ok(targets)
}

/// The tree of one target bucket's phrases and each node's number of occurrences.
type BucketTree = (PhraseTree, Vec<u64>);

/// Reads one target bucket into its [`BucketTree`].
fn bucket_target_tree(path: &Path, max: usize) -> Result<BucketTree> {
    let mut tree = PhraseTree::new();
    let mut counts: Vec<u64> = Vec::new();
    let values = read_values(path)?;
    let mut k = 0;
    while k < values.len() {
        let len = length(path, values[k], max, values.len() - k - 1)?;
        let node = intern(&mut tree, &values[k + 1..k + 1 + len]) as usize;
        if counts.len() <= node {
            counts.resize(tree.len().max(node + 1), 0);
        }
        counts[node] += 1;
        k += 1 + len;
    }
    Ok((tree, counts))
}

/// For each node of `tree` whose phrase was extracted, the number of sentences holding the
/// phrase (each sentence once), by node; the sentences are split between `threads` threads.
fn sentence_frequencies(
    tree: &PhraseTree,
    sentences: &Sentences,
    max: usize,
    threads: usize,
) -> Vec<u32> {
    let n = sentences.ends.len();
    let per_thread = n.div_ceil(threads.max(1)).max(1);
    let parts: Vec<Vec<u32>> = std::thread::scope(|scope| {
        let handles: Vec<_> = (0..n)
            .step_by(per_thread)
            .map(|first| {
                scope.spawn(move || {
                    let mut df = vec![0u32; tree.len()];
                    let mut found = Vec::new();
                    for k in first..(first + per_thread).min(n) {
                        tree.extracted_in(sentences.get(k), max, &mut found);
                        found.sort_unstable();
                        found.dedup();
                        for &node in &found {
                            df[node as usize] += 1;
                        }
                    }
                    df
                })
            })
            .collect();
        handles
            .into_iter()
            .map(|h| h.join().expect("counting thread panicked"))
            .collect()
    });
    let mut parts = parts.into_iter();
    let mut df = parts.next().unwrap_or_else(|| vec![0; tree.len()]);
    for part in parts {
        for (a, b) in df.iter_mut().zip(part) {
            *a += b;
        }
    }
    df
}

/// Reads [`target_totals`]' file forward, a large buffer at a time: every source range reads
/// the whole file (its targets are spread over all of it), so this is a scan of many records
/// per target asked for, compared as bytes.
struct TotalsReader {
    path: PathBuf,
    file: std::fs::File,
    buf: Vec<u8>,
    /// `buf[pos..end]` is read and not yet consumed.
    pos: usize,
    end: usize,
}

impl TotalsReader {
    const BUFFER: usize = 1 << 20;

    fn open(path: &Path) -> Result<TotalsReader> {
        let file = std::fs::File::open(path).map_err(|e| Error::io(path, "opening", e))?;
        Ok(TotalsReader {
            path: path.to_path_buf(),
            file,
            buf: vec![0; Self::BUFFER],
            pos: 0,
            end: 0,
        })
    }

    /// Makes `n` bytes available at `pos`; false if the file ends first.
    fn fill(&mut self, n: usize) -> Result<bool> {
        if self.end - self.pos >= n {
            return Ok(true);
        }
        self.buf.copy_within(self.pos..self.end, 0);
        self.end -= self.pos;
        self.pos = 0;
        if self.buf.len() < n {
            self.buf.resize(n, 0);
        }
        while self.end < n {
            let got = self
                .file
                .read(&mut self.buf[self.end..])
                .map_err(|e| Error::io(&self.path, "reading", e))?;
            if got == 0 {
                return Ok(false);
            }
            self.end += got;
        }
        Ok(true)
    }

    /// `(count_target, df_target)` of the target whose words' big-endian ranks are `key`,
    /// reading forward (targets must be asked in byte order).
    fn total(&mut self, key: &[u8], max: usize) -> Result<(u64, u32)> {
        let missing = |path: &Path| damaged(path, "ends before a target the table holds");
        loop {
            if !self.fill(4)? {
                return Err(missing(&self.path));
            }
            let at = self.pos;
            let len = u32::from_le_bytes(self.buf[at..at + 4].try_into().expect("4 bytes"));
            let len = len as usize;
            if len == 0 || len > max {
                return Err(damaged(&self.path, "a phrase length is out of range"));
            }
            let record = 4 + 4 * len + 8 + 4;
            if !self.fill(record)? {
                return Err(missing(&self.path));
            }
            let at = self.pos;
            match self.buf[at + 4..at + 4 + 4 * len].cmp(key) {
                Order::Equal => {
                    let count = &self.buf[at + 4 + 4 * len..at + record - 4];
                    let df = &self.buf[at + record - 4..at + record];
                    return Ok((
                        u64::from_le_bytes(count.try_into().expect("8 bytes")),
                        u32::from_le_bytes(df.try_into().expect("4 bytes")),
                    ));
                }
                Order::Greater => {
                    return Err(damaged(&self.path, "a target of the table is missing"))
                }
                Order::Less => self.pos += record,
            }
        }
    }
}

/// `count_target` and `df_target` of a range's targets (by rank), from [`target_totals`]' file.
fn range_target_totals(
    path: &Path,
    tree: &PhraseTree,
    ranks: &Ranks,
    word_ranks: &[u32],
    max: usize,
) -> Result<(Vec<u64>, Vec<u32>)> {
    let mut totals = TotalsReader::open(path)?;
    let n = ranks.target_nodes.len();
    let (mut counts, mut df) = (Vec::with_capacity(n), Vec::with_capacity(n));
    let (mut ids, mut key) = (Vec::new(), Vec::new());
    for &node in &ranks.target_nodes {
        tree.ids(node, &mut ids);
        key.clear();
        for w in &ids {
            key.extend_from_slice(&word_ranks[w.expect("a word") as usize].to_be_bytes());
        }
        let (count, frequency) = totals.total(&key, max)?;
        counts.push(count);
        df.push(frequency);
    }
    Ok((counts, df))
}

/// Reads a source group's buckets: its sources' and targets' prefix trees and its
/// occurrences `[source node, target node, alignment id]`.
fn load_group(
    paths: &[PathBuf],
    expected: u64,
    max: usize,
    alignments: usize,
) -> Result<(PhraseTree, PhraseTree, [Vec<u32>; 3])> {
    let (mut sources, mut targets) = (PhraseTree::new(), PhraseTree::new());
    let n = expected as usize;
    let mut occ = [
        Vec::with_capacity(n),
        Vec::with_capacity(n),
        Vec::with_capacity(n),
    ];
    let mut starts = Vec::new();
    for path in paths {
        let values = read_values(path)?;
        // Check every record and note where each starts; then the two trees are built at once.
        starts.clear();
        let mut k = 0;
        while k < values.len() {
            if values.len() - k < 2 {
                return Err(damaged(path, "cut inside a record"));
            }
            let ls = length(path, values[k], max, values.len() - k)?;
            let lt = length(path, values[k + 1], max, values.len() - k)?;
            if values.len() - k < 3 + ls + lt {
                return Err(damaged(path, "cut inside a record"));
            }
            if values[k + 2 + ls + lt] as usize >= alignments {
                return Err(damaged(path, "an alignment number is out of range"));
            }
            starts.push(k);
            k += 3 + ls + lt;
        }
        let [occ_s, occ_t, occ_a] = &mut occ;
        let (values, starts) = (&values, &starts);
        let targets = &mut targets;
        std::thread::scope(|scope| {
            scope.spawn(move || {
                for &k in starts {
                    let (ls, lt) = (values[k] as usize, values[k + 1] as usize);
                    occ_t.push(intern(targets, &values[k + 2 + ls..k + 2 + ls + lt]));
                }
            });
            for &k in starts {
                let (ls, lt) = (values[k] as usize, values[k + 1] as usize);
                occ_s.push(intern(&mut sources, &values[k + 2..k + 2 + ls]));
                occ_a.push(values[k + 2 + ls + lt]);
            }
        });
    }
    if occ[0].len() as u64 != expected {
        return Err(Error::DamagedTemporary {
            what: "occurrence bucket",
            reason: format!("{} occurrences read back, {expected} written", occ[0].len()),
        });
    }
    Ok((sources, targets, occ))
}

/// Runs the extraction range by range and writes the table to `out`; `None` (nothing
/// written) when a discount is asked for or some word holds a byte below the space after its
/// first byte (word order and text order differ): the caller takes the map/reduce path.
pub(crate) fn extract_partitioned<W: Write>(
    paths: &CorpusPaths,
    options: &ShardOptions,
    discount: Discount,
    sample: &Sample,
    mut out: W,
    output_name: &Path,
) -> Result<Option<ResidentSummary>> {
    if discount != Discount::None {
        return Ok(None);
    }
    let threads = options.threads.max(1);
    let max = options.limits.max_length;
    let mut lap = std::time::Instant::now();
    let mut steps = [0.0; 4];
    let mut next_lap = |k: usize| {
        steps[k] += lap.elapsed().as_secs_f64();
        lap = std::time::Instant::now();
    };
    let dir = TempDir::new(options.temp_dir.as_deref(), "baler-extract-parts-")?;
    let mut buckets = [
        Buckets::create(dir.path(), "source", sample.split_keys[0].len() + 1)?,
        Buckets::create(dir.path(), "target", sample.split_keys[1].len() + 1)?,
    ];
    let Pass1 {
        mut x,
        pair_occurrences,
        shared_bytes,
    } = read_into_buckets(paths, options, sample, &mut buckets)?;
    if !x.source.vocabulary.orders_like_text() || !x.target.vocabulary.orders_like_text() {
        return Ok(None);
    }
    let source_word_ranks = x.source.vocabulary.byte_ranks();
    let target_word_ranks = x.target.vocabulary.byte_ranks();
    let available = options
        .memory
        .saturating_sub(shared_bytes)
        .max(options.memory / 4);
    next_lap(0);
    let totals_path = dir.path().join("target-totals");
    let target_groups = groups(&buckets[1].counts, TARGET_BYTES_PER_OCCURRENCE, available);
    let targets = target_totals(
        &buckets[1],
        &target_groups,
        max,
        &target_word_ranks,
        &x.target.sentences,
        threads,
        &totals_path,
    )?;
    let source_groups = groups(&buckets[0].counts, GROUP_BYTES_PER_OCCURRENCE, available);
    let words = word_table(&x);
    let links = alignment_links(&x.alignments)?;
    let alignment_rank = alignment_ranks(&x.alignments);
    let info = RunInfo {
        corpus: x.stats,
        max_length: max,
        max_sentence_length: options.corpus.max_sentence_length,
        unaligned_edges: options.limits.unaligned_edges,
        pair_occurrences,
        shards: Vec::new(),
    };
    let (mut pairs, mut sources) = (0u64, 0u64);
    next_lap(1);
    for (k, group) in source_groups.iter().enumerate() {
        let (source_tree, target_tree, occurrences) = load_group(
            &buckets[0].paths[group.clone()],
            buckets[0].counts[group.clone()].iter().sum(),
            max,
            x.alignments.len(),
        )?;
        let ((source_rank, source_nodes), (target_rank, target_nodes)) = rank_both(
            (&source_tree, &source_word_ranks),
            (&target_tree, &target_word_ranks),
        );
        x.source.tree = source_tree;
        x.target.tree = target_tree;
        let ranks = Ranks {
            source_rank,
            source_nodes,
            target_rank,
            target_nodes,
            alignment_rank: alignment_rank.clone(),
        };
        // `count_target` sums over every source range: from the totals, in target order. The
        // scan of the totals file (one thread) runs while the pairs are summed.
        let (table, totals) = std::thread::scope(|scope| {
            let scan = scope.spawn(|| {
                range_target_totals(
                    &totals_path,
                    &x.target.tree,
                    &ranks,
                    &target_word_ranks,
                    max,
                )
            });
            let table = aggregate(occurrences, &ranks, threads);
            (table, scan.join().expect("totals thread panicked"))
        });
        let mut table = table;
        let (target_totals, df_target) = totals?;
        table.target_totals = target_totals;
        next_lap(1);
        let counts = count_sentences(&x, &ranks, &table, max, threads, Some(&df_target));
        next_lap(2);
        write_table(
            &x,
            &ranks,
            &table,
            &counts,
            &info,
            discount,
            threads,
            &mut out,
            output_name,
            &Writing {
                header: k == 0,
                words: &words,
                links: &links,
                cache_targets: true,
            },
        )?;
        next_lap(3);
        pairs += table.pairs;
        sources += ranks.source_nodes.len() as u64;
    }
    Ok(Some(ResidentSummary {
        info,
        pairs,
        sources,
        targets,
        step_seconds: steps,
        passes: source_groups.len() as u64,
    }))
}
