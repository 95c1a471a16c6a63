//! Re-keying the table between the reduce step's passes: an external sort of unique keys.
//!
//! Each record is one byte string `key 0x00 value`; keys are unique and contain exactly one
//! other 0x00 (between the two phrases), so byte order of the records is the order of the
//! keys. Records are sorted in memory on an index that caches each record's first eight bytes
//! (most comparisons never touch the arena, which matters once the arena is far larger than
//! the processor's caches), spilled as count runs ([`super::runs`]) when the budget is
//! reached, and merged.

use std::path::PathBuf;

use super::runs::{RunInfo, RunMerger, RunReader, RunWriter};
use crate::error::Result;

pub(crate) struct Resorter {
    budget: usize,
    arena: Vec<u8>,
    index: Vec<Slot>,
    dir: Option<crate::files::TempDir>,
    parent: Option<PathBuf>,
    runs: Vec<PathBuf>,
}

/// A record's first eight bytes (big-endian, zero-padded), start and length in the arena.
type Slot = (u64, u32, u32);

fn prefix(bytes: &[u8]) -> u64 {
    let mut p = [0u8; 8];
    let n = bytes.len().min(8);
    p[..n].copy_from_slice(&bytes[..n]);
    u64::from_be_bytes(p)
}

impl Resorter {
    pub(crate) fn new(budget: usize, parent: Option<PathBuf>) -> Resorter {
        Resorter {
            budget: budget.max(1 << 16),
            arena: Vec::new(),
            index: Vec::new(),
            dir: None,
            parent,
            runs: Vec::new(),
        }
    }

    /// Adds the record `key 0x00 value`.
    pub(crate) fn push(&mut self, key: &[u8], value: &[u8]) -> Result<()> {
        let size = key.len() + value.len() + 1;
        if self.arena.len() + size > u32::MAX as usize
            || self.arena.len() + self.index.len() * 16 + size > self.budget
        {
            self.spill()?;
        }
        let start = self.arena.len();
        self.arena.extend_from_slice(key);
        self.arena.push(0);
        self.arena.extend_from_slice(value);
        let record = &self.arena[start..];
        self.index
            .push((prefix(record), start as u32, record.len() as u32));
        Ok(())
    }

    fn sort(&mut self) {
        let arena = &self.arena;
        let bytes = |&(_, s, l): &Slot| &arena[s as usize..(s + l) as usize];
        self.index
            .sort_unstable_by(|a, b| a.0.cmp(&b.0).then_with(|| bytes(a).cmp(bytes(b))));
    }

    fn spill(&mut self) -> Result<()> {
        if self.index.is_empty() {
            return Ok(());
        }
        self.sort();
        if self.dir.is_none() {
            self.dir = Some(super::shard::temp_dir(&self.parent, "baler-resort-")?);
        }
        let path = self
            .dir
            .as_ref()
            .expect("created above")
            .path()
            .join(format!("run-{}", self.runs.len()));
        let mut writer = RunWriter::create(&path, &RunInfo::default())?;
        for &(_, s, l) in &self.index {
            writer.push(&self.arena[s as usize..(s + l) as usize], 0)?;
        }
        writer.finish()?;
        self.runs.push(path);
        self.arena.clear();
        self.index.clear();
        Ok(())
    }

    /// Ends input; the records come back in order.
    pub(crate) fn finish(mut self) -> Result<Sorted> {
        if self.runs.is_empty() {
            self.sort();
            return Ok(Sorted {
                memory: Some((self.arena, self.index, 0)),
                merger: None,
                _dir: None,
            });
        }
        self.spill()?;
        let readers = self
            .runs
            .iter()
            .map(|p| RunReader::open(p))
            .collect::<Result<Vec<_>>>()?;
        Ok(Sorted {
            memory: None,
            merger: Some(RunMerger::new(readers)?),
            _dir: self.dir,
        })
    }
}

pub(crate) struct Sorted {
    memory: Option<(Vec<u8>, Vec<Slot>, usize)>,
    merger: Option<RunMerger>,
    _dir: Option<crate::files::TempDir>,
}

impl Sorted {
    /// The next record, `key 0x00 value`.
    pub(crate) fn next_record(&mut self) -> Result<Option<&[u8]>> {
        if let Some((arena, index, next)) = &mut self.memory {
            return Ok(index.get(*next).map(|&(_, s, l)| {
                *next += 1;
                &arena[s as usize..(s + l) as usize]
            }));
        }
        match &mut self.merger {
            Some(m) => Ok(m.next_record()?.map(|(record, _)| record)),
            None => Ok(None),
        }
    }
}
