//! External sorting of key/value byte records within a memory budget.
//!
//! Records are appended to an in-memory arena; when the arena reaches the budget it is sorted by
//! key and spilled to a zstd-compressed run in a temporary directory. [`ExternalSorter::finish`]
//! merges the runs (and what is still in memory) into one stream in key byte order. Records with
//! equal keys come out in the order they were pushed, so the sort is stable.

use std::cmp::Ordering;
use std::collections::BinaryHeap;
use std::fs::File;
use std::io::{self, BufReader, BufWriter, Read, Write};
use std::path::PathBuf;

use crate::error::{Error, Result};
use crate::files::TempDir;

const RECORD_OVERHEAD: usize = 24;

/// Sorts `(key, value)` byte records, spilling to disk past a memory budget (see the unit
/// test `sorts_with_spills` for a use).
pub struct ExternalSorter {
    budget: usize,
    arena: Vec<u8>,
    index: Vec<(usize, u32, u32)>,
    dir: Option<TempDir>,
    parent: Option<PathBuf>,
    runs: Vec<PathBuf>,
    in_order: bool,
}

/// The first eight key bytes as a big-endian number (shorter keys padded with zeros), which
/// orders like the bytes themselves up to ties.
fn prefix(key: &[u8]) -> u64 {
    let mut b = [0u8; 8];
    let n = key.len().min(8);
    b[..n].copy_from_slice(&key[..n]);
    u64::from_be_bytes(b)
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
        let start = self.arena.len();
        if self.in_order {
            if let Some(&(last, klen, _)) = self.index.last() {
                self.in_order = self.arena[last..last + klen as usize] <= *key;
            }
        }
        self.arena.extend_from_slice(key);
        self.arena.extend_from_slice(value);
        self.index
            .push((start, key.len() as u32, value.len() as u32));
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
        // Compare an 8-byte big-endian key prefix first, then the whole key, then the arena
        // position, which keeps equal keys in push order without a stable sort's buffer.
        let mut keyed: Vec<(u64, usize, u32, u32)> = self
            .index
            .iter()
            .map(|&(start, klen, vlen)| {
                (
                    prefix(&arena[start..start + klen as usize]),
                    start,
                    klen,
                    vlen,
                )
            })
            .collect();
        keyed.sort_unstable_by(|a, b| {
            a.0.cmp(&b.0)
                .then_with(|| arena[a.1..a.1 + a.2 as usize].cmp(&arena[b.1..b.1 + b.2 as usize]))
                .then(a.1.cmp(&b.1))
        });
        self.index.clear();
        self.index.extend(
            keyed
                .into_iter()
                .map(|(_, start, klen, vlen)| (start, klen, vlen)),
        );
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
            .unwrap()
            .path()
            .join(format!("run-{}", self.runs.len()));
        let file = File::create(&path).map_err(|e| Error::io(&path, "creating", e))?;
        let werr = |e| Error::io(&path, "writing", e);
        let mut enc = zstd::stream::write::Encoder::new(BufWriter::new(file), 1).map_err(werr)?;
        for &(start, klen, vlen) in &self.index {
            enc.write_all(&klen.to_le_bytes()).map_err(werr)?;
            enc.write_all(&vlen.to_le_bytes()).map_err(werr)?;
            enc.write_all(&self.arena[start..start + (klen + vlen) as usize])
                .map_err(werr)?;
        }
        let mut file = enc.finish().map_err(werr)?;
        file.flush().map_err(werr)?;
        self.runs.push(path);
        self.arena.clear();
        self.index.clear();
        self.in_order = true;
        Ok(())
    }

    /// Ends input and returns the merged stream.
    pub fn finish(mut self) -> Result<SortedRecords> {
        self.sort_in_memory();
        let mut sources = Vec::with_capacity(self.runs.len() + 1);
        for path in &self.runs {
            let file = File::open(path).map_err(|e| Error::io(path, "opening", e))?;
            let dec = zstd::stream::read::Decoder::new(file)
                .map_err(|e| Error::io(path, "opening", e))?;
            sources.push(Source::Run {
                reader: BufReader::with_capacity(1 << 16, dec),
                path: path.clone(),
            });
        }
        sources.push(Source::Memory {
            arena: std::mem::take(&mut self.arena),
            index: std::mem::take(&mut self.index),
            next: 0,
        });
        let mut merged = SortedRecords {
            sources,
            heads: Vec::new(),
            heap: BinaryHeap::new(),
            current: None,
            _dir: self.dir.take(),
        };
        if merged.sources.len() > 1 {
            for i in 0..merged.sources.len() {
                merged.heads.push((Vec::new(), Vec::new()));
                merged.advance(i)?;
            }
        }
        Ok(merged)
    }
}

