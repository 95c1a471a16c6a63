//! The sentence-level counts of the significance test: `cooc`, `df_source`, `df_target`.
//!
//! For a table (sorted by source, then target) and a corpus shard, [`tally`] counts, for
//! every pair of the table, the sentence pairs of the shard whose source side contains the
//! source phrase (`df_source`), whose target side contains the target phrase (`df_target`),
//! and both (`cooc`), each phrase as a contiguous token sequence anywhere in its sentence and
//! each sentence pair counted once. [`attach`] sums the tallies of any number of shards and
//! appends them to the table as columns.
//!
//! How: the reduce step writes a phrase index ([`super::index`]) beside the table: an `fst`
//! map of the distinct targets (target → rank), another of the sources, and each source's
//! targets as a sorted list of ranks. For every sentence pair
//! and every start position, the source tokens are walked through the source map until no
//! extracted source has that prefix (so the walk stops early), collecting the extracted sources
//! present; likewise the targets. Each source's `cooc` counts are then the intersection of its
//! target list with the sentence's targets, found by binary search from the smaller side. When
//! the index exceeds the memory budget, the table is taken in chunks of sources, one corpus
//! pass per chunk.
//!
//! A tally file is one zstd frame: `BALERTLY`, a little-endian `u32` version (1), a
//! little-endian `u32` length and that many bytes of JSON [`TallyInfo`], then records of LEB128
//! numbers `(gap + 1, cooc, df_source, df_target)` for table rows with any non-zero count
//! (`gap` = rows skipped since the previous record), and a 0 ending the records.

use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::Ordering;
use std::sync::{mpsc, Mutex};

use fst::raw::{Fst, Output};

use super::cooccurrence::Cooccurrence;
use super::corpus::{
    CorpusOptions, CorpusPaths, CorpusReader, CorpusStats, LineRange, SentencePair,
};
use super::index::IndexReader;
use super::report::Progress;
use crate::error::{Error, Result};
use crate::files;
use crate::format::write_varint as put_varint;
use crate::table::{CountColumn, TsvReader, TsvWriter};

const MAGIC: &[u8; 8] = b"BALERTLY";
const VERSION: u32 = 1;
const BATCH: usize = 512;

/// Header of a tally: the shard read and the table it refers to.
#[derive(Clone, Debug, Default, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct TallyInfo {
    /// What was read from the corpus shard.
    pub corpus: CorpusStats,
    /// Rows of the table the tally was computed for.
    pub table_pairs: u64,
    /// Corpus passes made (one per chunk of the index).
    pub passes: u64,
    /// The shard's identity ([`CorpusReader::fingerprint`]), so that a tally given twice is
    /// refused.
    #[serde(default)]
    pub shard: u64,
}

/// Settings of [`tally`].
#[derive(Clone, Debug)]
pub struct TallyOptions {
    /// Longest sentence kept; `None` takes the extraction's value recorded in the index (they
    /// must match so that the same sentence pairs are counted).
    pub max_sentence_length: Option<usize>,
    /// Memory budget in bytes for the index.
    pub memory: u64,
    /// Worker threads.
    pub threads: usize,
    /// Parent directory for temporary files.
    pub temp_dir: Option<PathBuf>,
    /// Draw a progress bar on stderr (only when it is a terminal).
    pub progress: bool,
    /// Which lines of the corpus files to count (a partition of a corpus split by lines).
    pub lines: LineRange,
}

impl Default for TallyOptions {
    fn default() -> Self {
        TallyOptions {
            max_sentence_length: None,
            memory: crate::settings::DEFAULT_MEMORY,
            threads: 1,
            temp_dir: None,
            progress: false,
            lines: LineRange::default(),
        }
    }
}

/// The sources of one chunk of the table, with their targets' ranks.
struct Chunk {
    // Sources first_source.. have local numbers 0..; offsets[k]..offsets[k+1] are the rows of
    // local source k within the chunk.
    first_source: u64,
    offsets: Vec<usize>,
    targets: Vec<u32>,
    first_row: u64,
}

impl Chunk {
    fn memory(&self) -> usize {
        self.offsets.len() * Cooccurrence::BYTES_PER_SOURCE
            + self.targets.len() * Cooccurrence::BYTES_PER_PAIR
    }
}

