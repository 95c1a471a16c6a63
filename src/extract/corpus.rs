//! Reading a sentence-aligned, tokenized parallel corpus and its word alignment in lockstep.
//!
//! Each file holds one sentence pair per line. Tokens are separated by spaces (tabs count as
//! spaces; runs of them are one separator). Alignment lines hold space-separated `i-j` links,
//! `i` a 0-based source token index and `j` a 0-based target token index (or the reverse, with
//! [`CorpusOptions::links_target_first`]). Inputs ending in `.gz` or `.zst` are decompressed.
//!
//! A sentence pair whose source or target line is empty, or whose source or target is longer
//! than [`CorpusOptions::max_sentence_length`] tokens, is skipped and counted in
//! [`CorpusStats`]. Everything else that is wrong (files of different lengths, a malformed link,
//! a link past the end of its sentence, a NUL byte) is an error naming file, line and reason.

use std::fs::File;
use std::io::{self, BufRead, Read};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::Arc;

use crate::error::{Error, Result};
use crate::files;

/// Where the corpus is.
#[derive(Clone, Debug)]
pub struct CorpusPaths {
    /// Source-language sentences.
    pub source: PathBuf,
    /// Target-language sentences.
    pub target: PathBuf,
    /// Word alignments; `None` when only the tokens are needed (sentence-level counting).
    pub alignment: Option<PathBuf>,
}

impl CorpusPaths {
    /// The files read: source, target and the alignment when given (for
    /// [`crate::files::check_output`]).
    pub fn inputs(&self) -> Vec<&Path> {
        let mut inputs = vec![self.source.as_path(), self.target.as_path()];
        inputs.extend(self.alignment.as_deref());
        inputs
    }
}

/// How to read the corpus.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct CorpusOptions {
    /// Sentence pairs with more tokens than this on either side are skipped (at most 65535,
    /// since links are stored as 16-bit indices).
    pub max_sentence_length: usize,
    /// Links are written `target-source` instead of `source-target`.
    pub links_target_first: bool,
    /// Which lines of the files to read (all by default): one partition of a corpus split
    /// by lines, whose errors still name the files' own line numbers.
    pub lines: LineRange,
}

impl Default for CorpusOptions {
    fn default() -> Self {
        CorpusOptions {
            max_sentence_length: 100,
            links_target_first: false,
            lines: LineRange::default(),
        }
    }
}

/// A range of lines of the corpus files, 1-based and inclusive: `FIRST-LAST`, or `FIRST-` for
/// every line from `FIRST` to the end.
///
/// Lines before `FIRST` are read and passed over, not checked (another partition checks
/// them); the end of the files is checked only by a range without `LAST`, so the partitions of
/// a corpus must end with one. A range past the end of the files holds no sentence pairs.
///
/// # Examples
/// ```
/// use baler::extract::corpus::LineRange;
/// let r: LineRange = "1001-2000".parse().unwrap();
/// assert_eq!((r.first, r.last), (1001, Some(2000)));
/// assert_eq!("7-".parse::<LineRange>().unwrap().last, None);
/// assert!("0-5".parse::<LineRange>().is_err());
/// assert!("9-3".parse::<LineRange>().is_err());
/// assert_eq!(LineRange::default().to_string(), "1-");
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct LineRange {
    /// First line read (1-based).
    pub first: u64,
    /// Last line read, or `None` for the end of the files.
    pub last: Option<u64>,
    /// Byte offsets where line `first` begins in the source, target and alignment files (the
    /// third is unused without an alignment), so that the lines before are not read at all.
    /// Plain files only. Each offset must follow a newline (or be 0; `u64::MAX` for an
    /// alignment offset not given); that the offsets belong to line `first` is the caller's
    /// promise.
    pub start_bytes: Option<[u64; 3]>,
}

impl Default for LineRange {
    fn default() -> Self {
        LineRange {
            first: 1,
            last: None,
            start_bytes: None,
        }
    }
}

impl LineRange {
    /// Whether this is the whole of the files.
    pub fn is_all(&self) -> bool {
        self.first == 1 && self.last.is_none()
    }
}

impl std::str::FromStr for LineRange {
    type Err = String;
    fn from_str(text: &str) -> std::result::Result<Self, String> {
        let bad =
            || format!("{text:?} is not a line range FIRST-LAST or FIRST- (1-based, inclusive)");
        let (first, last) = text.split_once('-').ok_or_else(bad)?;
        let first: u64 = first.parse().map_err(|_| bad())?;
        let last: Option<u64> = match last {
            "" => None,
            l => Some(l.parse().map_err(|_| bad())?),
        };
        if first == 0 || last.is_some_and(|l| l < first) {
            return Err(bad());
        }
        Ok(LineRange {
            first,
            last,
            start_bytes: None,
        })
    }
}

