//! An in-memory count table over byte keys, stored in one arena, that spills to sorted runs.

use std::path::Path;

use super::runs::{RunInfo, RunWriter};
use crate::error::Result;

const ENTRY_BYTES: usize = std::mem::size_of::<Entry>();

#[derive(Clone, Copy)]
struct Entry {
    start: u32,
    len: u32,
    count: u64,
}

/// Counts byte keys; memory is the keys' bytes plus 16 bytes per entry plus 8 per slot.
pub(crate) struct CountTable {
    arena: Vec<u8>,
    entries: Vec<Entry>,
    // Each slot holds (tag << 32) | (entry index + 1); 0 means empty.
    slots: Vec<u64>,
}

/// A fast multiplicative hash over 8-byte words (keys are short phrases; the table is
/// private, so there is no need for a keyed hash).
pub(crate) fn hash_bytes(bytes: &[u8]) -> u64 {
    const K: u64 = 0x9e37_79b9_7f4a_7c15;
    let mut h: u64 = bytes.len() as u64;
    let mut chunks = bytes.chunks_exact(8);
    for c in &mut chunks {
        let w = u64::from_le_bytes(c.try_into().unwrap());
        h = (h.rotate_left(5) ^ w).wrapping_mul(K);
    }
    let rest = chunks.remainder();
    if !rest.is_empty() {
        let mut buf = [0u8; 8];
        buf[..rest.len()].copy_from_slice(rest);
        h = (h.rotate_left(5) ^ u64::from_le_bytes(buf)).wrapping_mul(K);
    }
    h ^= h >> 29;
    h = h.wrapping_mul(0xbf58_476d_1ce4_e5b9);
    h ^ (h >> 32)
}

impl CountTable {
    #[cfg(test)]
    pub(crate) fn new() -> CountTable {
        CountTable::with_budget(1 << 20)
    }

    /// A table that stays within about `budget` bytes: the arena and the entries are
    /// allocated once (half and an eighth of the budget; untouched pages cost nothing) and
    /// never grow past that, and the slots (at most two per entry, rounded up to a power of
    /// two) take at most a quarter. Call [`CountTable::nearly_full`] between sentences.
    pub(crate) fn with_budget(budget: usize) -> CountTable {
        let arena = (budget / 2).min(u32::MAX as usize - (1 << 24)).max(1 << 16);
        let entries = (budget / 8 / ENTRY_BYTES).max(1 << 10);
        CountTable {
            arena: Vec::with_capacity(arena),
            entries: Vec::with_capacity(entries),
            slots: vec![0; 1 << 12],
        }
    }

    /// True when the next sentence pair's keys might not fit in the reserved space: time to
    /// spill. (A sentence pair larger than the margin still fits, by reallocating.)
    pub(crate) fn nearly_full(&self) -> bool {
        let arena_margin = (self.arena.capacity() / 8).min(1 << 20);
        let entry_margin = (self.entries.capacity() / 8).min(1 << 14);
        self.arena.len() + arena_margin > self.arena.capacity()
            || self.entries.len() + entry_margin > self.entries.capacity()
    }

    /// Bytes reserved.
    #[cfg(test)]
    pub(crate) fn memory_used(&self) -> usize {
        self.arena.capacity() + self.entries.capacity() * ENTRY_BYTES + self.slots.len() * 8
    }

    pub(crate) fn is_empty(&self) -> bool {
        self.entries.is_empty()
    }

    /// Whether the arena can no longer be addressed with 32-bit offsets.
    pub(crate) fn arena_full(&self) -> bool {
        self.arena.len() > (u32::MAX as usize) - (1 << 20)
    }

    /// Adds `n` to the count of `key`.
    pub(crate) fn add(&mut self, key: &[u8], n: u64) {
        let h = hash_bytes(key);
        let tag = h >> 32;
        let mask = self.slots.len() - 1;
        let mut i = (h as usize) & mask;
        loop {
            let slot = self.slots[i];
            if slot == 0 {
                break;
            }
            if slot >> 32 == tag {
                let e = &mut self.entries[(slot as u32 - 1) as usize];
                let stored = &self.arena[e.start as usize..(e.start + e.len) as usize];
                if stored == key {
                    e.count += n;
                    return;
                }
            }
            i = (i + 1) & mask;
        }
        let index = self.entries.len() as u64;
        self.entries.push(Entry {
            start: self.arena.len() as u32,
            len: key.len() as u32,
            count: n,
        });
        self.arena.extend_from_slice(key);
        self.slots[i] = (tag << 32) | (index + 1);
        if self.entries.len() * 2 > self.slots.len() {
            self.grow();
        }
    }

    fn grow(&mut self) {
        let size = self.slots.len() * 2;
        let mut slots = vec![0u64; size];
        let mask = size - 1;
        for (index, e) in self.entries.iter().enumerate() {
            let h = hash_bytes(&self.arena[e.start as usize..(e.start + e.len) as usize]);
            let mut i = (h as usize) & mask;
            while slots[i] != 0 {
                i = (i + 1) & mask;
            }
            slots[i] = ((h >> 32) << 32) | (index as u64 + 1);
        }
        self.slots = slots;
    }

    /// Writes every entry in key order to a new run at `path` and empties the table.
    pub(crate) fn spill(&mut self, path: &Path, info: &RunInfo) -> Result<u64> {
        let arena = &self.arena;
        let key = |e: &Entry| &arena[e.start as usize..(e.start + e.len) as usize];
        self.entries.sort_unstable_by(|a, b| key(a).cmp(key(b)));
        let mut writer = RunWriter::create(path, info)?;
        for e in &self.entries {
            writer.push(key(e), e.count)?;
        }
        let n = writer.finish()?;
        // Keep the allocations for the next round.
        self.arena.clear();
        self.entries.clear();
        self.slots.iter_mut().for_each(|s| *s = 0);
        Ok(n)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::extract::runs::RunReader;

    #[test]
    fn counts_survive_growth_and_spill_sorted() {
        let mut table = CountTable::new();
        for round in 0..3u64 {
            for k in 0..10_000u64 {
                table.add(format!("key{}", k * 7919 % 10_000).as_bytes(), round + 1);
            }
        }
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("r");
        assert_eq!(table.spill(&path, &RunInfo::default()).unwrap(), 10_000);
        assert!(table.is_empty());
        assert!(table.memory_used() < 4 << 20);
        let mut reader = RunReader::open(&path).unwrap();
        let mut keys = Vec::new();
        while reader.advance().unwrap() {
            assert_eq!(reader.count(), 6);
            keys.push(reader.key().to_vec());
        }
        let mut expected: Vec<Vec<u8>> = (0..10_000)
            .map(|k| format!("key{k}").into_bytes())
            .collect();
        expected.sort();
        assert_eq!(keys, expected);
    }
}
