//! Reading packed tables.
//!
//! [`Table::open`] maps a `.bale` file and validates its header, section table, metadata and
//! codebooks: work independent of the table's size. Every later access is bounds-checked, so a
//! damaged file yields [`Error::Corrupt`], never a panic or an out-of-bounds read;
//! [`Table::verify`] checks every checksum and decodes every record.

mod options;
mod sections;
mod verify;
mod words;

pub use options::{Options, Span, TranslationOption};

use std::path::{Path, PathBuf};
use std::sync::{Arc, Mutex};

use crate::error::{Error, Result};
use crate::format::{self, Compression, Meta, SectionEntry, SectionKind};
use crate::mmap::{self, Storage};
use crate::table::{CountColumn, Header, Metadata, PhrasePair, Schema};

use sections::{Bytes, Codec, Sections};

/// An open packed table. Cheap to share between threads (`Send + Sync`).
///
/// # Examples
/// ```
/// # fn main() -> baler::Result<()> {
/// let dir = tempfile::tempdir().unwrap();
/// let path = dir.path().join("harbour.bale");
/// let tsv = "source\ttarget\tp_t_given_s\tcount\n\
///            el barco\tthe boat\t0.6\t3\nel barco\tthe ship\t0.4\t2\nbarco\tboat\t1\t4\n";
/// baler::pack::pack_tsv(tsv.as_bytes(), "harbour.tsv", &path, &Default::default())?;
/// let table = baler::Table::open(&path)?;
/// let options = table.lookup("el barco")?;
/// assert_eq!(options.len(), 2);
/// let best = options.get(0).unwrap();
/// assert_eq!(best.target(), "the boat");
/// assert!((best.score_by_name("p_t_given_s").unwrap() - 0.6).abs() < 0.01);
/// assert_eq!(best.count(baler::table::CountColumn::Count), Some(3));
/// assert!(table.lookup("la barca")?.is_empty());
/// # Ok(()) }
/// ```
pub struct Table {
    path: PathBuf,
    storage: Arc<Storage>,
    meta: Meta,
    header: Header,
    shared_schema: Arc<Schema>,
    entries: Vec<SectionEntry>,
    index: fst::Map<Bytes>,
    sections: Sections,
    codecs: Vec<Codec>,
    compression: Compression,
    dictionary: Option<std::ops::Range<usize>>,
    decoders: Mutex<Vec<zstd::bulk::Decompressor<'static>>>,
    block_cache: Vec<Mutex<CacheSlot>>,
}

/// One block-cache entry: block number and its decompressed bytes.
type CacheSlot = Option<(u64, Arc<[u8]>)>;

/// Decompressed blocks a [`Table`] keeps for reuse (direct-mapped by block number).
pub const BLOCK_CACHE_SLOTS: usize = 1024;

/// Tables whose blocks may exceed this many bytes are not cached (1024 × 16 KiB = 16 MiB at most).
const MAX_CACHED_BLOCK_BYTES: u64 = 16 << 10;

/// Size of one section, for reports.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct SectionSize {
    /// Section kind.
    pub kind: SectionKind,
    /// Offset in the file.
    pub offset: u64,
    /// Length in bytes.
    pub length: u64,
}

pub use crate::format::MAX_BLOCK_BYTES;

impl Table {
    /// Memory-maps and validates the table at `path`.
    ///
    /// The file must not be modified in place while it is open (baler's own writers always
    /// write a new file and rename it into place, which is safe).
    pub fn open(path: &Path) -> Result<Table> {
        let storage = mmap::map_file(path)?;
        Table::from_storage(storage, path.to_path_buf())
    }

