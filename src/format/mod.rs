//! Layout and constants of the packed `.bale` format, shared by the writer ([`crate::pack`]) and
//! the reader ([`crate::read`]). No other module knows byte positions.
//!
//! The byte-level specification is `format-spec/bale-format.md`; this module is its executable
//! form. In short: a 24-byte file header, a section table of 32-byte entries, then the sections,
//! each starting on an 8-byte boundary. All integers are little-endian.

pub mod block;
pub mod coder;
pub mod direct;
pub mod lm;
pub mod sections;
mod varint;

pub use varint::{read_varint, write_varint};
pub(crate) use varint::{read_varint_from, take_varint};

use byteorder::{ByteOrder, LittleEndian as LE};

/// The first eight bytes of every packed table.
pub const MAGIC: [u8; 8] = *b"BALER\r\n\x1a";

/// Major format version: readers refuse files with another major version.
pub const VERSION_MAJOR: u16 = 2;

/// Minor format version of files in the `compact` layout without a block-skips section (what
/// 2.0 readers read).
pub const VERSION_MINOR: u16 = 0;

/// Minor format version of `compact` files with the optional block-skips or group-skips
/// sections (2.2: resume points inside rANS blocks and target groups, which 2.0 readers skip as
/// unknown kinds).
pub const VERSION_MINOR_SKIPS: u16 = 2;

/// Minor format version of files in the `direct` layout (2.1: new sections that 2.0 readers
/// refuse, as they lack the compact layout's required sections).
pub const VERSION_MINOR_DIRECT: u16 = 1;

/// How a table's sources and options are laid out (the metadata's `layout`).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Layout {
    /// Entropy-coded blocks of front-coded sources and target groups: the smallest files.
    Compact,
    /// A hash of source phrases over records read in place, target text as UTF-8: the fastest
    /// reads, several times larger (see [`direct`]).
    Direct,
}

impl Layout {
    /// The name stored in the metadata and taken by `--layout`.
    pub fn name(self) -> &'static str {
        match self {
            Layout::Compact => "compact",
            Layout::Direct => "direct",
        }
    }

    /// Parses a name.
    pub fn from_name(name: &str) -> Option<Layout> {
        match name {
            "compact" => Some(Layout::Compact),
            "direct" => Some(Layout::Direct),
            _ => None,
        }
    }

    /// The minor version a file of this layout is written with.
    pub fn minor_version(self) -> u16 {
        match self {
            Layout::Compact => VERSION_MINOR,
            Layout::Direct => VERSION_MINOR_DIRECT,
        }
    }
}

/// Size of the fixed file header.
pub const FILE_HEADER_LEN: usize = 24;

/// Size of one section-table entry.
pub const SECTION_ENTRY_LEN: usize = 32;

/// Alignment of section starts.
pub const SECTION_ALIGN: u64 = 8;

/// Most sections a file may declare (a bound for hostile headers).
pub const MAX_SECTIONS: u32 = 64;

/// The largest raw (decompressed) option block writers produce and readers accept.
pub const MAX_BLOCK_BYTES: u64 = 256 << 20;

/// Score storage modes in the codebook section.
pub mod score_mode {
    /// Raw little-endian `f32` per option.
    pub const F32: u8 = 0;
    /// Index into a codebook of `f64` values: one byte per option for up to 8 bits, two for more.
    pub const CODEBOOK: u8 = 1;
}

/// How blocks and target groups are coded (recorded in the metadata as text, see
/// [`Compression::name`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Compression {
    /// Plain: bytes as they are, numbers as varints (the fast profile).
    None,
    /// Static-model rANS with the models section (the compact profile, the default).
    Rans,
}

impl Compression {
    /// The name stored in the metadata.
    pub fn name(self) -> &'static str {
        match self {
            Compression::None => "none",
            Compression::Rans => "rans",
        }
    }

    /// Parses a stored name.
    pub fn from_name(name: &str) -> Option<Compression> {
        match name {
            "none" => Some(Compression::None),
            "rans" => Some(Compression::Rans),
            _ => None,
        }
    }
}

