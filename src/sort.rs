//! The one external sorter and the one k-way merge of sorted runs.
//!
//! [`ExternalSorter`] takes key/value byte records into an in-memory arena; when the arena
//! reaches the budget it is sorted by key and spilled to a zstd-compressed, checksummed run in
//! a temporary directory. [`ExternalSorter::finish`] merges the runs (and what is still in
//! memory) into one stream in key byte order. Records with equal keys come out in the order
//! they were pushed, so the sort is stable.
//!
//! [`Merge`] is the k-way merge behind it, over anything that reads as a [`SortedRun`]: the
//! sorter's own runs, and the extraction's count runs (`extract::runs`), whose merge sums the
//! counts of equal keys on top of it.

use std::cmp::Ordering;
use std::fs::File;
use std::io::{self, BufReader, BufWriter, Read, Write};
use std::path::PathBuf;

use crate::error::{Error, Result};
use crate::files::TempDir;

/// Bytes counted per record beside its key and value: one [`Slot`].
const RECORD_OVERHEAD: usize = std::mem::size_of::<Slot>();

/// A sequence of records in key byte order, read one at a time.
pub(crate) trait SortedRun {
    /// Moves to the next record; false at the end (the first call moves to the first record).
    fn advance(&mut self) -> Result<bool>;
    /// The current record's key.
    fn key(&self) -> &[u8];
}

/// A k-way merge of [`SortedRun`]s: records in key order, equal keys in the order of the runs
/// (so merging runs written one after another is stable). The runs stay in place and are
/// compared through a binary heap of their indices, so no key is copied.
pub(crate) struct Merge<R> {
    runs: Vec<R>,
    /// Indices of the runs that have a current record, a min-heap by (key, index).
    heap: Vec<usize>,
    /// The top run's record was handed out: advance that run before looking again.
    taken: bool,
}

impl<R: SortedRun> Merge<R> {
    /// Starts merging `runs` (moves each to its first record).
    pub(crate) fn new(mut runs: Vec<R>) -> Result<Merge<R>> {
        let mut heap = Vec::with_capacity(runs.len());
        for (i, run) in runs.iter_mut().enumerate() {
            if run.advance()? {
                heap.push(i);
            }
        }
        let mut merge = Merge {
            runs,
            heap,
            taken: false,
        };
        for at in (0..merge.heap.len() / 2).rev() {
            merge.sift_down(at);
        }
        Ok(merge)
    }

    /// Whether the run at heap position `a` holds a smaller record than the one at `b`.
    fn before(&self, a: usize, b: usize) -> bool {
        let (x, y) = (self.heap[a], self.heap[b]);
        match self.runs[x].key().cmp(self.runs[y].key()) {
            Ordering::Less => true,
            Ordering::Greater => false,
            Ordering::Equal => x < y,
        }
    }

    fn sift_down(&mut self, mut at: usize) {
        loop {
            let left = 2 * at + 1;
            if left >= self.heap.len() {
                return;
            }
            let right = left + 1;
            let child = if right < self.heap.len() && self.before(right, left) {
                right
            } else {
                left
            };
            if !self.before(child, at) {
                return;
            }
            self.heap.swap(at, child);
            at = child;
        }
    }

    /// The index of the run holding the smallest record not handed out yet, without handing
    /// it out; `None` at the end.
    pub(crate) fn peek(&mut self) -> Result<Option<usize>> {
        if self.taken {
            self.taken = false;
            let top = self.heap[0];
            if !self.runs[top].advance()? {
                self.heap.swap_remove(0);
            }
            self.sift_down(0);
        }
        Ok(self.heap.first().copied())
    }

    /// Hands out the smallest record: the run holding it, positioned on it; `None` at the end.
    pub(crate) fn next(&mut self) -> Result<Option<&mut R>> {
        match self.peek()? {
            Some(i) => {
                self.taken = true;
                Ok(Some(&mut self.runs[i]))
            }
            None => Ok(None),
        }
    }