/// Walks `tokens[start..]` through `fst`, calling `found` with the value of every key that
/// equals a prefix made of whole tokens; stops at the first byte no key continues with.
fn walk(fst: &Fst<Vec<u8>>, text: &str, starts: &[u32], start: usize, found: &mut Vec<u32>) {
    let bytes = text.as_bytes();
    let mut node = fst.root();
    let mut out = Output::zero();
    let from = starts[start] as usize;
    for k in start..starts.len() - 1 {
        let end = starts[k + 1] as usize - 1;
        let begin = if k == start {
            from
        } else {
            starts[k] as usize - 1
        }; // include the space
        for &b in &bytes[begin..end] {
            match node.find_input(b) {
                Some(i) => {
                    let t = node.transition(i);
                    out = out.cat(t.out);
                    node = fst.node(t.addr);
                }
                None => return,
            }
        }
        if node.is_final() {
            found.push(out.cat(node.final_output()).value() as u32);
        }
    }
}

/// One chunk's counting: the index's maps, where the chunk's sources start, and its counts.
#[derive(Clone, Copy)]
struct ChunkCounter<'a> {
    targets: &'a Fst<Vec<u8>>,
    sources: &'a Fst<Vec<u8>>,
    first_source: u64,
    counts: &'a Cooccurrence,
}

impl ChunkCounter<'_> {
    /// Finds the table's phrases in one sentence pair and counts it.
    fn count_sentence(&self, pair: &SentencePair, s_found: &mut Vec<u32>, t_found: &mut Vec<u32>) {
        t_found.clear();
        for j in 0..pair.target_len() {
            walk(self.targets, &pair.target, &pair.target_starts, j, t_found);
        }
        s_found.clear();
        for i in 0..pair.source_len() {
            walk(self.sources, &pair.source, &pair.source_starts, i, s_found);
        }
        let (first, n) = (self.first_source, self.counts.sources() as u64);
        s_found.retain_mut(|s| {
            let local = u64::from(*s).wrapping_sub(first);
            *s = local as u32;
            local < n
        });
        self.counts.add_sentence(s_found, t_found);
    }
}

/// One pass over the corpus for one chunk.
fn count_chunk(
    corpus: &CorpusPaths,
    corpus_options: CorpusOptions,
    counter: ChunkCounter,
    options: &TallyOptions,
    label: &str,
) -> Result<(CorpusStats, u64)> {
    let mut reader = CorpusReader::open(corpus, corpus_options)?;
    let progress = Progress::new(label, reader.total_bytes(), options.progress);
    let bytes_read = reader.progress_counter();
    let threads = options.threads.max(1);
    let (tx, rx) = mpsc::sync_channel::<Vec<SentencePair>>(threads * 2);
    let rx = Mutex::new(rx);
    let result = std::thread::scope(|scope| {
        for _ in 0..threads {
            let rx = &rx;
            scope.spawn(move || {
                let (mut s_found, mut t_found) = (Vec::new(), Vec::new());
                while let Ok(batch) = rx.lock().unwrap().recv() {
                    for pair in &batch {
                        counter.count_sentence(pair, &mut s_found, &mut t_found);
                    }
                }
            });
        }
        let result = (|| -> Result<()> {
            loop {
                let batch = reader.next_batch(BATCH)?;
                let done = batch.len() < BATCH;
                if !batch.is_empty() {
                    tx.send(batch).expect("workers outlive the reader");
                }
                progress.update(
                    bytes_read.load(Ordering::Relaxed),
                    reader.stats().sentence_pairs,
                );
                if done {
                    return Ok(());
                }
            }
        })();
        drop(tx);
        result
    });
    progress.finish();
    result?;
    Ok((reader.stats(), reader.fingerprint()))
}

struct TallyWriter {
    path: PathBuf,
    encoder: zstd::stream::write::Encoder<'static, BufWriter<std::fs::File>>,
    next_row: u64,
    buf: Vec<u8>,
}

impl TallyWriter {
    fn create(path: &Path, info: &TallyInfo) -> Result<TallyWriter> {
        let file = std::fs::File::create(path).map_err(|e| Error::io(path, "creating", e))?;
        let mut encoder = zstd::stream::write::Encoder::new(BufWriter::new(file), 1)
            .map_err(|e| Error::io(path, "creating", e))?;
        encoder
            .include_checksum(true)
            .map_err(|e| Error::io(path, "creating", e))?;
        let json = serde_json::to_vec(info).expect("tally info serializes");
        let mut head = MAGIC.to_vec();
        head.extend_from_slice(&VERSION.to_le_bytes());
        head.extend_from_slice(&(json.len() as u32).to_le_bytes());
        head.extend_from_slice(&json);
        encoder
            .write_all(&head)
            .map_err(|e| Error::io(path, "writing", e))?;
        Ok(TallyWriter {
            path: path.to_path_buf(),
            encoder,
            next_row: 0,
            buf: Vec::with_capacity(1 << 16),
        })
    }

