//! Count runs: the sorted, compressed files that shards of the corpus are extracted into.
//!
//! A run is one zstd frame holding
//!
//! 1. the 8 bytes `BALERRUN`, then a little-endian `u32` format version (1);
//! 2. a little-endian `u32` length and that many bytes of JSON [`RunInfo`] (what was read and
//!    with which settings);
//! 3. records in strictly increasing key byte order, each a LEB128 key length, the key, and a
//!    LEB128 count; a key length of 0 ends the records.
//!
//! Keys start with a kind byte. [`WORD_KIND`] keys are `source word 0x00 target word`, with
//! an empty word standing for NULL (an unaligned word on the other side); [`PHRASE_KIND`] keys
//! are `source phrase 0x00 target phrase 0x00 internal alignment`; [`TARGET_KIND`] keys (only in
//! the target totals of [`super::ranges`]) are a target phrase. Runs from any number of
//! shards merge by summing the counts of equal keys ([`RunMerger`]).

use std::fs::File;
use std::io::{BufReader, BufWriter, Read, Write};
use std::path::{Path, PathBuf};

use super::corpus::CorpusStats;
use crate::error::{Error, Result};
use crate::format::{read_varint_from, write_varint};
use crate::sort::{Merge, SortedRun};

/// Kind byte of a word-link count key.
pub const WORD_KIND: u8 = 1;
/// Kind byte of a phrase-pair count key.
pub const PHRASE_KIND: u8 = 2;
/// Kind byte of a target-total key (`target phrase`, counted over all its sources), in the
/// target-totals runs of [`super::ranges`].
pub const TARGET_KIND: u8 = 3;

const MAGIC: &[u8; 8] = b"BALERRUN";
const VERSION: u32 = 1;

/// What a run was extracted from, and how.
#[derive(Clone, Debug, Default, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct RunInfo {
    /// What was read from the corpus shard(s).
    pub corpus: CorpusStats,
    /// Longest phrase extracted.
    pub max_length: usize,
    /// Longest sentence kept.
    pub max_sentence_length: usize,
    /// Whether unaligned edge words extended pairs.
    pub unaligned_edges: bool,
    /// Phrase-pair occurrences extracted.
    pub pair_occurrences: u64,
    /// The identities ([`super::corpus::CorpusReader::fingerprint`]) of the corpus shards
    /// counted, so that a shard merged twice is refused.
    #[serde(default)]
    pub shards: Vec<u64>,
}

impl RunInfo {
    /// Adds another run's counts, checking that the settings agree.
    pub fn combine(&mut self, other: &RunInfo, other_name: &Path) -> Result<()> {
        if (
            self.max_length,
            self.max_sentence_length,
            self.unaligned_edges,
        ) != (
            other.max_length,
            other.max_sentence_length,
            other.unaligned_edges,
        ) {
            return Err(Error::invalid(
                "runs",
                format!(
                    "{} was extracted with different settings (max length {}, max sentence length {}, unaligned edges {}) than the runs before it ({}, {}, {})",
                    other_name.display(),
                    other.max_length,
                    other.max_sentence_length,
                    other.unaligned_edges,
                    self.max_length,
                    self.max_sentence_length,
                    self.unaligned_edges
                ),
            ));
        }
        if let Some(repeat) = other.shards.iter().find(|s| self.shards.contains(s)) {
            return Err(Error::invalid(
                "runs",
                format!(
                    "{} repeats corpus shard {repeat:016x}, which the runs before it already counted: each shard must be merged once",
                    other_name.display()
                ),
            ));
        }
        self.shards.extend_from_slice(&other.shards);
        self.corpus.add(&other.corpus);
        self.pair_occurrences += other.pair_occurrences;
        Ok(())
    }
}

/// Writes a run; records must be given in strictly increasing key order.
pub struct RunWriter {
    path: PathBuf,
    encoder: zstd::stream::write::Encoder<'static, BufWriter<File>>,
    buf: Vec<u8>,
    last: Vec<u8>,
    records: u64,
}

