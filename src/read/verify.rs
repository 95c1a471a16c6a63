//! Full verification: every checksum, every record.

use crate::error::Result;
use crate::format::block::{BlockRecords, Upto};

use super::{Table, VerifyReport};

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
    if let Some(d) = &table.direct {
        d.verify(&mut report)?;
        if report.pairs != table.meta.pairs || report.targets != table.meta.targets {
            return Err(table.corrupt(format!(
                "the records hold {} pairs of {} targets, the metadata says {} and {}",
                report.pairs, report.targets, table.meta.pairs, table.meta.targets
            )));
        }
        return Ok(report);
    }
    // Target groups: each decodes completely (word ids checked against the vocabulary).
    for g in 0..table.n_groups {
        let group = table.decode_group(g, 0, usize::MAX)?;
        report.targets += group.ends.len() as u64;
        // Its resume point continues the stream as decoding from the start does.
        let disagrees = || {
            table.corrupt(format!(
                "target group {g}'s resume point disagrees with its stream"
            ))
        };
        let part = table
            .decode_group(g, usize::MAX, usize::MAX)
            .map_err(|_| disagrees())?;
        if part.first > 0 {
            let skipped = group.ends[part.first - 1];
            let same = part.ends.len() + part.first == group.ends.len()
                && part.ids[..] == group.ids[skipped as usize..]
                && part
                    .ends
                    .iter()
                    .zip(&group.ends[part.first..])
                    .all(|(a, b)| a + skipped == *b);
            if !same {
                return Err(disagrees());
            }
        }
    }
    if report.targets != table.meta.targets {
        return Err(table.corrupt(format!(
            "the target groups hold {} targets, the metadata says {}",
            report.targets, table.meta.targets
        )));
    }
    // Blocks: each decodes completely; keys ascend across blocks; every reference and code is
    // in range.
    let mut block = BlockRecords::default();
    let mut last_key: Vec<u8> = Vec::new();
    let mut sources = 0u64;
    let code_bytes = table.shape.code_bytes();
    for b in 0..table.n_blocks {
        table.decode_block(b, &mut block)?;
        if b > 0 && block.key(0) <= last_key.as_slice() {
            return Err(table.corrupt(format!("block {b}'s first key is out of order")));
        }
        for r in 0..block.sources() {
            std::str::from_utf8(block.key(r))
                .map_err(|_| table.corrupt(format!("a source phrase in block {b} is not UTF-8")))?;
        }
        last_key.clear();
        last_key.extend_from_slice(block.key(block.sources() - 1));
        for (k, &t) in block.targets.iter().enumerate() {
            if u64::from(t) >= table.meta.targets {
                return Err(table.corrupt(format!(
                    "block {b} refers to target {t} of {}",
                    table.meta.targets
                )));
            }
            let mut at = k * code_bytes;
            for codec in &table.codecs {
                let w = codec.width();
                codec.decode(&block.codes[at..at + w]).ok_or_else(|| {
                    table.corrupt(format!("block {b} holds a score code outside its codebook"))
                })?;
                at += w;
            }
        }
        // Every resume point continues the stream as decoding from the start does.
        for p in table.skip_points(b)?.iter() {
            let disagrees = || {
                table.corrupt(format!(
                    "block {b}'s resume point before source {} disagrees with its stream",
                    p.rank
                ))
            };
            let mut part = BlockRecords::default();
            table
                .decode_block_upto(b, Upto::Source(p.rank, true), &mut part)
                .map_err(|_| disagrees())?;
            let start = block.options(p.rank).start;
            let same = part.options_from == p.rank
                && part.targets[..] == block.targets[start..]
                && part.codes[..] == block.codes[start * code_bytes..]
                && part.counts[..] == block.counts[start * table.shape.counts..]
                && (start..block.targets.len()).all(|k| part.links_of(k) == block.links_of(k));
            if !same {
                return Err(disagrees());
            }
        }
        sources += block.sources() as u64;
        report.pairs += block.targets.len() as u64;
        report.blocks += 1;
    }
    if sources != table.meta.sources || report.pairs != table.meta.pairs {
        return Err(table.corrupt(format!(
            "the blocks hold {sources} sources and {} pairs, the metadata says {} and {}",
            report.pairs, table.meta.sources, table.meta.pairs
        )));
    }
    Ok(report)
}
