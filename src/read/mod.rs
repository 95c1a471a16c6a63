//! Reading packed tables.
//!
//! [`Table::open`] maps a `.bale` file and validates its header, section table and every small
//! section (metadata, codebooks, models, vocabulary, block index, block keys, target index):
//! work that grows with the number of blocks, not pairs. Each source block and target group
//! carries its own checksum, checked when it is decoded, so a damaged file yields
//! [`Error::Corrupt`] naming the block, never a panic or a wrong answer; [`Table::verify`]
//! checks every checksum and decodes every record.
//!
//! Decoded blocks and target groups are kept in a small cache bounded in bytes
//! ([`ReadOptions::cache_bytes`], default [`DEFAULT_CACHE_BYTES`]).

mod cache;
mod direct;
mod options;
mod verify;

pub use options::{Options, Span, TranslationOption};

use std::ops::Range;
use std::path::{Path, PathBuf};
use std::sync::Arc;

use crate::error::{Error, Result};
use crate::format::block::{decode_target, BlockRecords, BlockShape, ModelIds, Upto};
use crate::format::coder::{Models, PlainSource, RansSource, SymbolSource};
use crate::format::sections::{self as layout, Codec, SkipPoints, Vocabulary};
use crate::format::{self, Compression, Layout, Meta, SectionEntry, SectionKind};
use crate::mmap::{self, Storage};
use crate::table::{CountColumn, Header, Metadata, PhrasePair, Schema};

use cache::Cache;

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
/// let ids = best.target_ids();
/// assert_eq!(table.word(ids[1]), Some("boat"));
/// assert!(table.lookup("la barca")?.is_empty());
/// # Ok(()) }
/// ```
pub struct Table {
    path: PathBuf,
    minor: u16,
    storage: Arc<Storage>,
    meta: Meta,
    header: Header,
    shared_schema: Arc<Schema>,
    entries: Vec<SectionEntry>,
    codecs: Vec<Codec>,
    models: Option<Models>,
    vocabulary: Arc<Vocabulary>,
    /// The `direct` layout's reader (`None`: compact).
    direct: Option<Arc<direct::Shared>>,
    shape: BlockShape,
    ids: ModelIds,
    block_index: Range<usize>,
    block_keys: Range<usize>,
    /// The block-skips section (empty when the file has none).
    block_skips: Range<usize>,
    /// The group-skips section (empty when the file has none).
    group_skips: Range<usize>,
    /// The outcome of checking both skips sections (checksums and structure), done on first
    /// use rather than at open (they are a quarter of a MiB or more on a large table).
    skips_checked: std::sync::OnceLock<std::result::Result<(), String>>,
    blocks: Range<usize>,
    n_blocks: usize,
    target_index: Range<usize>,
    targets: Range<usize>,
    n_groups: usize,
    block_cache: Cache<BlockRecords>,
    group_cache: Cache<Group>,
    options_cache: Cache<(Box<[u8]>, Options)>,
    /// Tags of sources decoded once (see `offer_options`).
    seen_sources: cache::Seen,
    /// Blocks decoded once for a lookup (see `lookup_into`).
    seen_blocks: cache::Seen,
}

/// The decoded word ids of targets `first ..` of one target group (`first` is 0 unless
/// decoding resumed at the group's resume point).
#[derive(Default)]
pub(crate) struct Group {
    first: usize,
    ids: Vec<u32>,
    ends: Vec<u32>,
}

impl Group {
    /// Whether target `i` of the group is decoded.
    fn has(&self, i: usize) -> bool {
        i >= self.first && i - self.first < self.ends.len()
    }

    fn target(&self, i: usize) -> &[u32] {
        let i = i - self.first;
        let start = if i == 0 { 0 } else { self.ends[i - 1] as usize };
        &self.ids[start..self.ends[i] as usize]
    }
}

/// Reader settings.
#[derive(Clone, Debug)]
pub struct ReadOptions {
    /// Bytes of decoded data kept for reuse: half for the options of recently used sources, a
    /// quarter each for decoded blocks and decoded target groups; 0 turns caching off.
    pub cache_bytes: usize,
}

/// Default size of the decoded-data cache (8 MiB; see [`ReadOptions::cache_bytes`]).
pub const DEFAULT_CACHE_BYTES: usize = 8 << 20;

impl Default for ReadOptions {
    fn default() -> ReadOptions {
        ReadOptions {
            cache_bytes: DEFAULT_CACHE_BYTES,
        }
    }
}

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

/// A position in source order: block and rank in it.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
struct Position {
    block: usize,
    rank: usize,
}