    /// Run `i` (as numbered by [`Merge::peek`]).
    pub(crate) fn run(&self, i: usize) -> &R {
        &self.runs[i]
    }
}

/// A record in the sorter's arena: its first eight key bytes as a big-endian number (shorter
/// keys padded with zeros, which orders like the bytes up to ties), where its key starts and
/// the key's length. Sorting compares the prefix first, so most comparisons never touch the
/// arena. In the arena a record is the value's length (`u32`, little-endian), the key, the
/// value; 16 bytes a slot keep the index small and its sort fast.
#[derive(Clone, Copy)]
struct Slot {
    prefix: u64,
    start: u32,
    klen: u32,
}

impl Slot {
    fn key<'a>(&self, arena: &'a [u8]) -> &'a [u8] {
        &arena[self.start as usize..(self.start + self.klen) as usize]
    }

    fn value<'a>(&self, arena: &'a [u8]) -> &'a [u8] {
        let start = self.start as usize;
        let vlen = u32::from_le_bytes(arena[start - 4..start].try_into().expect("4 bytes"));
        let from = start + self.klen as usize;
        &arena[from..from + vlen as usize]
    }
}

fn prefix(key: &[u8]) -> u64 {
    let mut b = [0u8; 8];
    let n = key.len().min(8);
    b[..n].copy_from_slice(&key[..n]);
    u64::from_be_bytes(b)
}

/// Sorts `(key, value)` byte records, spilling to disk past a memory budget.
///
/// ```ignore
/// // (internal module; the unit test `sorts_with_spills` runs this)
/// let mut sorter = ExternalSorter::new(64, None)?;
/// sorter.push(b"quay", b"1")?;
/// sorter.push(b"anchor", b"2")?;
/// let mut sorted = sorter.finish()?;
/// assert_eq!(sorted.next_record()?, Some((&b"anchor"[..], &b"2"[..])));
/// ```
pub struct ExternalSorter {
    budget: usize,
    arena: Vec<u8>,
    index: Vec<Slot>,
    dir: Option<TempDir>,
    parent: Option<PathBuf>,
    runs: Vec<PathBuf>,
    in_order: bool,
}

impl ExternalSorter {
    /// A sorter holding at most about `budget` bytes in memory; runs go to a temporary
    /// directory inside `temp_parent` (or the system default).
    pub fn new(budget: usize, temp_parent: Option<PathBuf>) -> Result<ExternalSorter> {
        Ok(ExternalSorter {
            budget: budget.max(1),
            arena: Vec::new(),
            index: Vec::new(),
            dir: None,
            parent: temp_parent,
            runs: Vec::new(),
            in_order: true,
        })
    }

    /// Adds one record.
    pub fn push(&mut self, key: &[u8], value: &[u8]) -> Result<()> {
        if self.arena.len() + 4 + key.len() + value.len() > u32::MAX as usize {
            self.spill()?; // slots address the arena with 32 bits
        }
        if self.in_order {
            if let Some(last) = self.index.last() {
                self.in_order = last.key(&self.arena) <= key;
            }
        }
        self.arena
            .extend_from_slice(&(value.len() as u32).to_le_bytes());
        let start = self.arena.len() as u32;
        self.arena.extend_from_slice(key);
        self.arena.extend_from_slice(value);
        self.index.push(Slot {
            prefix: prefix(key),
            start,
            klen: key.len() as u32,
        });
        if self.memory_used() >= self.budget {
            self.spill()?;
        }
        Ok(())
    }

    /// Bytes currently held in memory.
    fn memory_used(&self) -> usize {
        self.arena.len() + self.index.len() * RECORD_OVERHEAD
    }

    fn sort_in_memory(&mut self) {
        if self.in_order {
            return; // pushed in key order already (the common case for pipeline outputs)
        }
        let arena = &self.arena;
        let key = |s: &Slot| s.key(arena);
        // Prefix, then the whole key, then the arena position, which keeps equal keys in push
        // order without a stable sort's buffer.
        self.index.sort_unstable_by(|a, b| {
            a.prefix
                .cmp(&b.prefix)
                .then_with(|| key(a).cmp(key(b)))
                .then(a.start.cmp(&b.start))
        });
        self.in_order = true;
    }