    fn push(&mut self, row: u64, counts: [u32; 3]) -> Result<()> {
        if counts == [0; 3] {
            return Ok(());
        }
        put_varint(&mut self.buf, row - self.next_row + 1);
        for c in counts {
            put_varint(&mut self.buf, u64::from(c));
        }
        self.next_row = row + 1;
        if self.buf.len() >= 1 << 16 {
            self.flush_buf()?;
        }
        Ok(())
    }

    fn flush_buf(&mut self) -> Result<()> {
        self.encoder
            .write_all(&self.buf)
            .map_err(|e| Error::io(&self.path, "writing", e))?;
        self.buf.clear();
        Ok(())
    }

    fn finish(mut self) -> Result<()> {
        self.buf.push(0);
        self.flush_buf()?;
        let werr = |e| Error::io(&self.path, "writing", e);
        let mut file = self.encoder.finish().map_err(werr)?;
        file.flush().map_err(werr)?;
        Ok(())
    }
}

/// Counts, for every row of the table whose phrase `index` the reduce step wrote
/// ([`super::score::MergeOptions::index`]), the sentence pairs of the corpus shard at `corpus`
/// that contain its source, its target, and both; writes the tally to `out` (under a temporary
/// name, renamed into place).
///
/// # Examples
/// ```
/// use baler::extract::corpus::CorpusPaths;
/// use baler::extract::sentences::{attach, tally, TallyOptions};
/// use baler::extract::shard::{extract_shard, ShardOptions};
/// use baler::extract::score::{merge_and_score, MergeOptions};
/// let dir = tempfile::tempdir().unwrap();
/// let write = |name: &str, text: &str| {
///     let p = dir.path().join(name);
///     std::fs::write(&p, text).unwrap();
///     p
/// };
/// let corpus = CorpusPaths {
///     source: write("s", "el muelle\nel barco\n"),
///     target: write("e", "the pier\nthe boat\n"),
///     alignment: Some(write("a", "0-0 1-1\n0-0 1-1\n")),
/// };
/// let run = dir.path().join("shard0.run");
/// extract_shard(&corpus, &ShardOptions::default(), &run).unwrap();
/// let (table, index) = (dir.path().join("merged.tsv"), dir.path().join("merged.index"));
/// let options = MergeOptions { index: Some(index.clone()), ..Default::default() };
/// merge_and_score(&[run], std::fs::File::create(&table).unwrap(), &table, &options).unwrap();
/// let counts = dir.path().join("shard0.tally");
/// tally(&index, &corpus, &TallyOptions::default(), &counts).unwrap();
/// let mut out = Vec::new();
/// attach(&table, &[counts], &mut out, std::path::Path::new("-")).unwrap();
/// let text = String::from_utf8(out).unwrap();
/// // "el" / "the": in both sentence pairs on both sides.
/// assert!(text.contains("\nel\tthe\t0-0\t1\t1\t1\t1\t2\t2\t2\t2\t2\t2\n"));
/// ```
pub fn tally(
    index: &Path,
    corpus: &CorpusPaths,
    options: &TallyOptions,
    out: &Path,
) -> Result<TallyInfo> {
    for (flag, path) in [("--source", &corpus.source), ("--target", &corpus.target)] {
        if path.as_os_str() == files::STDIO {
            return Err(Error::invalid(
                flag,
                "the corpus may be read once per chunk of the index: give a file, not -",
            ));
        }
    }
    let mut inputs = corpus.inputs();
    inputs.push(index);
    files::check_output(out, &inputs)?;
    let mut index = IndexReader::open(index)?;
    let max_sentence_length = options
        .max_sentence_length
        .unwrap_or(index.info.max_sentence_length);
    let corpus_options = CorpusOptions {
        max_sentence_length,
        links_target_first: false,
        lines: options.lines,
    };
    corpus_options.validate()?;
    let corpus = CorpusPaths {
        alignment: None,
        ..corpus.clone()
    };
    let fixed = index.targets.as_fst().size()
        + index.sources.as_fst().size()
        + index.info.targets as usize * 4;
    // Half of what is left: the chunk's vectors grow by doubling.
    let chunk_budget = ((options.memory as usize).saturating_sub(fixed) / 2).max(1 << 16);
    let temp = crate::files::Partial::beside(out)?;
    let mut writer: Option<TallyWriter> = None;
    let mut info = TallyInfo {
        table_pairs: index.info.rows,
        ..Default::default()
    };
    let (mut row, mut source) = (0u64, 0u64);
    loop {
        let mut chunk = Chunk {
            first_source: source,
            offsets: vec![0],
            targets: Vec::new(),
            first_row: row,
        };
        while index.sources_left() > 0 && chunk.memory() < chunk_budget {
            index.next_source(&mut chunk.targets)?;
            chunk.offsets.push(chunk.targets.len());
            source += 1;
        }
        row += chunk.targets.len() as u64;
        info.passes += 1;
        let label = format!("sentence counts (pass {})", info.passes);
        let counts = Cooccurrence::new(chunk.offsets, chunk.targets, index.targets.len());
        let stats = count_chunk(
            &corpus,
            corpus_options,
            ChunkCounter {
                targets: index.targets.as_fst(),
                sources: index.sources.as_fst(),
                first_source: chunk.first_source,
                counts: &counts,
            },
            options,
            &label,
        )?;
        (info.corpus, info.shard) = stats;
        if writer.is_none() {
            writer = Some(TallyWriter::create(temp.path(), &info)?);
        }
        let writer = writer.as_mut().expect("created above");
        let sums = counts.counts();
        for k in 0..counts.sources() {
            let df_source = sums.df_source(k);
            for p in counts.pairs(k) {
                let df_target = sums.df_target(counts.target(p) as usize);
                writer.push(
                    chunk.first_row + p as u64,
                    [sums.cooc(p), df_source, df_target],
                )?;
            }
        }
        if index.sources_left() == 0 {
            break;
        }
    }
    writer.expect("at least one pass").finish()?;
    temp.persist()?;
    Ok(info)
}

