//! The groups that wait for a whole-table filter (relative entropy), held within a memory
//! budget: in memory while they fit in half of it, in a temporary file of this run after.

use std::fs::File;
use std::io::{BufReader, BufWriter, Read, Write};
use std::path::PathBuf;

use crate::error::{Error, Result};
use crate::files::TempDir;
use crate::table::PhrasePair;

/// One pair with what the filters learnt about it.
#[derive(Clone, Debug, Default, PartialEq)]
pub(crate) struct Item {
    pub(crate) pair: PhrasePair,
    pub(crate) line: u64,
    pub(crate) neg_ln_p: Option<f64>,
}

impl Item {
    /// Approximate bytes of memory the item holds (with 16 bytes of allocator overhead for
    /// each of its five buffers).
    fn bytes(&self) -> usize {
        std::mem::size_of::<Item>()
            + 5 * 16
            + self.pair.source.len()
            + self.pair.target.len()
            + self.pair.alignment.len() * 4
            + self.pair.scores.len() * 8
            + self.pair.counts.len() * 8
    }
}

/// Source-grouped items, in the order they were pushed.
pub(crate) struct Held {
    groups: Vec<Vec<Item>>,
    bytes: usize,
    budget: usize,
    temp_parent: Option<PathBuf>,
    spill: Option<Spill>,
}

struct Spill {
    /// Removed when the holder is dropped (or the run interrupted).
    _dir: TempDir,
    path: PathBuf,
    writer: Option<BufWriter<File>>,
}

impl Held {
    /// Holds up to `budget` bytes in memory before spilling to a temporary directory inside
    /// `temp_parent` (the system's when `None`).
    pub(crate) fn new(budget: usize, temp_parent: Option<PathBuf>) -> Held {
        Held {
            groups: Vec::new(),
            bytes: 0,
            budget,
            temp_parent,
            spill: None,
        }
    }

    /// A new, empty holder with the same budget and temporary directory.
    pub(crate) fn empty_like(&self) -> Held {
        Held::new(self.budget, self.temp_parent.clone())
    }

    pub(crate) fn push(&mut self, group: Vec<Item>) -> Result<()> {
        if group.is_empty() {
            return Ok(());
        }
        if self.spill.is_none() {
            self.bytes += group.iter().map(Item::bytes).sum::<usize>();
            self.groups.push(group);
            if self.bytes > self.budget {
                let dir = TempDir::new(self.temp_parent.as_deref(), "baler-held-")?;
                let path = dir.path().join("groups");
                let file = File::create(&path).map_err(|e| Error::io(&path, "creating", e))?;
                self.spill = Some(Spill {
                    _dir: dir,
                    path,
                    writer: Some(BufWriter::with_capacity(1 << 16, file)),
                });
                for g in std::mem::take(&mut self.groups) {
                    self.write(&g)?;
                }
                self.bytes = 0;
            }
            return Ok(());
        }
        self.write(&group)
    }

    fn write(&mut self, group: &[Item]) -> Result<()> {
        let spill = self.spill.as_mut().expect("spilling");
        let path = &spill.path;
        let w = spill.writer.as_mut().expect("still writing");
        let mut buf = Vec::new();
        buf.extend_from_slice(&(group.len() as u32).to_le_bytes());
        for item in group {
            encode(item, &mut buf);
        }
        w.write_all(&buf).map_err(|e| Error::io(path, "writing", e))
    }

    /// Ends writing; the groups can then be read, any number of times.
    pub(crate) fn finish(&mut self) -> Result<()> {
        if let Some(spill) = self.spill.as_mut() {
            if let Some(mut w) = spill.writer.take() {
                w.flush()
                    .map_err(|e| Error::io(&spill.path, "writing", e))?;
            }
        }
        Ok(())
    }

    /// Calls `visit` with every group, in order.
    pub(crate) fn for_each(&self, mut visit: impl FnMut(&[Item]) -> Result<()>) -> Result<()> {
        match &self.spill {
            None => {
                for g in &self.groups {
                    visit(g)?;
                }
            }
            Some(spill) => {
                let file =
                    File::open(&spill.path).map_err(|e| Error::io(&spill.path, "opening", e))?;
                let mut r = BufReader::with_capacity(1 << 16, file);
                while let Some(g) = read_group(&mut r)? {
                    visit(&g)?;
                }
            }
        }
        Ok(())
    }

    /// Calls `visit` with every group, in order, handing each over.
    pub(crate) fn drain(mut self, mut visit: impl FnMut(Vec<Item>) -> Result<()>) -> Result<()> {
        let Some(spill) = &self.spill else {
            for g in std::mem::take(&mut self.groups) {
                visit(g)?;
            }
            return Ok(());
        };
        let file = File::open(&spill.path).map_err(|e| Error::io(&spill.path, "opening", e))?;
        let mut r = BufReader::with_capacity(1 << 16, file);
        while let Some(g) = read_group(&mut r)? {
            visit(g)?;
        }
        Ok(())
    }
}

fn damaged(reason: &str) -> Error {
    Error::DamagedTemporary {
        what: "file of pairs",
        reason: reason.into(),
    }
}

fn read_group(r: &mut impl Read) -> Result<Option<Vec<Item>>> {
    let mut n = [0u8; 4];
    match r.read_exact(&mut n) {
        Ok(()) => {}
        Err(e) if e.kind() == std::io::ErrorKind::UnexpectedEof => return Ok(None),
        Err(e) => return Err(damaged(&e.to_string())),
    }
    let n = u32::from_le_bytes(n) as usize;
    let mut group = Vec::with_capacity(n);
    for _ in 0..n {
        group.push(decode(r)?);
    }
    Ok(Some(group))
}