impl std::fmt::Display for LineRange {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self.last {
            Some(last) => write!(f, "{}-{last}", self.first),
            None => write!(f, "{}-", self.first),
        }
    }
}

impl CorpusOptions {
    /// Checks the options' ranges.
    pub fn validate(&self) -> Result<()> {
        if self.max_sentence_length == 0 || self.max_sentence_length > usize::from(u16::MAX) {
            return Err(Error::invalid(
                "--max-sentence-length",
                format!("{} is not between 1 and 65535", self.max_sentence_length),
            ));
        }
        Ok(())
    }
}

/// Counts of what was read.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct CorpusStats {
    /// Lines read from each file.
    pub lines: u64,
    /// Sentence pairs kept.
    pub sentence_pairs: u64,
    /// Sentence pairs skipped because a side was empty.
    pub skipped_empty: u64,
    /// Sentence pairs skipped because a side was longer than the maximum.
    pub skipped_long: u64,
}

impl CorpusStats {
    /// Adds another shard's counts.
    pub fn add(&mut self, other: &CorpusStats) {
        self.lines += other.lines;
        self.sentence_pairs += other.sentence_pairs;
        self.skipped_empty += other.skipped_empty;
        self.skipped_long += other.skipped_long;
    }
}

/// One tokenized sentence pair, tokens normalized to single spaces.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct SentencePair {
    /// 1-based line number in the input files.
    pub line: u64,
    /// Source tokens joined by single spaces.
    pub source: String,
    /// Target tokens joined by single spaces.
    pub target: String,
    /// Byte offset of each source token in `source`, plus `source.len() + 1` at the end.
    pub source_starts: Vec<u32>,
    /// Byte offset of each target token in `target`, plus `target.len() + 1` at the end.
    pub target_starts: Vec<u32>,
    /// `(source, target)` links, sorted and deduplicated; empty without an alignment file.
    pub links: Vec<(u16, u16)>,
}

impl SentencePair {
    /// Number of source tokens.
    pub fn source_len(&self) -> usize {
        self.source_starts.len().saturating_sub(1)
    }

    /// Number of target tokens.
    pub fn target_len(&self) -> usize {
        self.target_starts.len().saturating_sub(1)
    }

    /// Source tokens `start..end` as a phrase (single spaces).
    pub fn source_phrase(&self, start: usize, end: usize) -> &str {
        span(&self.source, &self.source_starts, start, end)
    }

    /// Target tokens `start..end` as a phrase (single spaces).
    pub fn target_phrase(&self, start: usize, end: usize) -> &str {
        span(&self.target, &self.target_starts, start, end)
    }
}

fn span<'a>(text: &'a str, starts: &[u32], start: usize, end: usize) -> &'a str {
    &text[starts[start] as usize..starts[end] as usize - 1]
}

/// Normalizes `line` into `out` (tokens joined by single spaces) and records token offsets.
/// Returns the number of tokens. Tokens are separated by spaces and tabs; this is the one
/// tokenization of corpora (extraction and `prune --source/--target`).
pub(crate) fn tokenize(line: &str, out: &mut String, starts: &mut Vec<u32>) -> usize {
    out.clear();
    starts.clear();
    for token in line.split([' ', '\t']).filter(|t| !t.is_empty()) {
        if !out.is_empty() {
            out.push(' ');
        }
        starts.push(out.len() as u32);
        out.push_str(token);
    }
    starts.push(out.len() as u32 + 1);
    starts.len() - 1
}

/// Whether a sentence pair of `ns` source and `nt` target tokens is kept.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum Kept {
    Yes,
    /// A side has no token.
    Empty,
    /// A side has more than the maximum sentence length.
    TooLong,
}

/// The one rule for the sentence pairs that count. N, the `sentence_pairs` of a table, is the
/// number of sentence pairs kept: both sides have at least one token and neither has more
/// than `max_sentence_length`. Extraction and `prune --source/--target` both count by it, so
/// the significance test's N and thresholds do not depend on the path taken.
pub(crate) fn kept(ns: usize, nt: usize, max_sentence_length: usize) -> Kept {
    if ns == 0 || nt == 0 {
        Kept::Empty
    } else if ns > max_sentence_length || nt > max_sentence_length {
        Kept::TooLong
    } else {
        Kept::Yes
    }
}

struct CountingRead<R> {
    inner: R,
    count: Arc<AtomicU64>,
}