impl RunWriter {
    /// Creates `path` and writes the header.
    pub fn create(path: &Path, info: &RunInfo) -> Result<RunWriter> {
        let file = File::create(path).map_err(|e| Error::io(path, "creating", e))?;
        let werr = |e| Error::io(path, "writing", e);
        let mut encoder =
            zstd::stream::write::Encoder::new(BufWriter::with_capacity(1 << 16, file), 1)
                .map_err(werr)?;
        encoder.include_checksum(true).map_err(werr)?;
        let json = serde_json::to_vec(info).expect("run info serializes");
        encoder.write_all(MAGIC).map_err(werr)?;
        encoder.write_all(&VERSION.to_le_bytes()).map_err(werr)?;
        encoder
            .write_all(&(json.len() as u32).to_le_bytes())
            .map_err(werr)?;
        encoder.write_all(&json).map_err(werr)?;
        Ok(RunWriter {
            path: path.to_path_buf(),
            encoder,
            buf: Vec::with_capacity(256),
            last: Vec::new(),
            records: 0,
        })
    }

    /// Appends one record.
    pub fn push(&mut self, key: &[u8], count: u64) -> Result<()> {
        assert!(
            !key.is_empty() && (self.records == 0 || key > self.last.as_slice()),
            "run records must be pushed in strictly increasing key order"
        );
        self.buf.clear();
        write_varint(&mut self.buf, key.len() as u64);
        self.buf.extend_from_slice(key);
        write_varint(&mut self.buf, count);
        self.encoder
            .write_all(&self.buf)
            .map_err(|e| Error::io(&self.path, "writing", e))?;
        self.last.clear();
        self.last.extend_from_slice(key);
        self.records += 1;
        Ok(())
    }

    /// Writes the end marker and closes the file; returns the number of records.
    pub fn finish(mut self) -> Result<u64> {
        let werr = |e| Error::io(&self.path, "writing", e);
        self.encoder.write_all(&[0]).map_err(werr)?;
        let mut file = self.encoder.finish().map_err(werr)?;
        file.flush().map_err(werr)?;
        Ok(self.records)
    }
}

/// Reads a run record by record.
pub struct RunReader {
    path: PathBuf,
    input: BufReader<zstd::stream::read::Decoder<'static, BufReader<File>>>,
    info: RunInfo,
    key: Vec<u8>,
    previous: Vec<u8>,
    count: u64,
    done: bool,
    started: bool,
}

impl RunReader {
    /// Opens `path` and reads its header.
    pub fn open(path: &Path) -> Result<RunReader> {
        let (input, info, _) = super::framed::open::<RunInfo>(path, MAGIC, VERSION, "count run")?;
        Ok(RunReader {
            path: path.to_path_buf(),
            input,
            info,
            key: Vec::new(),
            previous: Vec::new(),
            count: 0,
            done: false,
            started: false,
        })
    }

    /// The header.
    pub fn info(&self) -> &RunInfo {
        &self.info
    }

    /// Advances to the next record; false at the end.
    pub fn advance(&mut self) -> Result<bool> {
        if self.done {
            return Ok(false);
        }
        let damaged = |reason: String| Error::damaged_intermediate(&self.path, "count run", reason);
        let len = read_varint_from(&mut self.input)
            .map_err(|e| damaged(e.to_string()))?
            .ok_or_else(|| damaged("missing end marker (truncated?)".into()))?;
        if len == 0 {
            self.done = true;
            return Ok(false);
        }
        if len > 1 << 20 {
            return Err(damaged(format!("key length {len}")));
        }
        std::mem::swap(&mut self.key, &mut self.previous);
        self.key.resize(len as usize, 0);
        self.input
            .read_exact(&mut self.key)
            .map_err(|e| damaged(e.to_string()))?;
        if self.started && self.key <= self.previous {
            return Err(damaged("keys out of order".into()));
        }
        self.count = read_varint_from(&mut self.input)
            .map_err(|e| damaged(e.to_string()))?
            .ok_or_else(|| damaged("truncated record".into()))?;
        self.started = true;
        Ok(true)
    }

    /// The current record's key.
    pub fn key(&self) -> &[u8] {
        &self.key
    }

    /// The current record's count.
    pub fn count(&self) -> u64 {
        self.count
    }
}

impl SortedRun for RunReader {
    fn advance(&mut self) -> Result<bool> {
        RunReader::advance(self)
    }
    fn key(&self) -> &[u8] {
        RunReader::key(self)
    }
}