/// The kinds of section, by their numeric id in the section table.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
#[repr(u32)]
pub enum SectionKind {
    /// JSON metadata: names, counts, options, provenance.
    Metadata = 1,
    /// Per-score storage mode and codebook values.
    Codebooks = 2,
    /// Target vocabulary: word strings by id.
    Vocabulary = 3,
    /// rANS frequency tables (only with `rans` coding).
    Models = 4,
    /// Offset and checksum of every target group.
    TargetIndex = 5,
    /// Target groups: distinct targets, most used first, as coded word ids.
    Targets = 6,
    /// Offset, first-key position and checksum of every source block.
    BlockIndex = 7,
    /// The first source phrase of every block, for the binary search.
    BlockKeys = 8,
    /// Source blocks: front-coded sources with their options, coded.
    Blocks = 9,
    /// `direct` layout: hash slots over source phrases and prefix keys.
    DirectHash = 10,
    /// `direct` layout: source records with their options.
    DirectRecords = 11,
    /// `direct` layout: the options' target text, UTF-8.
    DirectText = 12,
    /// `direct` layout: a CRC-32 per chunk of the three sections above.
    DirectChunks = 13,
    /// `compact` layout, optional (2.2): rANS resume points inside source blocks, so a lookup
    /// decodes the options of the source it wants without those of the sources before it.
    BlockSkips = 14,
    /// `compact` layout, optional (2.2): one rANS resume point per target group, before its
    /// middle target, so a target in the second half is decoded without the first half.
    GroupSkips = 15,
}

impl SectionKind {
    /// Every kind, in the order the writer lays them out.
    pub const ALL: [SectionKind; 15] = [
        SectionKind::Metadata,
        SectionKind::Codebooks,
        SectionKind::Models,
        SectionKind::Vocabulary,
        SectionKind::BlockIndex,
        SectionKind::BlockKeys,
        SectionKind::BlockSkips,
        SectionKind::TargetIndex,
        SectionKind::GroupSkips,
        SectionKind::Targets,
        SectionKind::Blocks,
        SectionKind::DirectChunks,
        SectionKind::DirectHash,
        SectionKind::DirectRecords,
        SectionKind::DirectText,
    ];

    /// Looks a kind up by id.
    pub fn from_id(id: u32) -> Option<SectionKind> {
        SectionKind::ALL.into_iter().find(|k| *k as u32 == id)
    }

    /// A readable name for reports.
    pub fn name(self) -> &'static str {
        match self {
            SectionKind::Metadata => "metadata",
            SectionKind::Codebooks => "codebooks",
            SectionKind::Vocabulary => "vocabulary",
            SectionKind::Models => "models",
            SectionKind::TargetIndex => "target-index",
            SectionKind::Targets => "targets",
            SectionKind::BlockIndex => "block-index",
            SectionKind::BlockKeys => "block-keys",
            SectionKind::Blocks => "blocks",
            SectionKind::DirectHash => "hash",
            SectionKind::DirectRecords => "records",
            SectionKind::DirectText => "text",
            SectionKind::DirectChunks => "chunks",
            SectionKind::BlockSkips => "block-skips",
            SectionKind::GroupSkips => "group-skips",
        }
    }

    /// Whether [`crate::Table::open`] checks this section's checksum (every section but the
    /// large ones, whose blocks, groups or chunks carry their own checksums, checked on first
    /// read, and the skips sections, checked with their structure on first use).
    pub fn checked_at_open(self) -> bool {
        !matches!(
            self,
            SectionKind::Targets
                | SectionKind::Blocks
                | SectionKind::BlockSkips
                | SectionKind::GroupSkips
                | SectionKind::DirectHash
                | SectionKind::DirectRecords
                | SectionKind::DirectText
        )
    }

    /// Whether every valid file of `layout` has this section.
    pub fn required(self, layout: Layout) -> bool {
        match self {
            SectionKind::Metadata | SectionKind::Codebooks | SectionKind::Vocabulary => true,
            SectionKind::Models | SectionKind::BlockSkips | SectionKind::GroupSkips => false,
            SectionKind::TargetIndex
            | SectionKind::Targets
            | SectionKind::BlockIndex
            | SectionKind::BlockKeys
            | SectionKind::Blocks => layout == Layout::Compact,
            SectionKind::DirectHash
            | SectionKind::DirectRecords
            | SectionKind::DirectText
            | SectionKind::DirectChunks => layout == Layout::Direct,
        }
    }
}