impl<R: Read> Read for CountingRead<R> {
    fn read(&mut self, buf: &mut [u8]) -> io::Result<usize> {
        let n = self.inner.read(buf)?;
        self.count.fetch_add(n as u64, Ordering::Relaxed);
        Ok(n)
    }
}

/// Opens `path` like [`files::open_input`], counting the (compressed) bytes consumed.
fn open_counted(path: &Path, count: Arc<AtomicU64>) -> Result<Box<dyn BufRead + Send>> {
    if path.as_os_str() == files::STDIO {
        return files::open_input(path);
    }
    let file = File::open(path).map_err(|e| Error::io(path, "opening", e))?;
    files::decompressing(path, Box::new(CountingRead { inner: file, count }))
}

struct Side {
    name: String,
    input: Box<dyn BufRead + Send>,
    buf: String,
}

impl Side {
    fn open(path: &Path, count: Option<Arc<AtomicU64>>) -> Result<Side> {
        let input = match count {
            Some(c) => open_counted(path, c)?,
            None => files::open_input(path)?,
        };
        Ok(Side {
            name: path.display().to_string(),
            input,
            buf: String::new(),
        })
    }

    /// Opens `path`, at byte `start` when given (a plain file, `start` following a newline).
    fn open_at(path: &Path, count: Option<Arc<AtomicU64>>, start: Option<u64>) -> Result<Side> {
        let Some(start) = start else {
            return Side::open(path, count);
        };
        let name = path.display().to_string();
        if path.as_os_str() == files::STDIO
            || path.extension().is_some_and(|e| e == "gz" || e == "zst")
        {
            return Err(Error::invalid(
                "--start-bytes",
                format!("{name}: byte offsets need a plain file, not a stream or a compressed one"),
            ));
        }
        let mut file = File::open(path).map_err(|e| Error::io(path, "opening", e))?;
        use std::io::{Seek, SeekFrom};
        if start > 0 {
            let mut before = [0u8];
            file.seek(SeekFrom::Start(start - 1))
                .and_then(|_| file.read_exact(&mut before))
                .map_err(|e| Error::io(path, "seeking in", e))?;
            if before[0] != b'\n' {
                return Err(Error::invalid(
                    "--start-bytes",
                    format!("{name}: byte {start} does not begin a line"),
                ));
            }
        } else {
            file.seek(SeekFrom::Start(0))
                .map_err(|e| Error::io(path, "seeking in", e))?;
        }
        let raw: Box<dyn Read + Send> = match count {
            Some(count) => Box::new(CountingRead { inner: file, count }),
            None => Box::new(file),
        };
        Ok(Side {
            name,
            input: Box::new(io::BufReader::with_capacity(1 << 16, raw)),
            buf: String::new(),
        })
    }

    /// Passes over one line without decoding it; false at the end of the file.
    fn skip(&mut self, line: u64) -> Result<bool> {
        let failed = |e: io::Error| Error::input(&self.name, line, format!("read failed: {e}"));
        let mut any = false;
        loop {
            let buf = self.input.fill_buf().map_err(failed)?;
            if buf.is_empty() {
                return Ok(any);
            }
            any = true;
            match buf.iter().position(|&b| b == b'\n') {
                Some(k) => {
                    self.input.consume(k + 1);
                    return Ok(true);
                }
                None => {
                    let n = buf.len();
                    self.input.consume(n);
                }
            }
        }
    }

    fn read(&mut self, line: u64) -> Result<bool> {
        let more = files::read_line(&mut *self.input, &mut self.buf, &self.name, line)?;
        if more && self.buf.contains('\0') {
            return Err(Error::input(&self.name, line, "contains a NUL byte"));
        }
        Ok(more)
    }
}

/// Reads sentence pairs from the source, target and (optionally) alignment files together.
///
/// # Examples
/// ```
/// use baler::extract::corpus::{CorpusOptions, CorpusPaths, CorpusReader, SentencePair};
/// let dir = tempfile::tempdir().unwrap();
/// let write = |name: &str, text: &str| {
///     let p = dir.path().join(name);
///     std::fs::write(&p, text).unwrap();
///     p
/// };
/// let paths = CorpusPaths {
///     source: write("harbour.es", "el  muelle\n\nla grúa nueva\n"),
///     target: write("harbour.en", "the pier\nempty source\nthe new crane\n"),
///     alignment: Some(write("harbour.links", "1-1 0-0\n\n0-0 1-2 2-1\n")),
/// };
/// let mut reader = CorpusReader::open(&paths, CorpusOptions::default()).unwrap();
/// let mut pair = SentencePair::default();
/// assert!(reader.next_pair(&mut pair).unwrap());
/// assert_eq!((pair.source.as_str(), pair.links.as_slice()), ("el muelle", &[(0, 0), (1, 1)][..]));
/// assert!(reader.next_pair(&mut pair).unwrap());
/// assert_eq!((pair.line, pair.target_phrase(1, 3)), (3, "new crane"));
/// assert!(!reader.next_pair(&mut pair).unwrap());
/// assert_eq!(reader.stats().skipped_empty, 1);
/// ```
pub struct CorpusReader {
    source: Side,
    target: Side,
    alignment: Option<Side>,
    options: CorpusOptions,
    line: u64,
    stats: CorpusStats,
    bytes: Arc<AtomicU64>,
    total_bytes: Option<u64>,
    source_sum: crc32fast::Hasher,
    target_sum: crc32fast::Hasher,
}

