//! Running the pruner over files: input in any order, TSV or packed output.

use std::io::BufRead;
use std::path::Path;
use std::sync::mpsc;

use super::pipeline::Outcome;
use super::{CountSource, Filter, PruneOptions, PruneStats, Pruner, SentenceCounts};
use crate::error::{Error, Result};
use crate::files::{self, Output, STDIO};
use crate::pack::{self, PackOptions};
use crate::read::Table;
use crate::sort::ExternalSorter;
use crate::table::{CountColumn, Header, PhrasePair, TsvReader, TsvWriter};

type Records<'a> = Box<dyn Iterator<Item = Result<(PhrasePair, u64)>> + 'a>;

/// Prunes the table at `input` into `output` and returns what each filter did.
///
/// * `input` is an interchange TSV (optionally `.gz`/`.zst`, or `-` for stdin, which is first
///   copied to a temporary file) or, by its `.bale` extension, a packed table.
/// * TSV input sorted by source in byte order (what extraction and `baler dump` write) is
///   streamed in one pass, in memory independent of its size (unless a relative-entropy
///   filter runs, which holds the pairs reaching it). Otherwise the pass stops at the first
///   source out of order, discards its partial output, and starts again through
///   [`ExternalSorter`] within [`PruneOptions::memory`]; options of a source keep their input
///   order.
/// * `output` is TSV (optionally compressed, `-` for stdout) or, by its `.bale` extension, a
///   packed table. It appears only when complete.
/// * [`CountSource::Corpus`] reads the table once more to collect its phrases and then the
///   corpus (holding every distinct phrase and pair of the table in memory);
///   [`CountSource::PhraseCounts`] reads it once more to sum `count`.
///
/// # Examples
/// ```
/// use baler::prune::{prune_path, Filter, PruneOptions, Ranking};
/// let dir = tempfile::tempdir().unwrap();
/// let (input, output) = (dir.path().join("in.tsv"), dir.path().join("out.tsv"));
/// std::fs::write(&input, "source\ttarget\tp_t_given_s\n\
///     velero\tsailing ship\t0.6\nvelero\tsailboat\t0.3\nancla\tanchor\t0.9\n").unwrap();
/// let options = PruneOptions {
///     filters: vec![Filter::TopK { k: 1, by: Ranking::default() }],
///     ..Default::default()
/// };
/// let stats = prune_path(&input, &output, &options)?;
/// assert!(stats.sorted_externally); // "ancla" came after "velero"
/// assert_eq!(std::fs::read_to_string(&output).unwrap(),
///            "# pruned_with=--top-k 1 --by p_t_given_s\nsource\ttarget\tp_t_given_s\n\
///             ancla\tanchor\t0.9\nvelero\tsailing ship\t0.6\n");
/// # Ok::<(), baler::Error>(())
/// ```
pub fn prune_path(input: &Path, output: &Path, options: &PruneOptions) -> Result<PruneStats> {
    let name = input.to_string_lossy().into_owned();
    let memory = if options.memory == 0 {
        512 << 20
    } else {
        options.memory
    };
    // stdin is copied once so that it can be read again (sorting, counting passes)
    let spool;
    let path: &Path = if input.as_os_str() == STDIO {
        let mut file = tempfile::NamedTempFile::new()
            .map_err(|e| Error::io(std::env::temp_dir(), "creating a temporary file in", e))?;
        std::io::copy(&mut std::io::stdin().lock(), file.as_file_mut())
            .map_err(|e| Error::io(STDIO, "reading", e))?;
        spool = file;
        spool.path()
    } else {
        input
    };
    let table = if is_packed(path) {
        Some(Table::open(path)?)
    } else {
        None
    };
    let open = || -> Result<(Header, Records<'_>)> {
        match &table {
            Some(t) => Ok((
                t.header().clone(),
                Box::new(t.pairs_iter().map(|r| r.map(|p| (p, 0)))),
            )),
            None => {
                let reader = TsvReader::new(files::open_input(path)?, name.clone())?;
                let header = reader.header().clone();
                Ok((header, Box::new(Numbered { reader })))
            }
        }
    };
    let needs_test = options.annotate
        || options
            .filters
            .iter()
            .any(|f| matches!(f, Filter::Significance(_)));
    let (header, _) = open()?;
    let mut corpus = None;
    let mut occurrences = None;
    if needs_test {
        match &options.counts {
            CountSource::Table => {}
            CountSource::Corpus { source, target } => {
                let (_, records) = open()?;
                let mut pairs = Vec::new();
                for r in records {
                    let (p, _) = r?;
                    pairs.push((p.source, p.target));
                }
                corpus = Some(SentenceCounts::count(
                    pairs.iter().map(|(s, t)| (s.as_str(), t.as_str())),
                    files::open_input(source)?,
                    &source.to_string_lossy(),
                    files::open_input(target)?,
                    &target.to_string_lossy(),
                )?);
            }
            CountSource::PhraseCounts => {
                if let Some(i) = header.schema.count_index(CountColumn::Count) {
                    let (_, records) = open()?;
                    let mut sum = 0u64;
                    for r in records {
                        sum += r?.0.counts[i];
                    }
                    occurrences = Some(sum);
                }
            }
        }
    }
    let make = |corpus: Option<SentenceCounts>| {
        Pruner::with_counts(&header, &name, options, corpus, occurrences)
    };
    let progress = Progress::new(options.progress);
    // first attempt: stream, assuming the input is sorted by source
    let mut pruner = make(corpus.take())?;
    let (_, records) = open()?;
    let header_out = pruner.header().clone();
    let outcome = write_output(output, &header_out, memory, |emit| {
        pruner.run_sorted(progress.wrap(records), emit)
    })?;
    if let Outcome::Done = outcome {
        progress.finish();
        return Ok(pruner.stats().clone());
    }
    // second attempt: sort by source, then stream
    let corpus = pruner.take_corpus();
    let mut pruner = make(corpus)?;
    progress.restart("sorting by source");
    let mut sorter = ExternalSorter::new(memory as usize, None)?;
    let (_, records) = open()?;
    let mut value = Vec::new();
    for r in progress.wrap(records) {
        let (pair, line) = r?;
        encode(&pair, line, &mut value);
        sorter.push(pair.source.as_bytes(), &value)?;
    }
    let mut sorted = sorter.finish()?;
    let decoded = std::iter::from_fn(move || match sorted.next_record() {
        Ok(Some((key, value))) => Some(decode(key, value)),
        Ok(None) => None,
        Err(e) => Some(Err(e)),
    });
    progress.restart("pruning");
    let header_out = pruner.header().clone();
    let outcome = write_output(output, &header_out, memory, |emit| {
        pruner.run_sorted(progress.wrap(Box::new(decoded)), emit)
    })?;
    progress.finish();
    match outcome {
        Outcome::Done => {
            let mut stats = pruner.stats().clone();
            stats.sorted_externally = true;
            Ok(stats)
        }
        Outcome::Unsorted { line, .. } => Err(Error::input(
            &name,
            line,
            "records are still out of order after sorting (internal error)",
        )),
    }
}

