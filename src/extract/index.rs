//! The phrase index of a merged table, written by the reduce step beside the table and read by
//! the sentence-level counting step.
//!
//! It holds what the counting needs and nothing else: an `fst` map from every distinct target
//! phrase to its rank in byte order, an `fst` map from every distinct source phrase to its
//! rank, and, source by source in table order, the ranks of the source's targets (which are
//! increasing, as the table is sorted by source then target). Row `r` of the table is the
//! `r`-th `(source, target rank)` of this list.
//!
//! File layout, one zstd frame: `BALERIDX`, a little-endian `u32` version (1), a `u32` length
//! and JSON [`IndexInfo`], a `u64` length and the target map, a `u64` length and the source
//! map, then for each source a LEB128 row count followed by that many LEB128 target ranks.

use std::fs::File;
use std::io::{BufReader, BufWriter, Read, Write};
use std::path::{Path, PathBuf};

use fst::{Map, MapBuilder};

use std::sync::mpsc;

use crate::error::{Error, Result};
use crate::format::{take_varint, write_varint as put_varint};

const MAGIC: &[u8; 8] = b"BALERIDX";
const VERSION: u32 = 1;

/// The index header.
#[derive(Clone, Debug, Default, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct IndexInfo {
    /// Rows of the table.
    pub rows: u64,
    /// Distinct sources.
    pub sources: u64,
    /// Distinct targets.
    pub targets: u64,
    /// Sentence pairs the table was extracted from.
    pub sentence_pairs: u64,
    /// The extraction's sentence length limit (the counting must skip the same pairs).
    pub max_sentence_length: usize,
}

/// An error of the fst builder, converted at the boundary: writing failed, or (a bug) the
/// keys did not arrive in increasing order.
fn fst_error(path: &Path, e: fst::Error) -> Error {
    match e {
        fst::Error::Io(e) => Error::io(path, "writing", e),
        fst::Error::Fst(_) => Error::Internal("phrase index keys out of order"),
    }
}

/// Feeds keys in increasing order to an fst map builder on its own thread (building the map
/// is a fifth of the reduce step's work), each key's value being its rank.
struct FstFeed {
    tx: Option<mpsc::SyncSender<Vec<u8>>>,
    handle: Option<std::thread::JoinHandle<Result<()>>>,
    batch: Vec<u8>,
}

impl FstFeed {
    fn new(file: BufWriter<File>, path: PathBuf) -> Result<FstFeed> {
        let mut builder = MapBuilder::new(file).map_err(|e| fst_error(&path, e))?;
        let (tx, rx) = mpsc::sync_channel::<Vec<u8>>(8);
        let handle = std::thread::spawn(move || -> Result<()> {
            let mut rank = 0u64;
            for batch in rx {
                let mut rest = batch.as_slice();
                while !rest.is_empty() {
                    let len = take_varint(&mut rest).expect("batch written below") as usize;
                    (builder.insert(&rest[..len], rank)).map_err(|e| fst_error(&path, e))?;
                    rest = &rest[len..];
                    rank += 1;
                }
            }
            builder.finish().map_err(|e| fst_error(&path, e))
        });
        Ok(FstFeed {
            tx: Some(tx),
            handle: Some(handle),
            batch: Vec::with_capacity(1 << 16),
        })
    }

    fn push(&mut self, key: &[u8]) -> Result<()> {
        put_varint(&mut self.batch, key.len() as u64);
        self.batch.extend_from_slice(key);
        if self.batch.len() >= 1 << 16 {
            self.send()?;
        }
        Ok(())
    }

    fn send(&mut self) -> Result<()> {
        let batch = std::mem::replace(&mut self.batch, Vec::with_capacity(1 << 16));
        if self.tx.as_ref().expect("open").send(batch).is_err() {
            return self.finish(); // the builder stopped: report its error
        }
        Ok(())
    }