    /// Validates a table held in memory (e.g. read from a network or an archive).
    pub fn from_bytes<B: AsRef<[u8]> + Send + Sync + 'static>(bytes: B) -> Result<Table> {
        Table::from_storage(Storage::Owned(Box::new(bytes)), PathBuf::from("<memory>"))
    }

    fn from_storage(storage: Storage, path: PathBuf) -> Result<Table> {
        let storage = Arc::new(storage);
        let corrupt = |reason: String| Error::corrupt(&path, reason);
        let data = storage.bytes();
        if data.len() < format::FILE_HEADER_LEN || data[..8] != format::MAGIC {
            return Err(corrupt("missing the baler magic bytes at the start".into()));
        }
        let fh = format::FileHeader::decode(data);
        if fh.major != format::VERSION_MAJOR {
            return Err(corrupt(format!(
                "format version {}.{} is not supported (this reader reads {}.x)",
                fh.major,
                fh.minor,
                format::VERSION_MAJOR
            )));
        }
        if fh.section_count == 0 || fh.section_count > format::MAX_SECTIONS {
            return Err(corrupt(format!(
                "implausible section count {}",
                fh.section_count
            )));
        }
        let table_end =
            format::FILE_HEADER_LEN + fh.section_count as usize * format::SECTION_ENTRY_LEN;
        let table_bytes = data
            .get(format::FILE_HEADER_LEN..table_end)
            .ok_or_else(|| corrupt("the section table is cut off".into()))?;
        if format::table_checksum(data, table_bytes) != fh.table_crc32 {
            return Err(corrupt(
                "the header or section table fails its checksum".into(),
            ));
        }
        let mut entries = Vec::new();
        let mut found: Vec<(SectionKind, std::ops::Range<usize>)> = Vec::new();
        for chunk in table_bytes.chunks_exact(format::SECTION_ENTRY_LEN) {
            let e = SectionEntry::decode(chunk);
            let end = e
                .offset
                .checked_add(e.length)
                .filter(|&end| end <= data.len() as u64);
            let Some(end) = end else {
                return Err(corrupt(format!(
                    "section {} at offset {} with length {} runs past the end of the {}-byte file",
                    e.kind,
                    e.offset,
                    e.length,
                    data.len()
                )));
            };
            if e.offset < table_end as u64 {
                return Err(corrupt(format!("section {} overlaps the header", e.kind)));
            }
            if let Some(kind) = SectionKind::from_id(e.kind) {
                if found.iter().any(|(k, _)| *k == kind) {
                    return Err(corrupt(format!("section {} appears twice", kind.name())));
                }
                let range = e.offset as usize..end as usize;
                if kind.checked_at_open() && crc32fast::hash(&data[range.clone()]) != e.crc32 {
                    return Err(corrupt(format!(
                        "the {} section fails its checksum",
                        kind.name()
                    )));
                }
                found.push((kind, range));
            }
            entries.push(e);
        }
        let get = |kind: SectionKind| {
            found
                .iter()
                .find(|(k, _)| *k == kind)
                .map(|(_, r)| r.clone())
        };
        for kind in SectionKind::ALL {
            if kind.required() && get(kind).is_none() {
                return Err(corrupt(format!("the {} section is missing", kind.name())));
            }
        }
        let meta: Meta = serde_json::from_slice(&data[get(SectionKind::Metadata).unwrap()])
            .map_err(|e| corrupt(format!("the metadata section is not valid: {e}")))?;
        let (header, compression) = check_meta(&meta).map_err(corrupt)?;
        let codecs = sections::parse_codebooks(&data[get(SectionKind::Codebooks).unwrap()], &meta)
            .map_err(corrupt)?;
        let sections = Sections::new(
            data,
            get(SectionKind::Vocabulary).unwrap(),
            get(SectionKind::Targets).unwrap(),
            get(SectionKind::BlockIndex).unwrap(),
            get(SectionKind::Options).unwrap(),
            &meta,
        )
        .map_err(corrupt)?;
        let index_range = get(SectionKind::SourceIndex).unwrap();
        let index_bytes = Bytes::new(storage.clone(), index_range);
        let index = guard(|| fst::Map::new(index_bytes))
            .ok_or_else(|| corrupt("the source index is damaged".into()))?
            .map_err(|e| corrupt(format!("the source index is not a valid fst: {e}")))?;
        if index.len() as u64 != meta.sources {
            return Err(corrupt(format!(
                "the source index holds {} phrases, the metadata says {}",
                index.len(),
                meta.sources
            )));
        }
        let dictionary = get(SectionKind::Dictionary);
        if dictionary.is_some() && compression != Compression::Zstd {
            return Err(corrupt(
                "a dictionary is present but blocks are not compressed".into(),
            ));
        }
        Ok(Table {
            path,
            storage,
            meta,
            shared_schema: Arc::new(header.schema.clone()),
            header,
            entries,
            index,
            sections,
            codecs,
            compression,
            dictionary,
            decoders: Mutex::new(Vec::new()),
            block_cache: (0..BLOCK_CACHE_SLOTS).map(|_| Mutex::new(None)).collect(),
        })
    }

    /// The path the table was opened from.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// Metadata (the input's `# key=value` lines) and schema of the table.
    pub fn header(&self) -> &Header {
        &self.header
    }

    /// Column layout.
    pub fn schema(&self) -> &Schema {
        &self.header.schema
    }

    /// The stored metadata section.
    pub fn meta(&self) -> &Meta {
        &self.meta
    }

    /// Every section with its size, in file order.
    pub fn section_sizes(&self) -> Vec<SectionSize> {
        let mut out: Vec<SectionSize> = self
            .entries
            .iter()
            .filter_map(|e| {
                SectionKind::from_id(e.kind).map(|kind| SectionSize {
                    kind,
                    offset: e.offset,
                    length: e.length,
                })
            })
            .collect();
        out.sort_by_key(|s| s.offset);
        out
    }

    /// The file size in bytes.
    pub fn file_bytes(&self) -> u64 {
        self.storage.bytes().len() as u64
    }

    /// Number of phrase pairs.
    pub fn pairs(&self) -> u64 {
        self.meta.pairs
    }

    /// Number of distinct source phrases.
    pub fn sources(&self) -> u64 {
        self.meta.sources
    }

    /// The options of one source phrase (empty when the phrase is not in the table).
    pub fn lookup(&self, source: &str) -> Result<Options> {
        let mut options = Options::default();
        self.lookup_into(source, &mut options)?;
        Ok(options)
    }

    /// Like [`Table::lookup`], reusing `options`' buffers; returns whether the phrase was found.
    pub fn lookup_into(&self, source: &str, options: &mut Options) -> Result<bool> {
        options.clear();
        let found =
            guard(|| self.index.get(source.as_bytes())).ok_or_else(|| self.damaged_index())?;
        match found {
            Some(ordinal) => {
                self.decode_source(ordinal, options)?;
                Ok(true)
            }
            None => Ok(false),
        }
    }

    /// The source ordinal (position in byte order) of a phrase, if present.
    pub fn source_ordinal(&self, source: &str) -> Result<Option<u64>> {
        guard(|| self.index.get(source.as_bytes())).ok_or_else(|| self.damaged_index())
    }

    /// Every sub-phrase of `tokens` of at most `max_len` tokens that is in the table, with its
    /// options, ordered by start then length. The index is walked token by token from each
    /// start, so a prefix that no source phrase has ends that walk at once.
    ///
    /// # Examples
    /// ```
    /// # fn main() -> baler::Result<()> {
    /// # let dir = tempfile::tempdir().unwrap();
    /// # let path = dir.path().join("t.bale");
    /// let tsv = "source\ttarget\np\tx\np q\ty\nq\tz\n";
    /// baler::pack::pack_tsv(tsv.as_bytes(), "t.tsv", &path, &Default::default())?;
    /// let table = baler::Table::open(&path)?;
    /// let spans = table.spans(&["p", "q", "r"], 7)?;
    /// let found: Vec<(usize, usize)> = spans.iter().map(|s| (s.start, s.end)).collect();
    /// assert_eq!(found, [(0, 1), (0, 2), (1, 2)]);
    /// assert_eq!(spans[1].options.get(0).unwrap().target(), "y");
    /// # Ok(()) }
    /// ```
    pub fn spans(&self, tokens: &[&str], max_len: usize) -> Result<Vec<Span>> {
        let mut hits: Vec<(usize, usize, u64)> = Vec::new();
        guard(|| {
            let fst = self.index.as_fst();
            for start in 0..tokens.len() {
                let mut node = fst.root();
                let mut out = fst::raw::Output::zero();
                'walk: for (end, token) in tokens.iter().enumerate().skip(start).take(max_len) {
                    let bytes = token.as_bytes();
                    let feed = (end > start)
                        .then_some(b' ')
                        .into_iter()
                        .chain(bytes.iter().copied());
                    for b in feed {
                        match node.find_input(b) {
                            Some(i) => {
                                let t = node.transition(i);
                                out = out.cat(t.out);
                                node = fst.node(t.addr);
                            }
                            None => break 'walk,
                        }
                    }
                    if node.is_final() {
                        hits.push((start, end + 1, out.cat(node.final_output()).value()));
                    }
                }
            }
        })
        .ok_or_else(|| self.damaged_index())?;
        // Sub-phrases sharing a start are neighbours in byte order and often share a block:
        // decode the hits block by block, each block once.
        let mut order: Vec<usize> = (0..hits.len()).collect();
        order.sort_by_key(|&i| hits[i].2);
        let mut decoded: Vec<Option<Options>> = vec![None; hits.len()];
        let per = u64::from(self.meta.sources_per_block);
        let mut scratch = Vec::new();
        let mut k = 0;
        while k < order.len() {
            let ordinal = hits[order[k]].2;
            if ordinal >= self.meta.sources {
                return Err(self.corrupt(format!(
                    "the source index points at source {ordinal} of {}",
                    self.meta.sources
                )));
            }
            let block = ordinal / per;
            let cached = self.cached_block(block)?;
            let bytes: &[u8] = match &cached {
                Some(b) => b,
                None => self.block_bytes(block, &mut scratch)?,
            };
            let n = self.sources_in_block(block);
            while k < order.len() && hits[order[k]].2 / per == block {
                let mut options = Options::default();
                let layout =
                    options::BlockLayout::parse(self, bytes, n, (hits[order[k]].2 % per) as usize)?;
                layout.decode_source(self, bytes, &mut options)?;
                decoded[order[k]] = Some(options);
                k += 1;
            }
        }
        Ok(hits
            .into_iter()
            .zip(decoded)
            .map(|((start, end, _), options)| Span {
                start,
                end,
                options: options.expect("every hit decoded"),
            })
            .collect())
    }

    /// Every source phrase in byte order (read from the index alone, no blocks decoded).
    pub fn source_phrases(&self) -> impl Iterator<Item = Result<String>> + '_ {
        use fst::Streamer;
        // Even starting a stream reads the root node, so it happens under the guard too.
        let mut stream: Option<fst::map::Stream<'_>> = None;
        let mut left = self.meta.sources;
        let mut failed = false;
        std::iter::from_fn(move || {
            if failed || left == 0 {
                return None;
            }
            left -= 1;
            let next = guard(|| {
                stream
                    .get_or_insert_with(|| self.index.stream())
                    .next()
                    .map(|(k, _)| k.to_vec())
            });
            let item = match next {
                Some(Some(key)) => {
                    String::from_utf8(key).map_err(|_| self.corrupt("a source phrase is not UTF-8"))
                }
                Some(None) => Err(self.corrupt("the source index ends early")),
                None => Err(self.damaged_index()),
            };
            failed = item.is_err();
            Some(item)
        })
    }

    /// Every pair in source byte order, options in stored order, scores as quantized values.
    pub fn pairs_iter(&self) -> PairIter<'_> {
        PairIter::new(self)
    }

    /// Checks every checksum and decodes every record; the first problem is returned.
    pub fn verify(&self) -> Result<VerifyReport> {
        verify::verify(self)
    }

    fn damaged_index(&self) -> Error {
        Error::corrupt(
            &self.path,
            "the source index is damaged (a walk left its bounds)",
        )
    }

    pub(crate) fn corrupt(&self, reason: impl Into<String>) -> Error {
        Error::corrupt(&self.path, reason)
    }

    fn data(&self) -> &[u8] {
        self.storage.bytes()
    }

    /// Decodes the options of the source with `ordinal` into `options`.
    fn decode_source(&self, ordinal: u64, options: &mut Options) -> Result<()> {
        if ordinal >= self.meta.sources {
            return Err(self.corrupt(format!(
                "the source index points at source {ordinal} of {}",
                self.meta.sources
            )));
        }
        let per = u64::from(self.meta.sources_per_block);
        let block = ordinal / per;
        let rank = (ordinal % per) as usize;
        if let Some(bytes) = self.cached_block(block)? {
            let layout =
                options::BlockLayout::parse(self, &bytes, self.sources_in_block(block), rank)?;
            return layout.decode_source(self, &bytes, options);
        }
        let mut raw = std::mem::take(&mut options.scratch);
        let result = self.block_bytes(block, &mut raw).and_then(|bytes| {
            let layout =
                options::BlockLayout::parse(self, bytes, self.sources_in_block(block), rank)?;
            layout.decode_source(self, bytes, options)
        });
        options.scratch = raw;
        result
    }

    /// A decompressed block from the table's small direct-mapped cache (decompressing it on a
    /// miss); `None` when blocks are stored raw and read straight from the map. Frequent
    /// phrases (and the sub-phrases of one sentence) come back to the same blocks, so this saves
    /// most decompressions in decoding; it holds at most [`BLOCK_CACHE_SLOTS`] blocks.
    fn cached_block(&self, block: u64) -> Result<Option<Arc<[u8]>>> {
        if self.compression == Compression::None {
            return Ok(None);
        }
        let slot = &self.block_cache[(block % BLOCK_CACHE_SLOTS as u64) as usize];
        if let Ok(guard) = slot.lock() {
            if let Some((b, bytes)) = guard.as_ref() {
                if *b == block {
                    return Ok(Some(bytes.clone()));
                }
            }
        }
        if self.meta.max_block_bytes > MAX_CACHED_BLOCK_BYTES {
            return Ok(None); // very large blocks: decompress per use, keep memory small
        }
        let mut raw = Vec::new();
        let bytes: Arc<[u8]> = Arc::from(self.block_bytes(block, &mut raw)?);
        if let Ok(mut guard) = slot.lock() {
            *guard = Some((block, bytes.clone()));
        }
        Ok(Some(bytes))
    }

    fn sources_in_block(&self, block: u64) -> usize {
        let per = u64::from(self.meta.sources_per_block);
        (self.meta.sources - block * per).min(per) as usize
    }

    /// The raw bytes of a block: borrowed from the map, or decompressed into `scratch`.
    fn block_bytes<'a>(&'a self, block: u64, scratch: &'a mut Vec<u8>) -> Result<&'a [u8]> {
        let data = self.data();
        let range = self
            .sections
            .block_range(data, block)
            .map_err(|r| self.corrupt(r))?;
        let stored = &data[range];
        match self.compression {
            Compression::None => Ok(stored),
            Compression::Zstd => {
                let size = zstd::zstd_safe::get_frame_content_size(stored)
                    .ok()
                    .flatten()
                    .filter(|&s| s <= self.meta.max_block_bytes)
                    .ok_or_else(|| {
                        self.corrupt(format!(
                            "block {block} is not a zstd frame of a plausible size"
                        ))
                    })?;
                scratch.clear();
                scratch.reserve(size as usize);
                let mut decoder = match self.decoders.lock().ok().and_then(|mut p| p.pop()) {
                    Some(d) => d,
                    None => {
                        let dict = self.dictionary.clone().map(|r| &data[r]).unwrap_or(&[]);
                        zstd::bulk::Decompressor::with_dictionary(dict).map_err(|e| {
                            self.corrupt(format!("the zstd dictionary cannot be loaded: {e}"))
                        })?
                    }
                };
                let result = decoder.decompress_to_buffer(stored, scratch);
                if let Ok(mut pool) = self.decoders.lock() {
                    pool.push(decoder);
                }
                match result {
                    Ok(n) if n as u64 == size => Ok(&scratch[..]),
                    Ok(n) => Err(self.corrupt(format!(
                        "block {block} decompressed to {n} bytes, its frame says {size}"
                    ))),
                    Err(e) => Err(self.corrupt(format!("block {block} does not decompress: {e}"))),
                }
            }
        }
    }
}