use crate::read::is_packed;

/// TSV records with their line numbers.
struct Numbered<R> {
    reader: TsvReader<R>,
}

impl<R: BufRead> Iterator for Numbered<R> {
    type Item = Result<(PhrasePair, u64)>;
    fn next(&mut self) -> Option<Self::Item> {
        let mut pair = PhrasePair::default();
        match self.reader.read_into(&mut pair) {
            Ok(true) => Some(Ok((pair, self.reader.line()))),
            Ok(false) => None,
            Err(e) => Some(Err(e)),
        }
    }
}

type Emit<'e> = dyn FnMut(&PhrasePair) -> Result<()> + 'e;

/// Opens `output` as TSV or a packed table, lets `body` emit pairs into it, and commits it only
/// when `body` reports [`Outcome::Done`].
fn write_output<B>(output: &Path, header: &Header, memory: u64, body: B) -> Result<Outcome>
where
    B: FnOnce(&mut Emit<'_>) -> Result<Outcome>,
{
    if !is_packed(output) {
        let out = Output::create(output)?;
        let mut writer =
            TsvWriter::new(out, header).map_err(|e| Error::io(output, "writing", e))?;
        let outcome = body(&mut |pair: &PhrasePair| {
            writer
                .write_pair(pair)
                .map_err(|e| Error::io(output, "writing", e))
        })?;
        if let Outcome::Done = outcome {
            writer.into_inner().commit()?;
        }
        return Ok(outcome);
    }
    let options = PackOptions {
        memory,
        provenance: vec![("pruned_with".into(), header_filters(header))],
        ..Default::default()
    };
    std::thread::scope(|scope| {
        let (sender, receiver) = mpsc::sync_channel::<Result<PhrasePair>>(4096);
        let packer =
            scope.spawn(move || pack::pack_pairs(header, receiver.into_iter(), output, &options));
        let stopped = || Error::Unsupported("the packer stopped early".into());
        let outcome =
            body(&mut |pair: &PhrasePair| sender.send(Ok(pair.clone())).map_err(|_| stopped()));
        if !matches!(outcome, Ok(Outcome::Done)) {
            // make the packer fail, so that it leaves nothing behind
            let _ = sender.send(Err(Error::Unsupported("pruning restarted".into())));
        }
        drop(sender);
        let packed = packer
            .join()
            .map_err(|_| Error::Unsupported("the packer panicked".into()))?;
        match outcome {
            Ok(Outcome::Done) => packed.map(|_| Outcome::Done),
            Ok(unsorted) => Ok(unsorted),
            Err(e) => Err(packed.err().unwrap_or(e)),
        }
    })
}

fn header_filters(header: &Header) -> String {
    header.metadata.get("pruned_with").unwrap_or("").to_string()
}

/// Record layout in the sort runs (after the source key): line, target, alignment, scores,
/// counts, little-endian with u32 lengths.
fn encode(pair: &PhrasePair, line: u64, out: &mut Vec<u8>) {
    out.clear();
    out.extend_from_slice(&line.to_le_bytes());
    out.extend_from_slice(&(pair.target.len() as u32).to_le_bytes());
    out.extend_from_slice(pair.target.as_bytes());
    out.extend_from_slice(&(pair.alignment.len() as u32).to_le_bytes());
    for &(i, j) in &pair.alignment {
        out.extend_from_slice(&i.to_le_bytes());
        out.extend_from_slice(&j.to_le_bytes());
    }
    out.extend_from_slice(&(pair.scores.len() as u32).to_le_bytes());
    for s in &pair.scores {
        out.extend_from_slice(&s.to_bits().to_le_bytes());
    }
    out.extend_from_slice(&(pair.counts.len() as u32).to_le_bytes());
    for c in &pair.counts {
        out.extend_from_slice(&c.to_le_bytes());
    }
}

fn decode(key: &[u8], value: &[u8]) -> Result<(PhrasePair, u64)> {
    let bad = || Error::Unsupported("a temporary sort run is damaged".into());
    let mut at = 0;
    let mut take = |n: usize| -> Result<&[u8]> {
        let s = value.get(at..at + n).ok_or_else(bad)?;
        at += n;
        Ok(s)
    };
    let u32_at = |b: &[u8]| u32::from_le_bytes(b.try_into().expect("4 bytes")) as usize;
    let u64_at = |b: &[u8]| u64::from_le_bytes(b.try_into().expect("8 bytes"));
    let line = u64_at(take(8)?);
    let n = u32_at(take(4)?);
    let target = String::from_utf8(take(n)?.to_vec()).map_err(|_| bad())?;
    let n = u32_at(take(4)?);
    let mut alignment = Vec::with_capacity(n);
    for _ in 0..n {
        let b = take(4)?;
        alignment.push((
            u16::from_le_bytes([b[0], b[1]]),
            u16::from_le_bytes([b[2], b[3]]),
        ));
    }
    let n = u32_at(take(4)?);
    let mut scores = Vec::with_capacity(n);
    for _ in 0..n {
        scores.push(f64::from_bits(u64_at(take(8)?)));
    }
    let n = u32_at(take(4)?);
    let mut counts = Vec::with_capacity(n);
    for _ in 0..n {
        counts.push(u64_at(take(8)?));
    }
    let source = String::from_utf8(key.to_vec()).map_err(|_| bad())?;
    Ok((
        PhrasePair {
            source,
            target,
            alignment,
            scores,
            counts,
        },
        line,
    ))
}

/// A spinner with the number of pairs read, on stderr when it is a terminal.
struct Progress {
    bar: indicatif::ProgressBar,
}

impl Progress {
    fn new(show: bool) -> Progress {
        let bar = if show {
            let bar = indicatif::ProgressBar::new_spinner();
            bar.set_style(
                indicatif::ProgressStyle::with_template(
                    "{spinner} {msg}: {human_pos} pairs ({per_sec}, {elapsed})",
                )
                .expect("valid template"),
            );
            bar.set_message("pruning");
            bar
        } else {
            indicatif::ProgressBar::hidden()
        };
        Progress { bar }
    }

    fn wrap<'a>(&self, records: Records<'a>) -> Records<'a> {
        let bar = self.bar.clone();
        let mut pending = 0u64;
        Box::new(records.inspect(move |_| {
            pending += 1;
            if pending == 1 << 14 {
                bar.inc(pending);
                pending = 0;
            }
        }))
    }

    fn restart(&self, message: &'static str) {
        self.bar.set_position(0);
        self.bar.set_message(message);
    }

    fn finish(&self) {
        self.bar.finish_and_clear();
    }
}

impl Drop for Progress {
    fn drop(&mut self) {
        self.bar.finish_and_clear();
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sort_record_round_trip() {
        let pair = PhrasePair {
            source: "el muelle".into(),
            target: "the quay".into(),
            alignment: vec![(0, 0), (1, 1)],
            scores: vec![0.25, -1.5e-300],
            counts: vec![3, u64::MAX],
        };
        let mut buf = Vec::new();
        encode(&pair, 77, &mut buf);
        let (back, line) = decode(pair.source.as_bytes(), &buf).unwrap();
        assert_eq!((back, line), (pair, 77));
        assert!(decode(b"x", &buf[..buf.len() - 1]).is_err());
    }
}