    fn finish(&mut self) -> Result<()> {
        if !self.batch.is_empty() {
            let batch = std::mem::take(&mut self.batch);
            if let Some(tx) = &self.tx {
                let _ = tx.send(batch);
            }
        }
        self.tx = None;
        match self.handle.take() {
            Some(h) => h.join().map_err(|_| Error::WorkerPanicked {
                worker: "phrase index builder",
            })?,
            None => Ok(()),
        }
    }
}

/// Builds an index while the reduce step streams the table; the parts go to temporary files
/// and are joined by [`IndexWriter::finish`].
pub(crate) struct IndexWriter {
    dir: crate::files::TempDir,
    targets: FstFeed,
    sources: FstFeed,
    rows: BufWriter<File>,
    group: Vec<u32>,
    info: IndexInfo,
}

impl IndexWriter {
    pub(crate) fn new(temp_parent: &Option<PathBuf>) -> Result<IndexWriter> {
        let dir = crate::files::TempDir::new(temp_parent.as_deref(), "baler-index-")?;
        let create = |name: &str| -> Result<BufWriter<File>> {
            let p = dir.path().join(name);
            Ok(BufWriter::with_capacity(
                1 << 16,
                File::create(&p).map_err(|e| Error::io(&p, "creating", e))?,
            ))
        };
        let part =
            |name: &str| -> Result<FstFeed> { FstFeed::new(create(name)?, dir.path().join(name)) };
        let (targets, sources) = (part("targets.fst")?, part("sources.fst")?);
        let rows = create("rows")?;
        Ok(IndexWriter {
            dir,
            targets,
            sources,
            rows,
            group: Vec::new(),
            info: IndexInfo::default(),
        })
    }

    /// Adds the next target in byte order; returns its rank.
    pub(crate) fn add_target(&mut self, target: &[u8]) -> Result<u64> {
        let rank = self.info.targets;
        self.targets.push(target)?;
        self.info.targets += 1;
        Ok(rank)
    }

    /// Adds the next row of the table (in table order).
    pub(crate) fn add_row(
        &mut self,
        source: &[u8],
        new_source: bool,
        target_rank: u64,
    ) -> Result<()> {
        if new_source {
            self.end_source()?;
            self.sources.push(source)?;
            self.info.sources += 1;
        }
        self.group.push(target_rank as u32);
        self.info.rows += 1;
        Ok(())
    }

    fn end_source(&mut self) -> Result<()> {
        if self.group.is_empty() {
            return Ok(());
        }
        let mut buf = Vec::with_capacity(self.group.len() * 3 + 5);
        put_varint(&mut buf, self.group.len() as u64);
        for &t in &self.group {
            put_varint(&mut buf, u64::from(t));
        }
        self.rows
            .write_all(&buf)
            .map_err(|e| Error::io(self.dir.path(), "writing in", e))?;
        self.group.clear();
        Ok(())
    }

    pub(crate) fn finish(
        mut self,
        out: &Path,
        sentence_pairs: u64,
        max_sentence_length: usize,
    ) -> Result<()> {
        self.end_source()?;
        let dir_err = |e| Error::io(self.dir.path().to_path_buf(), "writing in", e);
        self.targets.finish()?;
        self.sources.finish()?;
        self.rows.flush().map_err(dir_err)?;
        self.info.sentence_pairs = sentence_pairs;
        self.info.max_sentence_length = max_sentence_length;
        let temp = crate::files::Partial::beside(out)?;
        let werr = |e| Error::io(out, "writing", e);
        let file = File::create(temp.path()).map_err(werr)?;
        let mut enc = zstd::stream::write::Encoder::new(BufWriter::new(file), 1).map_err(werr)?;
        enc.include_checksum(true).map_err(werr)?;
        let json = serde_json::to_vec(&self.info).expect("index info serializes");
        enc.write_all(MAGIC).map_err(werr)?;
        enc.write_all(&VERSION.to_le_bytes()).map_err(werr)?;
        enc.write_all(&(json.len() as u32).to_le_bytes())
            .map_err(werr)?;
        enc.write_all(&json).map_err(werr)?;
        for name in ["targets.fst", "sources.fst"] {
            let p = self.dir.path().join(name);
            let len = std::fs::metadata(&p)
                .map_err(|e| Error::io(&p, "reading", e))?
                .len();
            enc.write_all(&len.to_le_bytes()).map_err(werr)?;
            let mut f = File::open(&p).map_err(|e| Error::io(&p, "opening", e))?;
            std::io::copy(&mut f, &mut enc).map_err(werr)?;
        }
        let p = self.dir.path().join("rows");
        let mut f = File::open(&p).map_err(|e| Error::io(&p, "opening", e))?;
        std::io::copy(&mut f, &mut enc).map_err(werr)?;
        let mut w = enc.finish().map_err(werr)?;
        w.flush().map_err(werr)?;
        drop(w);
        temp.persist()?;
        Ok(())
    }
}