/// Whether `path` holds a packed table: by its `.bale` extension or, whatever its name, by the
/// format's magic bytes.
///
/// # Examples
/// ```
/// assert!(baler::read::is_packed(std::path::Path::new("missing.bale")));
/// assert!(!baler::read::is_packed(std::path::Path::new("Cargo.toml")));
/// ```
pub fn is_packed(path: &Path) -> bool {
    if path.extension().is_some_and(|e| e == "bale") {
        return true;
    }
    let mut magic = [0u8; 8];
    std::fs::File::open(path)
        .and_then(|mut f| std::io::Read::read_exact(&mut f, &mut magic))
        .is_ok_and(|()| magic == format::MAGIC)
}

/// What [`Table::verify`] checked.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct VerifyReport {
    /// Sections whose checksums matched.
    pub sections: usize,
    /// Blocks decoded.
    pub blocks: u64,
    /// Pairs decoded.
    pub pairs: u64,
    /// Targets decoded.
    pub targets: u64,
}

/// Runs `f`, turning a panic inside the `fst` crate (possible only on a damaged index, whose
/// bytes it trusts) into `None`.
fn guard<T>(f: impl FnOnce() -> T) -> Option<T> {
    std::panic::catch_unwind(std::panic::AssertUnwindSafe(f)).ok()
}