struct TallyReader {
    path: PathBuf,
    input: super::framed::FramedInput,
    info: TallyInfo,
    row: u64,
    counts: [u64; 3],
    next_row: u64,
}

impl TallyReader {
    fn open(path: &Path) -> Result<TallyReader> {
        let (input, info, _) = super::framed::open(path, MAGIC, VERSION, "sentence-count tally")?;
        let mut r = TallyReader {
            path: path.to_path_buf(),
            input,
            info,
            row: 0,
            counts: [0; 3],
            next_row: 0,
        };
        r.advance()?;
        Ok(r)
    }

    fn damaged(&self, what: &str) -> Error {
        Error::damaged_intermediate(&self.path, "tally", what)
    }

    fn number(&mut self) -> Result<u64> {
        let path = &self.path;
        super::framed::number(&mut self.input, |why| {
            Error::damaged_intermediate(path, "tally", why)
        })
    }

    /// Reads the next record; at the end sets `row` to `u64::MAX`.
    fn advance(&mut self) -> Result<()> {
        let gap = self.number()?;
        if gap == 0 {
            self.row = u64::MAX;
            return Ok(());
        }
        self.row = self.next_row + gap - 1;
        self.next_row = self.row + 1;
        for k in 0..3 {
            self.counts[k] = self.number()?;
        }
        Ok(())
    }
}

/// What [`attach`] wrote.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct AttachSummary {
    /// Rows written.
    pub pairs: u64,
    /// Sentence pairs counted over all tallies.
    pub sentence_pairs: u64,
}