/// An index opened for reading: both maps in memory, the per-source rows streamed.
pub(crate) struct IndexReader {
    path: PathBuf,
    input: BufReader<zstd::stream::read::Decoder<'static, BufReader<File>>>,
    pub(crate) info: IndexInfo,
    pub(crate) targets: Map<Vec<u8>>,
    pub(crate) sources: Map<Vec<u8>>,
    sources_read: u64,
    rows_read: u64,
}

impl IndexReader {
    pub(crate) fn open(path: &Path) -> Result<IndexReader> {
        let (mut input, info, bad) =
            super::framed::open::<IndexInfo>(path, MAGIC, VERSION, "phrase index")?;
        let mut read_map = |what: &str| -> Result<Map<Vec<u8>>> {
            let mut len = [0u8; 8];
            input.read_exact(&mut len).map_err(|_| bad(what))?;
            let len = u64::from_le_bytes(len);
            let mut bytes = Vec::new();
            (&mut input)
                .take(len)
                .read_to_end(&mut bytes)
                .map_err(|_| bad(what))?;
            if bytes.len() as u64 != len {
                return Err(bad(what));
            }
            Map::new(bytes).map_err(|e| bad(&format!("{what}: {e}")))
        };
        let targets = read_map("target map")?;
        let sources = read_map("source map")?;
        if targets.len() as u64 != info.targets || sources.len() as u64 != info.sources {
            return Err(bad("map sizes disagree with the header"));
        }
        Ok(IndexReader {
            path: path.to_path_buf(),
            input,
            info,
            targets,
            sources,
            sources_read: 0,
            rows_read: 0,
        })
    }

    fn damaged(&self, what: &str) -> Error {
        Error::damaged_intermediate(&self.path, "phrase index", what)
    }

    fn number(&mut self) -> Result<u64> {
        let path = &self.path;
        super::framed::number(&mut self.input, |why| {
            Error::damaged_intermediate(path, "phrase index", why)
        })
    }

    /// Sources not yet read with [`IndexReader::next_source`].
    pub(crate) fn sources_left(&self) -> u64 {
        self.info.sources - self.sources_read
    }

    /// Appends the next source's target ranks to `ranks`.
    pub(crate) fn next_source(&mut self, ranks: &mut Vec<u32>) -> Result<()> {
        let n = self.number()?;
        if n == 0 || self.rows_read + n > self.info.rows {
            return Err(self.damaged("row counts disagree with the header"));
        }
        let mut previous = None;
        for _ in 0..n {
            let t = self.number()?;
            if t >= self.info.targets || previous.is_some_and(|p| t <= p) {
                return Err(self.damaged("target ranks out of range or order"));
            }
            previous = Some(t);
            ranks.push(t as u32);
        }
        self.rows_read += n;
        self.sources_read += 1;
        if self.sources_read == self.info.sources && self.rows_read != self.info.rows {
            return Err(self.damaged("row counts disagree with the header"));
        }
        Ok(())
    }
}