fn check_meta(meta: &Meta) -> std::result::Result<(Header, Compression), String> {
    if meta.format != format::FORMAT_NAME {
        return Err(format!("the metadata names the format {:?}", meta.format));
    }
    let compression = Compression::from_name(&meta.block_compression)
        .ok_or_else(|| format!("unknown block compression {:?}", meta.block_compression))?;
    if meta.sources_per_block == 0 {
        return Err("zero sources per block".into());
    }
    if meta.max_block_bytes > MAX_BLOCK_BYTES {
        return Err(format!(
            "blocks of {} bytes exceed the reader's limit",
            meta.max_block_bytes
        ));
    }
    if meta.sources > meta.pairs
        || meta.targets > meta.pairs
        || (meta.pairs > 0 && meta.sources == 0)
    {
        return Err(format!(
            "inconsistent counts: {} pairs, {} sources, {} targets",
            meta.pairs, meta.sources, meta.targets
        ));
    }
    let mut counts = Vec::new();
    for name in &meta.counts {
        let c =
            CountColumn::from_name(name).ok_or_else(|| format!("unknown count column {name:?}"))?;
        if counts.last().is_some_and(|&last| last >= c) {
            return Err("count columns out of canonical order".into());
        }
        counts.push(c);
    }
    let mut metadata = Metadata::default();
    for (k, v) in &meta.table_metadata {
        metadata.set(k.clone(), v.clone());
    }
    let schema = Schema {
        scores: meta.scores.clone(),
        counts,
        alignment: meta.alignment,
    };
    Ok((Header { metadata, schema }, compression))
}