impl CorpusReader {
    /// Opens the files.
    pub fn open(paths: &CorpusPaths, options: CorpusOptions) -> Result<CorpusReader> {
        options.validate()?;
        let bytes = Arc::new(AtomicU64::new(0));
        let total_bytes = if paths.source.as_os_str() == files::STDIO {
            None
        } else {
            std::fs::metadata(&paths.source).ok().map(|m| m.len())
        };
        let lines = options.lines;
        let starts = lines.start_bytes.map(|[s, t, a]| (s, t, a));
        if let Some((s, t, a)) = starts {
            if paths.alignment.is_some() && a == u64::MAX {
                return Err(Error::invalid(
                    "--start-bytes",
                    "give the alignment file's offset too (SRC,TGT,ALIGN)",
                ));
            }
            if lines.first == 1 && (s, t) != (0, 0)
                || paths.alignment.is_some() && lines.first == 1 && a != 0
            {
                return Err(Error::invalid(
                    "--start-bytes",
                    "line 1 begins at byte 0 of every file",
                ));
            }
        }
        let mut reader = CorpusReader {
            source: Side::open_at(&paths.source, Some(bytes.clone()), starts.map(|o| o.0))?,
            target: Side::open_at(&paths.target, None, starts.map(|o| o.1))?,
            alignment: match &paths.alignment {
                Some(p) => Some(Side::open_at(p, None, starts.map(|o| o.2))?),
                None => None,
            },
            options,
            line: 0,
            stats: CorpusStats::default(),
            bytes,
            total_bytes,
            source_sum: crc32fast::Hasher::new(),
            target_sum: crc32fast::Hasher::new(),
        };
        if lines.first > 1 {
            // The identity of a partition includes where it starts, so that two partitions of
            // the same text are still two shards.
            reader.source_sum.update(&lines.first.to_le_bytes());
            reader.target_sum.update(&lines.first.to_le_bytes());
        }
        if starts.is_some() {
            reader.line = lines.first - 1;
        }
        Ok(reader)
    }

    /// What has been read so far.
    pub fn stats(&self) -> CorpusStats {
        self.stats
    }

    /// The identity of the shard read so far: CRC-32 checksums of its source and target lines
    /// (the high and low 32 bits), whatever the alignment. Two runs or tallies of the same
    /// shard carry the same identity, so that a repeated shard can be refused.
    pub fn fingerprint(&self) -> u64 {
        (u64::from(self.source_sum.clone().finalize()) << 32)
            | u64::from(self.target_sum.clone().finalize())
    }

    /// Bytes of the source file consumed so far (compressed bytes for compressed input), for
    /// progress reports.
    pub fn progress_counter(&self) -> Arc<AtomicU64> {
        self.bytes.clone()
    }

    /// Size of the source file in bytes, when known.
    pub fn total_bytes(&self) -> Option<u64> {
        self.total_bytes
    }

    /// Reads up to `size` kept sentence pairs (fewer only at the end of the corpus), for
    /// handing to worker threads.
    pub(crate) fn next_batch(&mut self, size: usize) -> Result<Vec<SentencePair>> {
        let mut batch = Vec::with_capacity(size);
        let mut pair = SentencePair::default();
        while batch.len() < size && self.next_pair(&mut pair)? {
            batch.push(std::mem::take(&mut pair));
        }
        Ok(batch)
    }