/// One entry of the section table.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct SectionEntry {
    /// Section kind id (see [`SectionKind`]); unknown ids are skipped by readers.
    pub kind: u32,
    /// Reserved flags, zero in version 1.0.
    pub flags: u32,
    /// Byte offset of the section from the start of the file.
    pub offset: u64,
    /// Byte length of the section.
    pub length: u64,
    /// CRC-32 (IEEE 802.3, as zlib's `crc32`) of the section bytes.
    pub crc32: u32,
}

impl SectionEntry {
    /// Encodes the entry as its 32 bytes.
    pub fn encode(&self) -> [u8; SECTION_ENTRY_LEN] {
        let mut b = [0u8; SECTION_ENTRY_LEN];
        LE::write_u32(&mut b[0..4], self.kind);
        LE::write_u32(&mut b[4..8], self.flags);
        LE::write_u64(&mut b[8..16], self.offset);
        LE::write_u64(&mut b[16..24], self.length);
        LE::write_u32(&mut b[24..28], self.crc32);
        b
    }

    /// Decodes an entry from exactly 32 bytes.
    pub fn decode(b: &[u8]) -> SectionEntry {
        SectionEntry {
            kind: LE::read_u32(&b[0..4]),
            flags: LE::read_u32(&b[4..8]),
            offset: LE::read_u64(&b[8..16]),
            length: LE::read_u64(&b[16..24]),
            crc32: LE::read_u32(&b[24..28]),
        }
    }
}

/// The fixed file header.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct FileHeader {
    /// Major version.
    pub major: u16,
    /// Minor version.
    pub minor: u16,
    /// Number of section-table entries that follow the header.
    pub section_count: u32,
    /// CRC-32 of header bytes 0..16 followed by the whole section table.
    pub table_crc32: u32,
}

impl FileHeader {
    /// Encodes the header (magic included).
    pub fn encode(&self) -> [u8; FILE_HEADER_LEN] {
        let mut b = [0u8; FILE_HEADER_LEN];
        b[0..8].copy_from_slice(&MAGIC);
        LE::write_u16(&mut b[8..10], self.major);
        LE::write_u16(&mut b[10..12], self.minor);
        LE::write_u32(&mut b[12..16], self.section_count);
        LE::write_u32(&mut b[16..20], self.table_crc32);
        b
    }

    /// Decodes the header fields from at least [`FILE_HEADER_LEN`] bytes (magic not checked).
    pub fn decode(b: &[u8]) -> FileHeader {
        FileHeader {
            major: LE::read_u16(&b[8..10]),
            minor: LE::read_u16(&b[10..12]),
            section_count: LE::read_u32(&b[12..16]),
            table_crc32: LE::read_u32(&b[16..20]),
        }
    }
}

/// The checksum over the header's first 16 bytes and the encoded section table.
pub fn table_checksum(header_prefix: &[u8], table: &[u8]) -> u32 {
    let mut h = crc32fast::Hasher::new();
    h.update(&header_prefix[..16]);
    h.update(table);
    h.finalize()
}

/// Bytes of padding needed after `len` bytes to reach [`SECTION_ALIGN`].
pub fn padding(len: u64) -> u64 {
    (SECTION_ALIGN - len % SECTION_ALIGN) % SECTION_ALIGN
}