fn put_bytes(out: &mut Vec<u8>, b: &[u8]) {
    out.extend_from_slice(&(b.len() as u32).to_le_bytes());
    out.extend_from_slice(b);
}

/// Appends `item` to `out` in the byte layout of this run's temporary files (held groups,
/// sort runs): little-endian numbers, u32-prefixed strings.
pub(crate) fn encode(item: &Item, out: &mut Vec<u8>) {
    let p = &item.pair;
    out.extend_from_slice(&item.line.to_le_bytes());
    out.extend_from_slice(&item.neg_ln_p.unwrap_or(f64::NAN).to_bits().to_le_bytes());
    put_bytes(out, p.source.as_bytes());
    put_bytes(out, p.target.as_bytes());
    out.extend_from_slice(&(p.alignment.len() as u32).to_le_bytes());
    for &(i, j) in &p.alignment {
        out.extend_from_slice(&i.to_le_bytes());
        out.extend_from_slice(&j.to_le_bytes());
    }
    out.extend_from_slice(&(p.scores.len() as u32).to_le_bytes());
    for s in &p.scores {
        out.extend_from_slice(&s.to_bits().to_le_bytes());
    }
    out.extend_from_slice(&(p.counts.len() as u32).to_le_bytes());
    for c in &p.counts {
        out.extend_from_slice(&c.to_le_bytes());
    }
}

/// Reads back one item written by [`encode`].
pub(crate) fn decode(r: &mut impl Read) -> Result<Item> {
    let mut b8 = [0u8; 8];
    let mut b4 = [0u8; 4];
    let mut u64_ = |r: &mut dyn Read| -> Result<u64> {
        r.read_exact(&mut b8).map_err(|e| damaged(&e.to_string()))?;
        Ok(u64::from_le_bytes(b8))
    };
    let line = u64_(r)?;
    let neg = f64::from_bits(u64_(r)?);
    let mut u32_ = |r: &mut dyn Read| -> Result<usize> {
        r.read_exact(&mut b4).map_err(|e| damaged(&e.to_string()))?;
        Ok(u32::from_le_bytes(b4) as usize)
    };
    let text = |r: &mut dyn Read, n: usize| -> Result<String> {
        let mut v = vec![0u8; n];
        r.read_exact(&mut v).map_err(|e| damaged(&e.to_string()))?;
        String::from_utf8(v).map_err(|_| damaged("a phrase is not UTF-8"))
    };
    let n = u32_(r)?;
    let source = text(r, n)?;
    let n = u32_(r)?;
    let target = text(r, n)?;
    let n = u32_(r)?;
    let mut alignment = Vec::with_capacity(n);
    let mut b2 = [0u8; 4];
    for _ in 0..n {
        r.read_exact(&mut b2).map_err(|e| damaged(&e.to_string()))?;
        alignment.push((
            u16::from_le_bytes([b2[0], b2[1]]),
            u16::from_le_bytes([b2[2], b2[3]]),
        ));
    }
    let n = u32_(r)?;
    let mut scores = Vec::with_capacity(n);
    for _ in 0..n {
        scores.push(f64::from_bits(u64_(r)?));
    }
    let n = u32_(r)?;
    let mut counts = Vec::with_capacity(n);
    for _ in 0..n {
        counts.push(u64_(r)?);
    }
    Ok(Item {
        pair: PhrasePair {
            source,
            target,
            alignment,
            scores,
            counts,
        },
        line,
        neg_ln_p: (!neg.is_nan()).then_some(neg),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn item(source: &str, target: &str, line: u64) -> Item {
        Item {
            pair: PhrasePair {
                source: source.into(),
                target: target.into(),
                alignment: vec![(0, 1)],
                scores: vec![0.5, -2.0],
                counts: vec![7],
            },
            line,
            neg_ln_p: (line % 2 == 0).then_some(1.5),
        }
    }

    #[test]
    fn groups_come_back_in_order_from_memory_and_from_disk() {
        for budget in [1 << 20, 1] {
            let temp = tempfile::tempdir().unwrap();
            let mut held = Held::new(budget, Some(temp.path().to_path_buf()));
            let groups = vec![
                vec![item("ancla", "anchor", 1), item("ancla", "anchorage", 2)],
                vec![item("velero", "sailboat", 3)],
            ];
            for g in &groups {
                held.push(g.clone()).unwrap();
            }
            held.finish().unwrap();
            for _ in 0..2 {
                let mut back = Vec::new();
                held.for_each(|g| {
                    back.push(g.to_vec());
                    Ok(())
                })
                .unwrap();
                assert_eq!(back, groups, "budget {budget}");
            }
            let mut back = Vec::new();
            held.drain(|g| {
                back.push(g);
                Ok(())
            })
            .unwrap();
            assert_eq!(back, groups);
        }
    }

    #[test]
    fn a_cut_record_is_a_damaged_temporary_file() {
        let mut buf = Vec::new();
        encode(&item("el muelle", "the quay", 77), &mut buf);
        assert_eq!(
            decode(&mut &buf[..]).unwrap(),
            item("el muelle", "the quay", 77)
        );
        let cut = decode(&mut &buf[..buf.len() - 1]).unwrap_err();
        assert!(matches!(cut, Error::DamagedTemporary { .. }), "{cut}");
    }
}