impl Table {
    /// Memory-maps and validates the table at `path`.
    ///
    /// The file must not be modified in place while it is open (baler's own writers always
    /// write a new file and rename it into place, which is safe).
    pub fn open(path: &Path) -> Result<Table> {
        Table::open_with(path, &ReadOptions::default())
    }

    /// Like [`Table::open`], with reader settings.
    pub fn open_with(path: &Path, options: &ReadOptions) -> Result<Table> {
        let storage = mmap::map_file(path)?;
        Table::from_storage(storage, path.to_path_buf(), options)
    }

    /// Validates a table held in memory (e.g. read from a network or an archive).
    pub fn from_bytes<B: AsRef<[u8]> + Send + Sync + 'static>(bytes: B) -> Result<Table> {
        Table::from_storage(
            Storage::Owned(Box::new(bytes)),
            PathBuf::from("<memory>"),
            &ReadOptions::default(),
        )
    }

    fn from_storage(storage: Storage, path: PathBuf, options: &ReadOptions) -> Result<Table> {
        let storage = Arc::new(storage);
        let corrupt = |reason: String| Error::corrupt(&path, reason);
        let data = storage.bytes();
        if data.len() < format::FILE_HEADER_LEN || data[..8] != format::MAGIC {
            return Err(corrupt("missing the baler magic bytes at the start".into()));
        }
        let fh = format::FileHeader::decode(data);
        if fh.major == 1 {
            return Err(corrupt(format!(
                "this table is in packed format 1.{}, which this baler no longer reads; repack it \
                 from its text: `baler dump` it with the baler that wrote it (0.1), then \
                 `baler pack` the dump with this one",
                fh.minor
            )));
        }
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
        let mut found: Vec<(SectionKind, Range<usize>)> = Vec::new();
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
        let Some(meta_range) = get(SectionKind::Metadata) else {
            return Err(corrupt("the metadata section is missing".into()));
        };
        let meta: Meta = serde_json::from_slice(&data[meta_range])
            .map_err(|e| corrupt(format!("the metadata section is not valid: {e}")))?;
        let layout = Layout::from_name(&meta.layout)
            .ok_or_else(|| corrupt(format!("unknown layout {:?}", meta.layout)))?;
        for kind in SectionKind::ALL {
            if kind.required(layout) && get(kind).is_none() {
                return Err(corrupt(format!("the {} section is missing", kind.name())));
            }
        }
        let section = |kind: SectionKind| get(kind).unwrap_or(0..0);
        let (header, compression) = check_meta(&meta).map_err(corrupt)?;
        let codecs = layout::decode_codebooks(&data[section(SectionKind::Codebooks)], &meta)
            .map_err(corrupt)?;
        let ids = ModelIds::new(meta.scores.len());
        let models = match (compression, get(SectionKind::Models)) {
            (_, Some(_)) if layout == Layout::Direct => {
                return Err(corrupt(
                    "a models section is present in a direct table".into(),
                ))
            }
            (Compression::Rans, Some(r)) => {
                Some(Models::decode(&data[r], ids.count()).map_err(corrupt)?)
            }
            (Compression::Rans, None) => {
                return Err(corrupt("the models section is missing".into()))
            }
            (Compression::None, Some(_)) => {
                return Err(corrupt(
                    "a models section is present but blocks are not coded".into(),
                ))
            }
            (Compression::None, None) => None,
        };
        let vocabulary = Arc::new(
            Vocabulary::decode(&data[section(SectionKind::Vocabulary)], meta.vocabulary)
                .map_err(corrupt)?,
        );
        let shared_schema = Arc::new(header.schema.clone());
        let direct = match layout {
            Layout::Compact => None,
            Layout::Direct => Some(Arc::new(
                direct::Shared::open(
                    path.clone(),
                    storage.clone(),
                    &meta,
                    shared_schema.clone(),
                    codecs.clone(),
                    vocabulary.clone(),
                    section(SectionKind::DirectHash),
                    section(SectionKind::DirectRecords),
                    section(SectionKind::DirectText),
                    section(SectionKind::DirectChunks),
                )
                .map_err(corrupt)?,
            )),
        };
        let (n_blocks, n_groups) = match layout {
            Layout::Compact => (
                meta.sources.div_ceil(u64::from(meta.sources_per_block)),
                meta.targets.div_ceil(u64::from(meta.targets_per_group)),
            ),
            Layout::Direct => (0, 0),
        };
        let (block_index, block_keys, blocks) = (
            section(SectionKind::BlockIndex),
            section(SectionKind::BlockKeys),
            section(SectionKind::Blocks),
        );
        let (target_index, targets) = (
            section(SectionKind::TargetIndex),
            section(SectionKind::Targets),
        );
        if layout == Layout::Compact {
            layout::check_block_index(
                &data[block_index.clone()],
                n_blocks,
                block_keys.len(),
                blocks.len(),
            )
            .map_err(corrupt)?;
            layout::check_target_index(&data[target_index.clone()], n_groups, targets.len())
                .map_err(corrupt)?;
        }
        let block_skips = section(SectionKind::BlockSkips);
        if get(SectionKind::BlockSkips).is_some()
            && (layout != Layout::Compact || compression != Compression::Rans)
        {
            return Err(corrupt(
                "a block-skips section is present but blocks are not rANS coded".into(),
            ));
        }
        let group_skips = section(SectionKind::GroupSkips);
        if get(SectionKind::GroupSkips).is_some()
            && (layout != Layout::Compact || compression != Compression::Rans)
        {
            return Err(corrupt(
                "a group-skips section is present but groups are not rANS coded".into(),
            ));
        }
        let shape = BlockShape {
            widths: codecs.iter().map(Codec::width).collect(),
            alignment: meta.alignment,
            counts: meta.counts.len(),
        };
        let budget = if direct.is_some() {
            0
        } else {
            options.cache_bytes
        };
        let (options_bytes, block_bytes) = (budget / 2, budget / 4);
        Ok(Table {
            path,
            minor: fh.minor,
            shared_schema,
            header,
            entries,
            codecs,
            models,
            vocabulary,
            direct,
            shape,
            ids,
            block_index,
            block_keys,
            block_skips,
            group_skips,
            skips_checked: std::sync::OnceLock::new(),
            blocks,
            n_blocks: n_blocks as usize,
            target_index,
            targets,
            n_groups: n_groups as usize,
            block_cache: Cache::new(block_bytes, n_blocks as usize, 1 << 13),
            group_cache: Cache::new(
                budget - options_bytes - block_bytes,
                n_groups as usize,
                1 << 13,
            ),
            options_cache: Cache::new(options_bytes, meta.sources as usize, 1 << 14),
            seen_sources: cache::Seen::new(options_bytes > 0),
            seen_blocks: cache::Seen::new(block_bytes > 0),
            storage,
            meta,
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

    /// Target word `id` (see [`TranslationOption::target_ids`]).
    pub fn word(&self, id: u32) -> Option<&str> {
        self.vocabulary.word(id)
    }

    /// The layout the table was packed in.
    ///
    /// # Examples
    /// ```
    /// # fn main() -> baler::Result<()> {
    /// # let dir = tempfile::tempdir().unwrap();
    /// # let path = dir.path().join("t.bale");
    /// use baler::format::Layout;
    /// let tsv = "source\ttarget\tp_t_given_s\nel barco\tthe boat\t0.7\nel barco\tthe ship\t0.3\n";
    /// let options = baler::pack::PackOptions { layout: Layout::Direct, ..Default::default() };
    /// baler::pack::pack_tsv(tsv.as_bytes(), "t.tsv", &path, &options)?;
    /// let table = baler::Table::open(&path)?;
    /// assert_eq!(table.layout(), Layout::Direct);
    /// let found = table.lookup("el barco")?;
    /// assert_eq!(found.get(1).unwrap().target(), "the ship");
    /// let spans = table.spans(&["el", "barco", "rojo"], 7)?;
    /// assert_eq!((spans.len(), spans[0].start, spans[0].end), (1, 0, 2));
    /// # Ok(()) }
    /// ```
    pub fn layout(&self) -> Layout {
        if self.direct.is_some() {
            Layout::Direct
        } else {
            Layout::Compact
        }
    }

    /// The file's minor format version (its major version is [`format::VERSION_MAJOR`]).
    pub fn minor_version(&self) -> u16 {
        self.minor
    }

    /// Number of distinct target words; ids run from 0 to this, most frequent first.
    pub fn vocabulary_size(&self) -> usize {
        self.vocabulary.len()
    }

    /// The options of one source phrase (empty when the phrase is not in the table).
    pub fn lookup(&self, source: &str) -> Result<Options> {
        let mut options = Options::default();
        self.lookup_into(source, &mut options)?;
        Ok(options)
    }

    /// Like [`Table::lookup`], reusing `options`' buffers; returns whether the phrase was found.
    pub fn lookup_into(&self, source: &str, options: &mut Options) -> Result<bool> {
        if let Some(d) = &self.direct {
            return d.lookup_into(source, options);
        }
        options.clear();
        let key = source.as_bytes();
        let slot = key_hash(key);
        if let Some(hit) = self.options_cache.get(slot) {
            if *hit.0 == *key {
                options.share(&hit.1);
                return Ok(true);
            }
        }
        let Some(b) = self.find_block(key) else {
            return Ok(false);
        };
        // A block looked up in before is decoded for the cache (its keys whole, its options
        // from the resume point before the phrase), so lookups of its other phrases find it.
        let cached = match self.block_cache.get(b) {
            Some(hit) => Some(hit),
            None if self.seen_blocks.second_time(b as u64) => {
                Some(self.decode_and_offer(b, Upto::Key(key))?)
            }
            None => None,
        };
        if let Some(block) = cached {
            let (block, found) = self.block_for_key(b, key, block)?;
            if let Some(r) = found {
                self.fill(&block, r, options)?;
                self.offer_options(slot, key, options);
                return Ok(true);
            }
            return Ok(false);
        }
        // First lookup in the block: decode just what this lookup needs (keys up to the phrase, options
        // from the resume point before it) into this thread's scratch records, which keep
        // their buffers from lookup to lookup.
        thread_local! {
            static SCRATCH: std::cell::RefCell<BlockRecords> = Default::default();
        }
        SCRATCH.with(|scratch| {
            let mut own = BlockRecords::default();
            let mut borrowed = scratch.try_borrow_mut();
            let records = match &mut borrowed {
                Ok(r) => &mut **r,
                Err(_) => &mut own,
            };
            self.decode_block_upto(b, Upto::Lookup(key), records)?;
            let r = records.lower_bound(key);
            if r < records.sources() && records.key(r) == key {
                self.fill(records, r, options)?;
                self.offer_options(slot, key, options);
                return Ok(true);
            }
            Ok(false)
        })
    }

    /// The source ordinal (position in byte order) of a phrase, if present.
    pub fn source_ordinal(&self, source: &str) -> Result<Option<u64>> {
        if let Some(d) = &self.direct {
            return d.source_ordinal(source);
        }
        let key = source.as_bytes();
        let Some(b) = self.find_block(key) else {
            return Ok(None);
        };
        let block = self.block(b)?;
        let r = block.lower_bound(key);
        Ok((r < block.sources() && block.key(r) == key)
            .then(|| b as u64 * u64::from(self.meta.sources_per_block) + r as u64))
    }

    /// Every sub-phrase of `tokens` of at most `max_len` tokens that is in the table, with its
    /// options, ordered by start then length. From each start the walk extends the phrase one
    /// token at a time and stops as soon as no source phrase continues it.
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
        if let Some(d) = &self.direct {
            return d.spans(tokens, max_len);
        }
        let mut out = Vec::new();
        let mut key: Vec<u8> = Vec::new();
        let mut hint: Option<(usize, Arc<BlockRecords>)> = None;
        for start in 0..tokens.len() {
            key.clear();
            for (end, token) in tokens.iter().enumerate().skip(start).take(max_len) {
                if end > start {
                    key.push(b' ');
                }
                key.extend_from_slice(token.as_bytes());
                let Some(at) = self.seek(&key, &mut hint)? else {
                    break; // an empty table
                };
                let (b, block) = hint.as_ref().expect("seek sets the hint");
                let mut next = at;
                if at.rank < block.sources() && block.key(at.rank) == key.as_slice() {
                    let mut options = Options::default();
                    let slot = key_hash(&key);
                    match self.options_cache.get(slot) {
                        Some(hit) if *hit.0 == *key => options.share(&hit.1),
                        _ => {
                            let full = self.block_with_source(*b, at.rank)?;
                            self.fill(&full, at.rank, &mut options)?;
                            self.offer_options(slot, &key, &mut options);
                        }
                    }
                    out.push(Span {
                        start,
                        end: end + 1,
                        options,
                    });
                    next.rank += 1;
                }
                debug_assert_eq!(next.block, *b);
                if !self.continues(&key, next, &mut hint)? {
                    break;
                }
            }
        }
        Ok(out)
    }

    /// Whether some source phrase starts with `key` followed by a space, given the position of
    /// the first source after `key` itself.
    fn continues(
        &self,
        key: &[u8],
        next: Position,
        hint: &mut Option<(usize, Arc<BlockRecords>)>,
    ) -> Result<bool> {
        let following = {
            let (_, block) = hint.as_ref().expect("hint set");
            if next.rank < block.sources() {
                Some(block.key(next.rank).to_vec())
            } else if next.block + 1 < self.n_blocks {
                Some(self.first_key(next.block + 1).to_vec())
            } else {
                None
            }
        };
        let Some(k) = following else {
            return Ok(false);
        };
        if k.len() > key.len() && k.starts_with(key) {
            match k[key.len()] {
                b' ' => return Ok(true),
                c if c < b' ' => {
                    // Phrases with control characters sort between `key` and `key `: search.
                    let mut probe = key.to_vec();
                    probe.push(b' ');
                    let Some(at) = self.seek(&probe, hint)? else {
                        return Ok(false);
                    };
                    let (_, block) = hint.as_ref().expect("hint set");
                    let k = if at.rank < block.sources() {
                        block.key(at.rank)
                    } else if at.block + 1 < self.n_blocks {
                        self.first_key(at.block + 1)
                    } else {
                        return Ok(false);
                    };
                    return Ok(k.starts_with(&probe));
                }
                _ => return Ok(false),
            }
        }
        Ok(false)
    }

    /// The position of the first source not below `key`, with its block in `hint`; `None`
    /// when the table has no sources.
    fn seek(
        &self,
        key: &[u8],
        hint: &mut Option<(usize, Arc<BlockRecords>)>,
    ) -> Result<Option<Position>> {
        let inside = |b: usize| {
            self.first_key(b) <= key && (b + 1 == self.n_blocks || self.first_key(b + 1) > key)
        };
        let b = match hint {
            Some((b, _)) if inside(*b) => *b,
            _ => {
                if self.n_blocks == 0 {
                    return Ok(None);
                }
                // A key before every source lands at the first source of block 0.
                let b = self.find_block(key).unwrap_or(0);
                *hint = Some((b, self.block(b)?));
                b
            }
        };
        let (_, block) = hint.as_ref().expect("hint set");
        Ok(Some(Position {
            block: b,
            rank: block.lower_bound(key),
        }))
    }

    /// The first key of block `b` (from the block-keys section).
    #[inline]
    fn first_key(&self, b: usize) -> &[u8] {
        let e = layout::block_entry(&self.data()[self.block_index.clone()], b);
        &self.data()[self.block_keys.start + e.key.start..self.block_keys.start + e.key.end]
    }

    /// The last block whose first key is not above `key`.
    fn find_block(&self, key: &[u8]) -> Option<usize> {
        let (mut lo, mut hi) = (0, self.n_blocks);
        while lo < hi {
            let mid = (lo + hi) / 2;
            if self.first_key(mid) <= key {
                lo = mid + 1;
            } else {
                hi = mid;
            }
        }
        lo.checked_sub(1)
    }

    fn sources_in_block(&self, b: usize) -> usize {
        let per = u64::from(self.meta.sources_per_block);
        (self.meta.sources - b as u64 * per).min(per) as usize
    }

    /// Block `b` with at least its keys decoded (from the cache, or decoded and offered to it).
    fn block(&self, b: usize) -> Result<Arc<BlockRecords>> {
        if let Some(hit) = self.block_cache.get(b) {
            return Ok(hit);
        }
        self.decode_and_offer(b, Upto::Sources(0))
    }

    /// Block `b` with its keys and the options of source `r` decoded. A block is decoded only
    /// as far as asked (from the last resume point before `r`), and again when more is asked.
    fn block_with_source(&self, b: usize, r: usize) -> Result<Arc<BlockRecords>> {
        if let Some(hit) = self.block_cache.get(b) {
            if hit.has_options(r) {
                return Ok(hit);
            }
        }
        self.decode_and_offer(b, Upto::Source(r, false))
    }

    /// Block `b` decoded as far as `upto` asks, offered to the cache.
    fn decode_and_offer(&self, b: usize, upto: Upto<'_>) -> Result<Arc<BlockRecords>> {
        let mut records = BlockRecords::default();
        self.decode_block_upto(b, upto, &mut records)?;
        let records = Arc::new(records);
        self.block_cache
            .insert(b, records.clone(), records.heap_bytes());
        Ok(records)
    }

    /// Cached block `b` with the options of the source equal to `key` decoded (decoded again
    /// from its resume point when they are not), and that source's rank, if the block holds it.
    fn block_for_key(
        &self,
        b: usize,
        key: &[u8],
        block: Arc<BlockRecords>,
    ) -> Result<(Arc<BlockRecords>, Option<usize>)> {
        let r = block.lower_bound(key);
        if r < block.sources() && block.key(r) == key {
            if block.has_options(r) {
                return Ok((block, Some(r)));
            }
            return Ok((self.block_with_source(b, r)?, Some(r)));
        }
        Ok((block, None))
    }

    /// Checks block `b`'s checksum and decodes it into `out` (all of it).
    fn decode_block(&self, b: usize, out: &mut BlockRecords) -> Result<()> {
        self.decode_block_upto(b, Upto::Sources(usize::MAX), out)
    }

    /// Checks block `b`'s checksum and decodes its keys and the options of its first `upto`
    /// sources into `out`.
    fn decode_block_upto(&self, b: usize, upto: Upto<'_>, out: &mut BlockRecords) -> Result<()> {
        let data = self.data();
        let e = layout::block_entry(&data[self.block_index.clone()], b);
        let stored = &data[self.blocks.start + e.range.start..self.blocks.start + e.range.end];
        if crc32fast::hash(stored) != e.crc {
            return Err(self.corrupt(format!("block {b} fails its checksum")));
        }
        let first = self.first_key(b);
        let n = self.sources_in_block(b);
        let result = match &self.models {
            Some(m) => match RansSource::new(m, stored) {
                Some(mut src) => out.decode(
                    first,
                    n,
                    upto,
                    &self.shape,
                    &self.ids,
                    self.meta.pairs,
                    &mut src,
                    self.skip_points(b)?,
                ),
                None => Err("its coder state"),
            },
            None => out.decode(
                first,
                n,
                upto,
                &self.shape,
                &self.ids,
                self.meta.pairs,
                &mut PlainSource::new(stored),
                SkipPoints::default(),
            ),
        };
        result.map_err(|what| self.corrupt(format!("block {b} is malformed: {what}")))
    }

    /// Block `b`'s resume points (none when the file has no block-skips section).
    pub(crate) fn skip_points(&self, b: usize) -> Result<SkipPoints<'_>> {
        if self.block_skips.is_empty() {
            return Ok(SkipPoints::default());
        }
        self.check_skips()?;
        Ok(SkipPoints::of_block(
            &self.data()[self.block_skips.clone()],
            self.n_blocks,
            b,
        ))
    }

    /// Checks the checksums and structure of the skips sections, once.
    fn check_skips(&self) -> Result<()> {
        self.skips_checked
            .get_or_init(|| {
                let data = self.data();
                for e in &self.entries {
                    let kind = SectionKind::from_id(e.kind);
                    if matches!(
                        kind,
                        Some(SectionKind::BlockSkips | SectionKind::GroupSkips)
                    ) && crc32fast::hash(
                        &data[e.offset as usize..(e.offset + e.length) as usize],
                    ) != e.crc32
                    {
                        return Err(format!(
                            "the {} section fails its checksum",
                            kind.expect("matched").name()
                        ));
                    }
                }
                if !self.block_skips.is_empty() {
                    layout::check_block_skips(
                        &data[self.block_skips.clone()],
                        self.n_blocks as u64,
                        self.meta.sources_per_block,
                    )?;
                }
                if !self.group_skips.is_empty() {
                    layout::check_group_skips(
                        &data[self.group_skips.clone()],
                        self.n_groups as u64,
                    )?;
                }
                Ok(())
            })
            .clone()
            .map_err(|reason| self.corrupt(reason))
    }

    /// Target group `g` with its target `i` decoded (from the cache, or decoded from the
    /// group's start or its resume point, and offered to the cache).
    fn group(&self, g: usize, i: usize) -> Result<Arc<Group>> {
        if let Some(hit) = self.group_cache.get(g) {
            if hit.has(i) {
                return Ok(hit);
            }
        }
        let group = Arc::new(self.decode_group(g, i, i + 1)?);
        let bytes = 4 * (group.ids.len() + group.ends.len()) + 64;
        self.group_cache.insert(g, group.clone(), bytes);
        Ok(group)
    }

    /// Checks group `g`'s checksum and decodes its targets up to `upto` (all of them, and a
    /// check that the stream ends where it should, when `upto` covers the group), from its
    /// resume point when that lies after the group's start and not after target `want`.
    fn decode_group(&self, g: usize, want: usize, upto: usize) -> Result<Group> {
        if g >= self.n_groups {
            return Err(self.corrupt(format!(
                "target group {g} is outside the {} groups",
                self.n_groups
            )));
        }
        let data = self.data();
        let (range, crc) = layout::group_entry(&data[self.target_index.clone()], g);
        let stored = &data[self.targets.start + range.start..self.targets.start + range.end];
        if crc32fast::hash(stored) != crc {
            return Err(self.corrupt(format!("target group {g} fails its checksum")));
        }
        let per = u64::from(self.meta.targets_per_group);
        let all = (self.meta.targets - g as u64 * per).min(per) as usize;
        let upto = all.min(upto);
        let middle = layout::group_skip_target(self.meta.targets_per_group);
        let skip = if middle > 0 && want >= middle && upto > middle && !self.group_skips.is_empty()
        {
            self.check_skips()?;
            layout::group_skip(&data[self.group_skips.clone()], g)
        } else {
            None
        };
        let first = if skip.is_some() { middle } else { 0 };
        let n = upto - first;
        let mut group = Group {
            first,
            ids: Vec::with_capacity(n * 4),
            ends: Vec::with_capacity(n),
        };
        let vocabulary = self.vocabulary.len() as u64;
        let run = |src: &mut dyn FnMut(&mut Vec<u32>) -> Result<usize, &'static str>,
                   group: &mut Group|
         -> Result<(), &'static str> {
            for _ in 0..n {
                src(&mut group.ids)?;
                group.ends.push(group.ids.len() as u32);
            }
            Ok(())
        };
        let result = match &self.models {
            Some(m) => match RansSource::new(m, stored).and_then(|mut s| {
                skip.is_none_or(|(state, pos)| s.resume(state, pos))
                    .then_some(s)
            }) {
                Some(mut s) => run(
                    &mut |out| decode_target(&mut s, vocabulary, out),
                    &mut group,
                )
                .and_then(|()| {
                    (upto < all || s.finished())
                        .then_some(())
                        .ok_or("the group's end")
                }),
                None => Err("its coder state or resume point"),
            },
            None => {
                let mut s = PlainSource::new(stored);
                run(
                    &mut |out| decode_target(&mut s, vocabulary, out),
                    &mut group,
                )
                .and_then(|()| {
                    (n < all || s.finished())
                        .then_some(())
                        .ok_or("the group's end")
                })
            }
        };
        result.map_err(|what| self.corrupt(format!("target group {g} is malformed: {what}")))?;
        Ok(group)
    }

    /// Offers a source's decoded options to the cache of recently used sources.
    /// A source is admitted from the second time it is decoded (see [`cache::Seen`]): a
    /// phrase looked up once (most of a batch of distinct lookups) then keeps the caller's
    /// buffers for the next lookup instead of handing them to the cache and allocating anew.
    fn offer_options(&self, slot: usize, key: &[u8], options: &mut Options) {
        if !self.seen_sources.second_time(slot as u64) {
            return;
        }
        options.shrink();
        let bytes = key.len() + options.heap_bytes();
        if self.options_cache.admits(bytes) {
            let entry = Arc::new((Box::from(key), options.clone()));
            self.options_cache.insert(slot, entry, bytes);
        }
    }

    /// Fills `out` with the options of source `r` of `block`.
    fn fill(&self, block: &BlockRecords, r: usize, out: &mut Options) -> Result<()> {
        let out = out.clear_for_fill(&self.shared_schema);
        let n = block.options(r).len();
        out.ends.reserve_exact(n);
        out.id_ends.reserve_exact(n);
        out.scores.reserve_exact(n * self.codecs.len());
        out.counts.reserve_exact(n * self.shape.counts);
        out.text.reserve(n * 16);
        out.ids.reserve(n * 3);
        if self.shape.alignment {
            out.link_ends.reserve_exact(n);
            out.links.reserve(n * 3);
        }
        let per = self.meta.targets_per_group as usize;
        let code_bytes = self.shape.code_bytes();
        let mut cached: Option<(usize, Arc<Group>)> = None;
        debug_assert!(block.has_options(r), "the block's options were decoded");
        for k in block.options(r) {
            let t = block.target(k) as usize;
            if t as u64 >= self.meta.targets {
                return Err(self.corrupt(format!(
                    "a target reference ({t}) is outside the {} targets",
                    self.meta.targets
                )));
            }
            let (g, i) = (t / per, t % per);
            let group = match &cached {
                Some((cg, grp)) if *cg == g && grp.has(i) => grp.clone(),
                _ => {
                    let grp = self.group(g, i)?;
                    cached = Some((g, grp.clone()));
                    grp
                }
            };
            let words = group.target(i);
            for (i, &w) in words.iter().enumerate() {
                if i > 0 {
                    out.text.push(' ');
                }
                out.text
                    .push_str(self.vocabulary.word(w).expect("ids checked at decoding"));
            }
            out.ends.push(out.text.len() as u32);
            out.ids.extend_from_slice(words);
            out.id_ends.push(out.ids.len() as u32);
            let codes = block.codes_of(k, code_bytes);
            let mut at = 0;
            for codec in &self.codecs {
                let w = codec.width();
                let v = codec
                    .decode(&codes[at..at + w])
                    .ok_or_else(|| self.corrupt("a score code is outside its codebook"))?;
                out.scores.push(v);
                at += w;
            }
            if self.shape.alignment {
                out.links.extend_from_slice(block.links_of(k));
                out.link_ends.push(out.links.len() as u32);
            }
            out.counts
                .extend_from_slice(block.counts_of(k, self.shape.counts));
        }
        Ok(())
    }

    /// Every source phrase in byte order.
    pub fn source_phrases(&self) -> impl Iterator<Item = Result<String>> + '_ {
        let mut cursor = self.direct.as_ref().map(|d| d.cursor());
        let mut b = 0;
        let mut r = 0;
        let mut block = BlockRecords::default();
        let mut failed = false;
        std::iter::from_fn(move || {
            if failed {
                return None;
            }
            if let Some(c) = &mut cursor {
                let item = c.next_source().transpose()?.map(|(s, _)| s);
                failed = item.is_err();
                return Some(item);
            }
            while r >= block.sources() {
                if b >= self.n_blocks {
                    return None;
                }
                if let Err(e) = self.decode_block(b, &mut block) {
                    failed = true;
                    return Some(Err(e));
                }
                b += 1;
                r = 0;
            }
            r += 1;
            let item = std::str::from_utf8(block.key(r - 1))
                .map(str::to_string)
                .map_err(|_| self.corrupt("a source phrase is not UTF-8"));
            failed = item.is_err();
            Some(item)
        })
    }

    /// Every pair in source byte order, options in stored order, scores as quantized values.
    /// Each block is decoded once.
    pub fn pairs_iter(&self) -> PairIter<'_> {
        PairIter {
            table: self,
            cursor: self.direct.as_ref().map(|d| d.cursor()),
            next_block: 0,
            block: BlockRecords::default(),
            rank: 0,
            source: String::new(),
            options: Options::default(),
            option: 0,
            failed: false,
        }
    }

    /// Checks every checksum and decodes every record; the first problem is returned.
    pub fn verify(&self) -> Result<VerifyReport> {
        verify::verify(self)
    }

    pub(crate) fn corrupt(&self, reason: impl Into<String>) -> Error {
        Error::corrupt(&self.path, reason)
    }

    fn data(&self) -> &[u8] {
        self.storage.bytes()
    }
}