    fn spill(&mut self) -> Result<()> {
        if self.index.is_empty() {
            return Ok(());
        }
        self.sort_in_memory();
        if self.dir.is_none() {
            self.dir = Some(TempDir::new(self.parent.as_deref(), "baler-sort-")?);
        }
        let path = self
            .dir
            .as_ref()
            .expect("created above")
            .path()
            .join(format!("run-{}", self.runs.len()));
        let file = File::create(&path).map_err(|e| Error::io(&path, "creating", e))?;
        let werr = |e| Error::io(&path, "writing", e);
        let mut enc = zstd::stream::write::Encoder::new(BufWriter::with_capacity(1 << 16, file), 1)
            .map_err(werr)?;
        enc.include_checksum(true).map_err(werr)?;
        for s in &self.index {
            let (key, value) = (s.key(&self.arena), s.value(&self.arena));
            enc.write_all(&s.klen.to_le_bytes()).map_err(werr)?;
            enc.write_all(&(value.len() as u32).to_le_bytes())
                .map_err(werr)?;
            enc.write_all(key).map_err(werr)?;
            enc.write_all(value).map_err(werr)?;
        }
        let mut file = enc.finish().map_err(werr)?;
        file.flush().map_err(werr)?;
        self.runs.push(path);
        self.arena.clear();
        self.index.clear();
        self.in_order = true;
        Ok(())
    }

    /// Ends input and returns the merged stream. Once anything was spilled, the records still
    /// in memory are spilled too, so that the merge holds only the runs' buffers (the memory
    /// goes back before whatever consumes the stream fills its own).
    pub fn finish(mut self) -> Result<SortedRecords> {
        if !self.runs.is_empty() {
            self.spill()?;
            self.arena = Vec::new();
            self.index = Vec::new();
        }
        self.sort_in_memory();
        let mut sources = Vec::with_capacity(self.runs.len() + 1);
        for path in &self.runs {
            let file = File::open(path).map_err(|e| Error::io(path, "opening", e))?;
            let dec = zstd::stream::read::Decoder::new(file)
                .map_err(|e| Error::io(path, "opening", e))?;
            sources.push(Source::Run {
                reader: BufReader::with_capacity(1 << 16, dec),
                key: Vec::new(),
                value: Vec::new(),
            });
        }
        sources.push(Source::Memory {
            arena: std::mem::take(&mut self.arena),
            index: std::mem::take(&mut self.index),
            next: 0,
        });
        Ok(SortedRecords {
            merge: Merge::new(sources)?,
            _dir: self.dir.take(),
        })
    }
}

/// One input of the final merge: a spilled run, or the records still in memory.
enum Source {
    Run {
        reader: BufReader<zstd::stream::read::Decoder<'static, BufReader<File>>>,
        key: Vec<u8>,
        value: Vec<u8>,
    },
    Memory {
        arena: Vec<u8>,
        index: Vec<Slot>,
        /// One past the current record.
        next: usize,
    },
}

impl Source {
    fn value(&self) -> &[u8] {
        match self {
            Source::Run { value, .. } => value,
            Source::Memory { arena, index, next } => index[*next - 1].value(arena),
        }
    }
}

fn damaged_run(e: io::Error) -> Error {
    Error::DamagedTemporary {
        what: "sort run",
        reason: e.to_string(),
    }
}

impl SortedRun for Source {
    fn advance(&mut self) -> Result<bool> {
        match self {
            Source::Memory { index, next, .. } => {
                if *next < index.len() {
                    *next += 1;
                    Ok(true)
                } else {
                    Ok(false)
                }
            }
            Source::Run { reader, key, value } => {
                let mut lens = [0u8; 8];
                match reader.read_exact(&mut lens[..4]) {
                    Err(e) if e.kind() == io::ErrorKind::UnexpectedEof => return Ok(false),
                    Err(e) => return Err(damaged_run(e)),
                    Ok(()) => {}
                }
                reader.read_exact(&mut lens[4..]).map_err(damaged_run)?;
                let klen = u32::from_le_bytes(lens[..4].try_into().expect("4 bytes")) as usize;
                let vlen = u32::from_le_bytes(lens[4..].try_into().expect("4 bytes")) as usize;
                key.resize(klen, 0);
                reader.read_exact(key).map_err(damaged_run)?;
                value.resize(vlen, 0);
                reader.read_exact(value).map_err(damaged_run)?;
                Ok(true)
            }
        }
    }