enum Source {
    Run {
        reader: BufReader<zstd::stream::read::Decoder<'static, BufReader<File>>>,
        path: PathBuf,
    },
    Memory {
        arena: Vec<u8>,
        index: Vec<(usize, u32, u32)>,
        next: usize,
    },
}

#[derive(PartialEq, Eq)]
struct HeapEntry {
    key: Vec<u8>,
    source: usize,
}

impl Ord for HeapEntry {
    fn cmp(&self, other: &Self) -> Ordering {
        // BinaryHeap is a max-heap: reverse so the smallest key (then earliest run) is on top.
        other
            .key
            .cmp(&self.key)
            .then(other.source.cmp(&self.source))
    }
}
impl PartialOrd for HeapEntry {
    fn partial_cmp(&self, other: &Self) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}

/// The merged output of an [`ExternalSorter`].
pub struct SortedRecords {
    sources: Vec<Source>,
    heads: Vec<(Vec<u8>, Vec<u8>)>,
    heap: BinaryHeap<HeapEntry>,
    current: Option<(Vec<u8>, Vec<u8>)>,
    _dir: Option<TempDir>,
}

impl SortedRecords {
    fn advance(&mut self, i: usize) -> Result<()> {
        let (key, value) = &mut self.heads[i];
        let more = match &mut self.sources[i] {
            Source::Memory { arena, index, next } => match index.get(*next) {
                Some(&(start, klen, vlen)) => {
                    *next += 1;
                    key.clear();
                    key.extend_from_slice(&arena[start..start + klen as usize]);
                    value.clear();
                    value.extend_from_slice(
                        &arena[start + klen as usize..start + (klen + vlen) as usize],
                    );
                    true
                }
                None => false,
            },
            Source::Run { reader, path } => {
                let rerr = |e: io::Error| Error::io(path.clone(), "reading temporary run", e);
                let mut lens = [0u8; 8];
                match reader.read_exact(&mut lens[..4]) {
                    Err(e) if e.kind() == io::ErrorKind::UnexpectedEof => false,
                    Err(e) => return Err(rerr(e)),
                    Ok(()) => {
                        reader.read_exact(&mut lens[4..]).map_err(rerr)?;
                        let klen = u32::from_le_bytes(lens[..4].try_into().unwrap()) as usize;
                        let vlen = u32::from_le_bytes(lens[4..].try_into().unwrap()) as usize;
                        key.resize(klen, 0);
                        reader.read_exact(key).map_err(rerr)?;
                        value.resize(vlen, 0);
                        reader.read_exact(value).map_err(rerr)?;
                        true
                    }
                }
            }
        };
        if more {
            self.heap.push(HeapEntry {
                key: self.heads[i].0.clone(),
                source: i,
            });
        }
        Ok(())
    }

    /// The next record in key order, or `None` at the end. The slices are valid until the next
    /// call.
    pub fn next_record(&mut self) -> Result<Option<(&[u8], &[u8])>> {
        if self.sources.len() == 1 {
            // Everything fitted in memory: read the sorted arena directly, no heap, no copies.
            let Source::Memory { arena, index, next } = &mut self.sources[0] else {
                unreachable!("a single source is the in-memory one");
            };
            let Some(&(start, klen, vlen)) = index.get(*next) else {
                return Ok(None);
            };
            *next += 1;
            let (k, v) = arena[start..start + (klen + vlen) as usize].split_at(klen as usize);
            return Ok(Some((k, v)));
        }
        let Some(top) = self.heap.pop() else {
            return Ok(None);
        };
        let i = top.source;
        let (key, value) = std::mem::take(&mut self.heads[i]);
        self.advance(i)?;
        self.current = Some((key, value));
        let (k, v) = self.current.as_ref().unwrap();
        Ok(Some((k.as_slice(), v.as_slice())))
    }
}

#[cfg(test)]
mod tests {
    use super::ExternalSorter;

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
}