/// Merges runs into one stream in key order, summing the counts of equal keys (the k-way
/// merge is [`crate::sort`]'s).
///
/// # Examples
/// ```
/// use baler::extract::runs::{RunInfo, RunMerger, RunReader, RunWriter};
/// let dir = tempfile::tempdir().unwrap();
/// let mut paths = Vec::new();
/// for (n, records) in [[("\u{2}buoy", 2), ("\u{2}quay", 1)], [("\u{2}anchor", 5), ("\u{2}quay", 3)]]
///     .iter().enumerate()
/// {
///     let path = dir.path().join(format!("shard{n}.run"));
///     let mut w = RunWriter::create(&path, &RunInfo::default()).unwrap();
///     for (key, count) in records { w.push(key.as_bytes(), *count).unwrap(); }
///     w.finish().unwrap();
///     paths.push(path);
/// }
/// let readers = paths.iter().map(|p| RunReader::open(p)).collect::<Result<Vec<_>, _>>().unwrap();
/// let mut merged = RunMerger::new(readers).unwrap();
/// let mut out = Vec::new();
/// while let Some((key, count)) = merged.next_record().unwrap() {
///     out.push((String::from_utf8(key[1..].to_vec()).unwrap(), count));
/// }
/// assert_eq!(out, [("anchor".to_string(), 5), ("buoy".into(), 2), ("quay".into(), 4)]);
/// ```
pub struct RunMerger {
    merge: Merge<RunReader>,
    current: Vec<u8>,
}

/// A record of a [`RunMerger`]: a key, its count summed over the runs, and the first run it
/// was read from (named by [`Merged::damaged`]).
pub(crate) struct Merged<'a> {
    pub(crate) key: &'a [u8],
    pub(crate) count: u64,
    run: &'a Path,
}

impl Merged<'_> {
    /// The error of a record that does not parse, naming the run it came from.
    pub(crate) fn damaged(&self, reason: impl Into<String>) -> Error {
        Error::damaged_intermediate(self.run, "count run", reason)
    }
}

impl RunMerger {
    /// Starts merging `runs`.
    pub fn new(runs: Vec<RunReader>) -> Result<RunMerger> {
        Ok(RunMerger {
            merge: Merge::new(runs)?,
            current: Vec::new(),
        })
    }

    /// Opens the runs at `paths` for merging, with their combined header: settings checked
    /// to agree, a shard given twice refused, corpus statistics and occurrences summed.
    pub(crate) fn open(paths: &[PathBuf]) -> Result<(RunMerger, RunInfo)> {
        let readers = paths
            .iter()
            .map(|p| RunReader::open(p))
            .collect::<Result<Vec<_>>>()?;
        let Some(first) = readers.first() else {
            return Err(Error::invalid("runs", "no count runs given"));
        };
        let mut info = RunInfo {
            corpus: CorpusStats::default(),
            pair_occurrences: 0,
            shards: Vec::new(),
            ..first.info().clone()
        };
        for (path, r) in paths.iter().zip(&readers) {
            info.combine(r.info(), path)?;
        }
        Ok((RunMerger::new(readers)?, info))
    }

    /// The next distinct key and its summed count, or `None` at the end.
    pub fn next_record(&mut self) -> Result<Option<(&[u8], u64)>> {
        Ok(self.next_merged()?.map(|m| (m.key, m.count)))
    }

    /// The next distinct key, its summed count and where it came from, or `None` at the end.
    pub(crate) fn next_merged(&mut self) -> Result<Option<Merged<'_>>> {
        let Some(from) = self.merge.peek()? else {
            return Ok(None);
        };
        let run = self.merge.next()?.expect("peeked");
        self.current.clear();
        self.current.extend_from_slice(run.key());
        let mut count = run.count();
        while let Some(i) = self.merge.peek()? {
            let run = self.merge.run(i);
            if run.key() != self.current.as_slice() {
                break;
            }
            count = count.saturating_add(run.count());
            self.merge.next()?;
        }
        Ok(Some(Merged {
            key: &self.current,
            count,
            run: &self.merge.run(from).path,
        }))
    }
}