/// The options cache's item number for a source phrase (FNV-1a).
#[inline]
fn key_hash(key: &[u8]) -> usize {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for &b in key {
        h = (h ^ u64::from(b)).wrapping_mul(0x0100_0000_01b3);
    }
    (h ^ (h >> 29)) as usize
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

fn check_meta(meta: &Meta) -> std::result::Result<(Header, Compression), String> {
    if meta.format != format::FORMAT_NAME {
        return Err(format!("the metadata names the format {:?}", meta.format));
    }
    let compression = Compression::from_name(&meta.block_compression)
        .ok_or_else(|| format!("unknown block coding {:?}", meta.block_compression))?;
    if meta.sources_per_block == 0 || meta.targets_per_group == 0 {
        return Err("zero sources per block or targets per group".into());
    }
    if meta.max_block_bytes > MAX_BLOCK_BYTES {
        return Err(format!(
            "blocks of {} bytes exceed the reader's limit",
            meta.max_block_bytes
        ));
    }
    if meta.sources > meta.pairs
        || meta.targets > meta.pairs
        || meta.targets > u64::from(u32::MAX)
        || (meta.pairs > 0 && (meta.sources == 0 || meta.targets == 0))
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
    cursor: Option<direct::Cursor>,
    next_block: usize,
    block: BlockRecords,
    rank: usize,
    source: String,
    options: Options,
    option: usize,
    failed: bool,
}

impl PairIter<'_> {
    /// Moves to the next source (decoding the next block when needed); false at the end.
    fn advance_source(&mut self) -> Result<bool> {
        if let Some(c) = &mut self.cursor {
            let Some((source, options)) = c.next_source()? else {
                return Ok(false);
            };
            self.source = source;
            self.options = options;
            self.option = 0;
            return Ok(true);
        }
        let table = self.table;
        while self.rank >= self.block.sources() {
            if self.next_block >= table.n_blocks {
                return Ok(false);
            }
            table.decode_block(self.next_block, &mut self.block)?;
            self.next_block += 1;
            self.rank = 0;
        }
        self.source.clear();
        self.source.push_str(
            std::str::from_utf8(self.block.key(self.rank))
                .map_err(|_| table.corrupt("a source phrase is not UTF-8"))?,
        );
        table.fill(&self.block, self.rank, &mut self.options)?;
        self.rank += 1;
        self.option = 0;
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
            if let Some(o) = self.options.get(self.option) {
                self.option += 1;
                return Some(Ok(PhrasePair {
                    source: self.source.clone(),
                    target: o.target().to_string(),
                    alignment: o.alignment().to_vec(),
                    scores: o.scores().to_vec(),
                    counts: o.counts().to_vec(),
                }));
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