/// Sums the `tallies` of all shards and writes `table` to `out` with the columns `cooc`,
/// `df_source` and `df_target` appended to every row and `# sentence_pairs` set to the number
/// of sentence pairs counted (it must agree with the table's own value, when present). The
/// table is read and written through [`crate::table`], its rows passed through unchanged
/// (columns must be in canonical order).
pub fn attach<W: Write>(
    table: &Path,
    tallies: &[PathBuf],
    out: W,
    output_name: &Path,
) -> Result<AttachSummary> {
    let name = table.display().to_string();
    let mut reader = TsvReader::new(files::open_input(table)?, name.as_str())?;
    let mut header = reader.header().clone();
    let added = [
        CountColumn::Cooc,
        CountColumn::DfSource,
        CountColumn::DfTarget,
    ];
    if let Some(c) = added.iter().find(|c| header.schema.counts.contains(c)) {
        return Err(Error::input(
            &name,
            reader.line(),
            format!("the table already has a {:?} column", c.name()),
        ));
    }
    if !reader.canonical_columns() {
        return Err(Error::input(
            &name,
            reader.line(),
            "columns must be in canonical order (source, target, alignment, scores, counts)",
        ));
    }
    if tallies.is_empty() {
        return Err(Error::invalid("tallies", "no sentence-count tallies given"));
    }
    let (mut readers, summed) = open_tallies(tallies)?;
    let sentence_pairs = summed.sentence_pairs;
    if let Some(v) = header.metadata.get("sentence_pairs") {
        if v.parse::<u64>().ok() != Some(sentence_pairs) {
            return Err(Error::input(
                &name,
                0,
                format!("sentence_pairs={v}, but the tallies counted {sentence_pairs} sentence pairs: a shard is missing or was read with other settings"),
            ));
        }
    } else {
        // Recorded first, as extraction writes it.
        let mut metadata = crate::table::Metadata::default();
        metadata.set("sentence_pairs", sentence_pairs.to_string());
        for (k, v) in header.metadata.entries() {
            metadata.set(k.as_str(), v.as_str());
        }
        header.metadata = metadata;
    }
    header.schema.counts.extend(added); // the last in canonical order
    let werr = |e| Error::io(output_name, "writing", e);
    let mut writer = TsvWriter::new(out, &header).map_err(werr)?;
    let (mut previous, mut key) = (Vec::new(), Vec::new());
    let mut row = 0u64;
    while let Some(record) = reader.read_raw()? {
        key.clear();
        key.extend_from_slice(record.source.as_bytes());
        key.push(0);
        key.extend_from_slice(record.target.as_bytes());
        if row > 0 && key <= previous {
            return Err(Error::input(
                &name,
                record.line_no,
                "rows must be sorted by source, then target, without repeats",
            ));
        }
        let mut counts = [0u64; 3];
        for r in readers.iter_mut() {
            if r.row == row {
                for (sum, c) in counts.iter_mut().zip(r.counts) {
                    *sum += c;
                }
                r.advance()?;
            }
        }
        writer.write_extended(record.line, &counts).map_err(werr)?;
        std::mem::swap(&mut key, &mut previous);
        row += 1;
    }
    if summed.table_pairs != row || readers.iter().any(|r| r.row != u64::MAX) {
        return Err(Error::input(
            &name,
            0,
            format!(
                "has {row} rows but the tallies were made for a table of {} rows",
                summed.table_pairs
            ),
        ));
    }
    writer.get_mut().flush().map_err(werr)?;
    Ok(AttachSummary {
        pairs: row,
        sentence_pairs,
    })
}

/// What the tallies of [`attach`] add up to.
struct Summed {
    sentence_pairs: u64,
    table_pairs: u64,
}

/// Opens the tallies, checking that no shard is given twice and that all were made for the
/// same table.
fn open_tallies(tallies: &[PathBuf]) -> Result<(Vec<TallyReader>, Summed)> {
    let readers = tallies
        .iter()
        .map(|p| TallyReader::open(p))
        .collect::<Result<Vec<_>>>()?;
    let mut sentence_pairs = 0u64;
    let mut table_pairs = None;
    for (k, (r, path)) in readers.iter().zip(tallies).enumerate() {
        let repeat = readers[..k]
            .iter()
            .position(|o| o.info.shard == r.info.shard);
        if let Some(first) = repeat.filter(|_| r.info.shard != 0) {
            return Err(Error::invalid(
                "tallies",
                format!(
                    "{} counts the same corpus shard as {}: each shard's tally must be given once",
                    path.display(),
                    tallies[first].display()
                ),
            ));
        }
        sentence_pairs += r.info.corpus.sentence_pairs;
        match table_pairs {
            None => table_pairs = Some(r.info.table_pairs),
            Some(n) if n != r.info.table_pairs => {
                return Err(r.damaged(&format!(
                    "made for a table of {} rows, the other tallies for {n}",
                    r.info.table_pairs
                )))
            }
            Some(_) => {}
        }
    }
    let summed = Summed {
        sentence_pairs,
        table_pairs: table_pairs.unwrap_or(0),
    };
    Ok((readers, summed))
}