    /// Reads the next kept sentence pair into `pair`; false at the end of the corpus.
    pub fn next_pair(&mut self, pair: &mut SentencePair) -> Result<bool> {
        if self.line + 1 < self.options.lines.first && !self.skip_to_first()? {
            return Ok(false);
        }
        loop {
            if self
                .options
                .lines
                .last
                .is_some_and(|last| self.line >= last)
            {
                return Ok(false);
            }
            self.line += 1;
            let line = self.line;
            let s = self.source.read(line)?;
            let t = self.target.read(line)?;
            let a = match &mut self.alignment {
                Some(side) => Some(side.read(line)?),
                None => None,
            };
            let all = [Some(s), Some(t), a];
            if all.iter().flatten().all(|more| !more) {
                self.line -= 1;
                return Ok(false);
            }
            if let Some(reason) = self.length_mismatch(all) {
                return Err(reason);
            }
            self.stats.lines += 1;
            for (sum, side) in [
                (&mut self.source_sum, &self.source),
                (&mut self.target_sum, &self.target),
            ] {
                sum.update(side.buf.as_bytes());
                sum.update(b"\n");
            }
            let ns = tokenize(&self.source.buf, &mut pair.source, &mut pair.source_starts);
            let nt = tokenize(&self.target.buf, &mut pair.target, &mut pair.target_starts);
            match kept(ns, nt, self.options.max_sentence_length) {
                Kept::Yes => {}
                Kept::Empty => {
                    self.stats.skipped_empty += 1;
                    continue;
                }
                Kept::TooLong => {
                    self.stats.skipped_long += 1;
                    continue;
                }
            }
            pair.line = line;
            pair.links.clear();
            if let Some(side) = &self.alignment {
                parse_links(
                    &side.buf,
                    ns,
                    nt,
                    self.options.links_target_first,
                    &mut pair.links,
                )
                .map_err(|reason| Error::input(&side.name, line, reason))?;
                pair.links.sort_unstable();
                pair.links.dedup();
            }
            self.stats.sentence_pairs += 1;
            return Ok(true);
        }
    }

    /// Passes over the lines before the range's first; false when the files end before it.
    fn skip_to_first(&mut self) -> Result<bool> {
        let first = self.options.lines.first;
        while self.line + 1 < first {
            let line = self.line + 1;
            let mut more = true;
            for side in [Some(&mut self.source), Some(&mut self.target)]
                .into_iter()
                .chain([self.alignment.as_mut()])
                .flatten()
            {
                more &= side.skip(line)?;
            }
            if !more {
                // Past the end of the files: the partition that reads the end checks that the
                // files end together.
                return Ok(false);
            }
            self.line = line;
        }
        Ok(true)
    }

    fn length_mismatch(&self, more: [Option<bool>; 3]) -> Option<Error> {
        let sides: Vec<(&Side, bool)> = [Some(&self.source), Some(&self.target)]
            .into_iter()
            .chain([self.alignment.as_ref()])
            .zip(more)
            .filter_map(|(side, m)| Some((side?, m?)))
            .collect();
        let ended = sides.iter().find(|(_, m)| !m)?;
        let going = sides.iter().find(|(_, m)| *m)?;
        Some(Error::input(
            &going.0.name,
            self.line,
            format!(
                "line counts differ: {} has {} lines but {} continues",
                ended.0.name,
                self.line - 1,
                going.0.name
            ),
        ))
    }
}

/// Parses one alignment line into `(source, target)` links checked against the sentence
/// lengths.
///
/// # Examples
/// ```
/// use baler::extract::corpus::parse_links;
/// let mut links = Vec::new();
/// parse_links("0-1 2-0", 3, 2, false, &mut links).unwrap();
/// assert_eq!(links, [(0, 1), (2, 0)]);
/// parse_links("1-0 0-2", 3, 2, true, &mut links).unwrap(); // target-source order
/// assert_eq!(links, [(0, 1), (2, 0)]);
/// assert!(parse_links("0-2", 3, 2, false, &mut links).unwrap_err().contains("2-token target"));
/// assert!(parse_links("0:1", 3, 2, false, &mut links).unwrap_err().contains("malformed"));
/// ```
pub fn parse_links(
    line: &str,
    source_len: usize,
    target_len: usize,
    target_first: bool,
    links: &mut Vec<(u16, u16)>,
) -> std::result::Result<(), String> {
    links.clear();
    for link in crate::table::split_links(line) {
        let (a, b) = link.map_err(|link| {
            let order = if target_first {
                "target-source"
            } else {
                "source-target"
            };
            format!("malformed link {link:?}: expected i-j (0-based {order} token indices)")
        })?;
        let (i, j) = if target_first { (b, a) } else { (a, b) };
        let link = || format!("{a}-{b}");
        if i >= source_len {
            return Err(format!(
                "link {:?}: source index {i} is past the end of the {source_len}-token source sentence",
                link()
            ));
        }
        if j >= target_len {
            return Err(format!(
                "link {:?}: target index {j} is past the end of the {target_len}-token target sentence",
                link()
            ));
        }
        links.push((i as u16, j as u16));
    }
    Ok(())
}