/// Layout of the codebook section: for each score column a 8-byte entry header
/// (`mode: u8`, `bits: u8`, `domain: u8`, `reserved: u8`, `entries: u32`) then `entries`
/// little-endian `f64` values in ascending order.
pub const CODEBOOK_ENTRY_HEADER_LEN: usize = 8;

/// Quantization domains recorded in the codebook section.
pub mod domain {
    /// Centroids were fitted to natural logarithms of the values (all values positive).
    pub const LOG: u8 = 0;
    /// Centroids were fitted to the values themselves.
    pub const LINEAR: u8 = 1;
}

/// Bytes one option's score code takes in a block, for a column's mode and bits.
pub fn score_width(mode: u8, bits: u8) -> usize {
    match (mode, bits) {
        (score_mode::F32, _) => 4,
        (_, 0..=8) => 1,
        _ => 2,
    }
}

/// The JSON metadata section (`serde` form).
#[derive(Clone, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Meta {
    /// Always "baler packed phrase table".
    pub format: String,
    /// Number of phrase pairs.
    pub pairs: u64,
    /// Number of distinct source phrases.
    pub sources: u64,
    /// Number of distinct target phrases.
    pub targets: u64,
    /// Number of distinct target words.
    pub vocabulary: u64,
    /// Score column names, in stored order.
    pub scores: Vec<String>,
    /// Count column names present, in canonical order.
    pub counts: Vec<String>,
    /// Whether each option stores its word alignment.
    pub alignment: bool,
    /// How the options of a source are ordered.
    pub option_order: OptionOrder,
    /// Sources per block (the last block may hold fewer).
    pub sources_per_block: u32,
    /// Targets per target group (the last group may hold fewer).
    pub targets_per_group: u32,
    /// Coding of blocks and target groups: "rans" or "none".
    pub block_compression: String,
    /// Upper bound on the stored size of any block or target group (or record, `direct`).
    pub max_block_bytes: u64,
    /// The layout: "compact" (written only when not compact, as 2.0 files have no such member)
    /// or "direct".
    #[serde(default = "compact_layout", skip_serializing_if = "is_compact_layout")]
    pub layout: String,
    /// Coded bytes by component (keys, targets, target-refs, each score column, ...), as the
    /// writer measured them; for `baler inspect`.
    #[serde(default)]
    pub components: Vec<(String, u64)>,
    /// The `# key=value` lines of the input, in order.
    pub table_metadata: Vec<(String, String)>,
    /// How the file was made: tool version, input, options.
    pub provenance: Vec<(String, String)>,
    /// Quantization error per score column.
    pub quantization: Vec<QuantizationReport>,
}

/// The documented order of options within a source.
#[derive(Clone, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct OptionOrder {
    /// The score column options are sorted by, descending (its original, unquantized values);
    /// `None` when the table has no scores.
    pub by: Option<String>,
    /// Ties (and tables without scores) are ordered by target phrase bytes, ascending.
    pub ties: String,
}

/// Measured quantization error of one score column, in the domain it was fitted in.
#[derive(Clone, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct QuantizationReport {
    /// Score column name.
    pub column: String,
    /// "f32" or "codebook".
    pub storage: String,
    /// Bits per code (32 for f32).
    pub bits: u8,
    /// "log" or "linear".
    pub domain: String,
    /// Codebook entries used.
    pub entries: u32,
    /// Root mean square error over every stored value.
    pub rms_error: f64,
    /// Largest absolute error over every stored value.
    pub max_error: f64,
}

fn compact_layout() -> String {
    Layout::Compact.name().to_string()
}

fn is_compact_layout(name: &String) -> bool {
    name == Layout::Compact.name()
}

/// The text of [`Meta::format`].
pub const FORMAT_NAME: &str = "baler packed phrase table";
