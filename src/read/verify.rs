//! Full verification: every checksum, every record.

use crate::error::Result;
use crate::format::read_varint;

use super::{guard, options::BlockLayout, Table, VerifyReport};

pub(super) fn verify(table: &Table) -> Result<VerifyReport> {
    let data = table.data();
    let mut report = VerifyReport::default();
    for e in &table.entries {
        let range = e.offset as usize..(e.offset + e.length) as usize;
        if crc32fast::hash(&data[range]) != e.crc32 {
            let name = crate::format::SectionKind::from_id(e.kind).map_or("unknown", |k| k.name());
            return Err(table.corrupt(format!(
                "the {name} section (id {}) fails its checksum",
                e.kind
            )));
        }
        report.sections += 1;
    }
    match guard(|| table.index.as_fst().verify()) {
        Some(Ok(())) => {}
        _ => return Err(table.corrupt("the source index fails the fst's own checksum")),
    }

    // Vocabulary: every word readable.
    let s = &table.sections;
    for w in 0..s.words {
        s.word(data, w).map_err(|r| table.corrupt(r))?;
    }
    // Targets: decoded in sequence, each record's start marked for the reference check.
    let td = s.target_data(data);
    let mut starts = vec![0u64; td.len().div_ceil(64)];
    let mut pos = 0usize;
    for t in 0..s.targets {
        let bad = || table.corrupt(format!("target {t} is malformed"));
        if pos >= td.len() {
            return Err(bad());
        }
        starts[pos / 64] |= 1 << (pos % 64);
        let n = read_varint(td, &mut pos).ok_or_else(bad)?;
        if n == 0 {
            return Err(bad());
        }
        for _ in 0..n.min(td.len() as u64 + 1) {
            let w = read_varint(td, &mut pos).ok_or_else(bad)?;
            if w >= s.words {
                return Err(
                    table.corrupt(format!("target {t} uses word {w} outside the vocabulary"))
                );
            }
        }
        report.targets += 1;
    }
    if pos != td.len() {
        return Err(table.corrupt("the target data has unexplained trailing bytes"));
    }
    // Blocks: every column parses to its end; every target reference starts a target record.
    let mut scratch = Vec::new();
    for b in 0..s.blocks {
        let bytes = table.block_bytes(b, &mut scratch)?;
        let layout = BlockLayout::parse(table, bytes, table.sources_in_block(b), 0)?;
        layout.check_complete(table, bytes, |offset| {
            let at = offset as usize;
            if offset < td.len() as u64 && starts[at / 64] & (1 << (at % 64)) != 0 {
                Ok(())
            } else {
                Err(table.corrupt(format!(
                    "block {b} refers to {offset}, which starts no target"
                )))
            }
        })?;
        report.blocks += 1;
    }
    // Every pair through the index: ordinals in sequence, links inside their phrases.
    for pair in table.pairs_iter() {
        let pair = pair?;
        let (sl, tl) = (
            pair.source.split(' ').count(),
            pair.target.split(' ').count(),
        );
        if let Some(&(i, j)) = pair
            .alignment
            .iter()
            .find(|&&(i, j)| usize::from(i) >= sl || usize::from(j) >= tl)
        {
            return Err(table.corrupt(format!(
                "the pair ({:?}, {:?}) has link {i}-{j} outside its phrases",
                pair.source, pair.target
            )));
        }
        report.pairs += 1;
    }
    if report.pairs != table.meta.pairs {
        return Err(table.corrupt(format!(
            "{} pairs decoded, the metadata says {}",
            report.pairs, table.meta.pairs
        )));
    }
    Ok(report)
}