    fn key(&self) -> &[u8] {
        match self {
            Source::Run { key, .. } => key,
            Source::Memory { arena, index, next } => index[*next - 1].key(arena),
        }
    }
}

/// The merged output of an [`ExternalSorter`].
pub struct SortedRecords {
    merge: Merge<Source>,
    _dir: Option<TempDir>,
}

impl SortedRecords {
    /// The next record in key order, or `None` at the end. The slices are valid until the next
    /// call.
    pub fn next_record(&mut self) -> Result<Option<(&[u8], &[u8])>> {
        Ok(self
            .merge
            .next()?
            .map(|source| (source.key(), source.value())))
    }
}

#[cfg(test)]
mod tests {
    use super::{ExternalSorter, Merge, SortedRun};
    use crate::error::Result;

    #[test]
    fn sorts_with_spills() {
        let mut sorter = ExternalSorter::new(64, None).unwrap(); // tiny: forces spills
        for word in ["quay", "anchor", "buoy", "anchor"] {
            sorter.push(word.as_bytes(), &[word.len() as u8]).unwrap();
        }
        let mut keys = Vec::new();
        let mut merged = sorter.finish().unwrap();
        while let Some((key, _value)) = merged.next_record().unwrap() {
            keys.push(String::from_utf8(key.to_vec()).unwrap());
        }
        assert_eq!(keys, ["anchor", "anchor", "buoy", "quay"]);
    }

    #[test]
    fn equal_keys_keep_push_order_across_spills() {
        // Budget of about two records: equal keys land in different runs and in memory.
        let mut sorter = ExternalSorter::new(70, None).unwrap();
        for (n, key) in ["b", "a", "b", "a", "b", "c", "a"].iter().enumerate() {
            sorter.push(key.as_bytes(), &[n as u8]).unwrap();
        }
        let mut out = Vec::new();
        let mut merged = sorter.finish().unwrap();
        while let Some((key, value)) = merged.next_record().unwrap() {
            out.push((key[0], value[0]));
        }
        let expected = [
            (b'a', 1),
            (b'a', 3),
            (b'a', 6),
            (b'b', 0),
            (b'b', 2),
            (b'b', 4),
            (b'c', 5),
        ];
        assert_eq!(out, expected);
    }

    struct Listed(Vec<&'static str>, usize);
    impl SortedRun for Listed {
        fn advance(&mut self) -> Result<bool> {
            self.1 += 1;
            Ok(self.1 <= self.0.len())
        }
        fn key(&self) -> &[u8] {
            self.0[self.1 - 1].as_bytes()
        }
    }

    #[test]
    fn merge_interleaves_runs_in_order() {
        let runs = vec![
            Listed(vec!["buoy", "quay"], 0),
            Listed(vec![], 0),
            Listed(vec!["anchor", "buoy", "dock"], 0),
            Listed(vec!["buoy"], 0),
        ];
        let mut merge = Merge::new(runs).unwrap();
        let mut out = Vec::new();
        while let Some(i) = merge.peek().unwrap() {
            out.push((String::from_utf8(merge.run(i).key().to_vec()).unwrap(), i));
            merge.next().unwrap();
        }
        let expected = [
            ("anchor", 2),
            ("buoy", 0),
            ("buoy", 2),
            ("buoy", 3),
            ("dock", 2),
            ("quay", 0),
        ];
        let expected: Vec<(String, usize)> =
            expected.iter().map(|(k, i)| (k.to_string(), *i)).collect();
        assert_eq!(out, expected);
    }
}