/// Iterates over every pair of a table; see [`Table::pairs_iter`].
pub struct PairIter<'a> {
    table: &'a Table,
    stream: Option<fst::map::Stream<'a>>,
    next_ordinal: u64,
    block: Vec<Options>,
    current: Option<(String, usize, usize)>,
    scratch: Vec<u8>,
    failed: bool,
}

impl<'a> PairIter<'a> {
    fn new(table: &'a Table) -> PairIter<'a> {
        PairIter {
            table,
            stream: None,
            next_ordinal: 0,
            block: Vec::new(),
            current: None,
            scratch: Vec::new(),
            failed: false,
        }
    }

    fn advance_source(&mut self) -> Result<bool> {
        use fst::Streamer;
        let table = self.table;
        if self.next_ordinal >= table.meta.sources {
            return Ok(false);
        }
        let stream = &mut self.stream;
        let next = guard(|| {
            stream
                .get_or_insert_with(|| table.index.stream())
                .next()
                .map(|(k, v)| (k.to_vec(), v))
        })
        .ok_or_else(|| table.damaged_index())?;
        let Some((key, value)) = next else {
            return Err(table.corrupt("the source index ends early"));
        };
        if value != self.next_ordinal {
            return Err(table.corrupt(format!(
                "source ordinal {value} where {} was expected",
                self.next_ordinal
            )));
        }
        let source =
            String::from_utf8(key).map_err(|_| table.corrupt("a source phrase is not UTF-8"))?;
        let per = u64::from(table.meta.sources_per_block);
        let rank = (self.next_ordinal % per) as usize;
        if rank == 0 {
            let block = self.next_ordinal / per;
            let n = table.sources_in_block(block);
            let mut scratch = std::mem::take(&mut self.scratch);
            let bytes = table.block_bytes(block, &mut scratch)?;
            self.block.clear();
            for r in 0..n {
                let mut o = Options::default();
                let layout = options::BlockLayout::parse(table, bytes, n, r)?;
                layout.decode_source(table, bytes, &mut o)?;
                self.block.push(o);
            }
            self.scratch = scratch;
        }
        self.next_ordinal += 1;
        self.current = Some((source, rank, 0));
        Ok(true)
    }
}

impl Iterator for PairIter<'_> {
    type Item = Result<PhrasePair>;

    fn next(&mut self) -> Option<Result<PhrasePair>> {
        if self.failed {
            return None;
        }
        loop {
            if let Some((source, rank, k)) = &mut self.current {
                let options = &self.block[*rank];
                if let Some(o) = options.get(*k) {
                    *k += 1;
                    return Some(Ok(PhrasePair {
                        source: source.clone(),
                        target: o.target().to_string(),
                        alignment: o.alignment().to_vec(),
                        scores: o.scores().to_vec(),
                        counts: o.counts().to_vec(),
                    }));
                }
            }
            match self.advance_source() {
                Ok(true) => continue,
                Ok(false) => return None,
                Err(e) => {
                    self.failed = true;
                    return Some(Err(e));
                }
            }
        }
    }
}
