//! Writing packed tables.
//!
//! [`pack_tsv`] and [`pack_pairs`] take phrase pairs in any order and write a `.bale` file:
//!
//! 1. Every record is pushed through an [`ExternalSorter`] (spilling sorted zstd runs past the
//!    memory budget) while target phrases are counted and score samples drawn.
//! 2. Target phrases are numbered most frequent first and their words form the vocabulary; a
//!    k-means codebook is fitted per score column ([`crate::quantize`]).
//! 3. The sorted stream is cut into option blocks of a fixed number of sources, keyed by an `fst`
//!    map from source phrase to ordinal.
//! 4. Blocks are compressed as independent zstd frames, optionally with a dictionary trained on a
//!    sample of blocks, and all sections are written behind the section table.
//!
//! The output goes through [`Output`], so a failed pack leaves no file behind.

mod blocks;

use rustc_hash::FxHashMap as HashMap;
use std::fs::File;
use std::io::{BufRead, BufReader, BufWriter, Read, Write};
use std::path::{Path, PathBuf};

use byteorder::{WriteBytesExt, LE};

use crate::error::{Error, Result};
use crate::files::Output;
use crate::format::{self, write_varint, Compression, Meta, SectionEntry, SectionKind};
use crate::quantize::{Codebook, Reservoir, DEFAULT_SAMPLE_SIZE};
use crate::sort::ExternalSorter;
use crate::table::{Header, PhrasePair, TsvReader};

use blocks::{BlockBuilder, PackedOption};

/// Options for packing.
#[derive(Clone, Debug)]
pub struct PackOptions {
    /// Bits per quantized score (1..=16), or `None` to store scores as f32.
    pub bits: Option<u8>,
    /// Memory budget in bytes (sorting and buffers).
    pub memory: u64,
    /// Source phrases per option block: smaller blocks make lookups faster and files larger.
    pub sources_per_block: u32,
    /// Block compression.
    pub compression: Compression,
    /// zstd compression level (1..=22).
    pub zstd_level: i32,
    /// Size of the zstd dictionary trained on sample blocks; 0 for none.
    pub dictionary_bytes: usize,
    /// Worker threads for compression (0: all cores).
    pub threads: usize,
    /// Show progress bars on stderr (when it is a terminal).
    pub progress: bool,
    /// Parent directory for temporary files (default: the system's).
    pub temp_dir: Option<PathBuf>,
    /// Extra provenance entries recorded in the file.
    pub provenance: Vec<(String, String)>,
}

impl Default for PackOptions {
    fn default() -> PackOptions {
        PackOptions {
            bits: Some(DEFAULT_BITS),
            memory: 1 << 30,
            sources_per_block: DEFAULT_SOURCES_PER_BLOCK,
            compression: Compression::Zstd,
            zstd_level: DEFAULT_ZSTD_LEVEL,
            dictionary_bytes: DEFAULT_DICTIONARY_BYTES,
            threads: 0,
            progress: false,
            temp_dir: None,
            provenance: Vec::new(),
        }
    }
}

/// Default bits per score (see DEVELOPERS.md for the measurements behind it).
pub const DEFAULT_BITS: u8 = 8;
/// Default sources per block.
pub const DEFAULT_SOURCES_PER_BLOCK: u32 = 16;
/// Default zstd level.
pub const DEFAULT_ZSTD_LEVEL: i32 = 9;
/// Default dictionary size.
pub const DEFAULT_DICTIONARY_BYTES: usize = 64 << 10;

/// What a pack produced.
#[derive(Clone, Debug)]
pub struct PackReport {
    /// The metadata written into the file.
    pub meta: Meta,
    /// Bytes of each section, in file order.
    pub sections: Vec<(SectionKind, u64)>,
    /// Total file size.
    pub file_bytes: u64,
}

/// Packs an interchange TSV stream into `out`; `name` names the input in messages.
///
/// # Examples
/// ```
/// # fn main() -> baler::Result<()> {
/// let dir = tempfile::tempdir().unwrap();
/// let out = dir.path().join("t.bale");
/// let tsv = "source\ttarget\tp_t_given_s\nbarco\tboat\t0.9\nbarco\tship\t0.1\n";
/// let report = baler::pack::pack_tsv(tsv.as_bytes(), "t.tsv", &out, &Default::default())?;
/// assert_eq!((report.meta.pairs, report.meta.sources, report.meta.targets), (2, 1, 2));
/// # Ok(()) }
/// ```
pub fn pack_tsv<R: BufRead>(
    input: R,
    name: &str,
    out: &Path,
    options: &PackOptions,
) -> Result<PackReport> {
    let mut reader = TsvReader::new(input, name)?;
    let header = reader.header().clone();
    let records = std::iter::from_fn(move || {
        let mut pair = PhrasePair::default();
        match reader.read_into(&mut pair) {
            Ok(true) => Some(Ok((reader.line(), pair))),
            Ok(false) => None,
            Err(e) => Some(Err(e)),
        }
    });
    let mut provenance = vec![("input".to_string(), name.to_string())];
    provenance.extend(options.provenance.iter().cloned());
    pack_records(&header, records, name, "line", out, options, provenance)
}

/// Packs records that follow `header`, in any order, into `out`.
///
/// Duplicate pairs are reported by their position in the iterator (counted from 1).
pub fn pack_pairs<I>(
    header: &Header,
    pairs: I,
    out: &Path,
    options: &PackOptions,
) -> Result<PackReport>
where
    I: Iterator<Item = Result<PhrasePair>>,
{
    let records = pairs.enumerate().map(|(i, p)| p.map(|p| (i as u64 + 1, p)));
    pack_records(
        header,
        records,
        "input",
        "record",
        out,
        options,
        options.provenance.clone(),
    )
}

fn check_options(options: &PackOptions) -> Result<()> {
    if let Some(bits) = options.bits {
        if !(1..=16).contains(&bits) {
            return Err(Error::invalid("--bits", format!("{bits} is outside 1..16")));
        }
    }
    if options.sources_per_block == 0 || options.sources_per_block > 1 << 20 {
        return Err(Error::invalid(
            "--block-sources",
            "must be between 1 and 1048576",
        ));
    }
    if !(1..=22).contains(&options.zstd_level) {
        return Err(Error::invalid(
            "--zstd-level",
            format!("{} is outside 1..22", options.zstd_level),
        ));
    }
    Ok(())
}

/// Encodes the part of a record the sort key does not hold.
fn encode_value(buf: &mut Vec<u8>, position: u64, target: u32, pair: &PhrasePair) {
    buf.clear();
    write_varint(buf, position);
    write_varint(buf, u64::from(target));
    write_varint(buf, pair.alignment.len() as u64);
    for &(i, j) in &pair.alignment {
        write_varint(buf, u64::from(i));
        write_varint(buf, u64::from(j));
    }
    for &s in &pair.scores {
        buf.extend_from_slice(&s.to_le_bytes());
    }
    for &c in &pair.counts {
        write_varint(buf, c);
    }
}

/// Decodes a sorter value into `option` (reusing its buffers), computing each score's code once;
/// returns the record's input position and provisional target number.
fn decode_value(
    v: &[u8],
    codebooks: &[Option<Codebook>],
    errors: &mut [ErrorStats],
    option: &mut PackedOption,
) -> (u64, u32) {
    // These bytes were written by `encode_value` in this process; a failure is a bug.
    let mut pos = 0;
    let mut next = || format::read_varint(v, &mut pos).expect("sorter record intact");
    let position = next();
    let target = next() as u32;
    let links = next() as usize;
    option.alignment.clear();
    for _ in 0..links {
        let i = next() as u16;
        option.alignment.push((i, next() as u16));
    }
    option.scores.clear();
    option.codes.clear();
    for (book, err) in codebooks.iter().zip(errors.iter_mut()) {
        let s = f64::from_le_bytes(v[pos..pos + 8].try_into().unwrap());
        pos += 8;
        option.scores.push(s);
        option.codes.push(match book {
            Some(b) => {
                let code = b.encode(s);
                err.add_error(b.error_of(code, s));
                u32::from(code)
            }
            None => {
                err.add_error((s - f64::from(s as f32)).abs());
                (s as f32).to_bits()
            }
        });
    }
    option.counts.clear();
    while pos < v.len() {
        option
            .counts
            .push(format::read_varint(v, &mut pos).expect("sorter record intact"));
    }
    (position, target)
}

fn progress_bar(enabled: bool, message: &'static str) -> indicatif::ProgressBar {
    if !enabled {
        return indicatif::ProgressBar::hidden();
    }
    let bar = indicatif::ProgressBar::new_spinner();
    bar.set_style(
        indicatif::ProgressStyle::with_template(
            "{spinner} {msg}: {human_pos} pairs ({per_sec}, {elapsed})",
        )
        .expect("valid template"),
    );
    bar.set_message(message);
    bar
}

#[allow(clippy::too_many_arguments)]
fn pack_records<I>(
    header: &Header,
    records: I,
    name: &str,
    unit: &str,
    out: &Path,
    options: &PackOptions,
    mut provenance: Vec<(String, String)>,
) -> Result<PackReport>
where
    I: Iterator<Item = Result<(u64, PhrasePair)>>,
{
    check_options(options)?;
    let schema = &header.schema;
    let n_scores = schema.scores.len();
    let n_counts = schema.counts.len();

    // Pass 1: sort, count targets, sample scores.
    let sort_budget = (options.memory as usize / 2).max(1 << 20);
    let mut sorter = ExternalSorter::new(sort_budget, options.temp_dir.clone())?;
    let mut numbering = TargetNumbering::new(options.memory as usize / 4, options.temp_dir.clone());
    let mut reservoirs: Vec<Reservoir> = (0..n_scores)
        .map(|_| Reservoir::new(DEFAULT_SAMPLE_SIZE))
        .collect();
    let mut key = Vec::new();
    let mut value = Vec::new();
    let bar = progress_bar(options.progress, "reading");
    let mut pairs = 0u64;
    for record in records {
        let (position, pair) = record?;
        if pair.source.contains('\0') || pair.target.contains('\0') {
            return Err(Error::input(name, position, "phrase contains a NUL byte"));
        }
        key.clear();
        key.extend_from_slice(pair.source.as_bytes());
        key.push(0);
        key.extend_from_slice(pair.target.as_bytes());
        let target = numbering.note(&pair.target)?;
        encode_value(&mut value, position, target, &pair);
        sorter.push(&key, &value)?;
        for (r, &s) in reservoirs.iter_mut().zip(&pair.scores) {
            r.push(s);
        }
        pairs += 1;
        if pairs % 65536 == 0 {
            bar.set_position(pairs);
        }
    }
    bar.finish_and_clear();

    // Targets by frequency, then vocabulary by frequency.
    let Numbered {
        vocabulary_section,
        targets_section,
        n_targets,
        n_words,
        refs: target_refs,
    } = numbering.finish()?;

    let codebooks: Vec<Option<Codebook>> = reservoirs
        .iter()
        .map(|r| options.bits.map(|bits| Codebook::fit(&r.values(), bits)))
        .collect();
    drop(reservoirs);
    let order_column =
        schema
            .score_index("p_t_given_s")
            .or(if n_scores > 0 { Some(0) } else { None });

    // Pass 2: group by source, build fst and raw blocks.
    let temp = match &options.temp_dir {
        Some(p) => tempfile::Builder::new().prefix("baler-pack-").tempdir_in(p),
        None => tempfile::Builder::new().prefix("baler-pack-").tempdir(),
    }
    .map_err(|e| Error::io(std::env::temp_dir(), "creating a temporary directory in", e))?;
    let fst_path = temp.path().join("source-index.fst");
    let fst_file = File::create(&fst_path).map_err(|e| Error::io(&fst_path, "creating", e))?;
    let fst_builder = fst::MapBuilder::new(BufWriter::new(fst_file))
        .map_err(|e| Error::io(&fst_path, "writing", std::io::Error::other(e)))?;
    let raw_path = temp.path().join("blocks.raw");
    let raw_file = File::create(&raw_path).map_err(|e| Error::io(&raw_path, "creating", e))?;
    let raw_out = BufWriter::new(raw_file);

    let widths: Vec<(u8, u8)> = codebooks
        .iter()
        .map(|c| match c {
            Some(_) => (format::score_mode::CODEBOOK, options.bits.unwrap()),
            None => (format::score_mode::F32, 32),
        })
        .collect();
    let mut writer = SourceWriter {
        fst_builder,
        fst_path: &fst_path,
        raw_out,
        raw_path: &raw_path,
        builder: BlockBuilder::new(&widths, schema.alignment, n_counts),
        block_sizes: Vec::new(),
        samples: BlockSample::new(options.dictionary_bytes * 32),
        max_block: 0,
        sources: 0,
        order_column,
        sources_per_block: options.sources_per_block,
        spare: Vec::new(),
    };
    let mut errors = vec![ErrorStats::default(); n_scores];
    let mut group: Vec<PackedOption> = Vec::new();
    let mut group_source: Vec<u8> = Vec::new();
    let mut previous_target: Vec<u8> = Vec::new();
    let mut previous_position = 0u64;
    let bar = progress_bar(options.progress, "packing");
    let mut done = 0u64;
    let mut merged = sorter.finish()?;
    while let Some((k, v)) = merged.next_record()? {
        let split = k
            .iter()
            .position(|&b| b == 0)
            .expect("key holds a NUL separator");
        let (source, target) = (&k[..split], &k[split + 1..]);
        let mut option = writer.spare.pop().unwrap_or_default();
        let (position, target_number) = decode_value(v, &codebooks, &mut errors, &mut option);
        option.target_ref = target_refs.get(target_number, target)?;
        if source == group_source.as_slice() && !group.is_empty() {
            if target == previous_target.as_slice() {
                let (first, second) = (
                    previous_position.min(position),
                    previous_position.max(position),
                );
                return Err(Error::input(
                    name,
                    second,
                    format!(
                        "the pair ({:?}, {:?}) appears twice ({unit}s {first} and {second})",
                        String::from_utf8_lossy(source),
                        String::from_utf8_lossy(target),
                    ),
                ));
            }
        } else {
            writer.add_source(&group_source, &mut group)?;
            group_source.clear();
            group_source.extend_from_slice(source);
        }
        previous_target.clear();
        previous_target.extend_from_slice(target);
        previous_position = position;
        group.push(option);
        done += 1;
        if done % 65536 == 0 {
            bar.set_position(done);
        }
    }
    writer.add_source(&group_source, &mut group)?;
    bar.finish_and_clear();
    drop(merged);
    drop(target_refs);
    let WrittenSources {
        sources,
        block_sizes,
        max_block,
        samples,
    } = writer.finish()?;

    // Dictionary and compression.
    let dictionary = match options.compression {
        Compression::Zstd if options.dictionary_bytes > 0 => {
            samples.train(options.dictionary_bytes)
        }
        _ => None,
    };
    let options_path = temp.path().join("options.bin");
    let block_offsets = blocks::compress_blocks(
        &raw_path,
        &block_sizes,
        &options_path,
        options,
        dictionary.as_deref(),
    )?;

    // Metadata.
    provenance.insert(
        0,
        (
            "tool".to_string(),
            format!("baler {}", env!("CARGO_PKG_VERSION")),
        ),
    );
    provenance.push((
        "bits".into(),
        options.bits.map_or("f32".into(), |b| b.to_string()),
    ));
    provenance.push((
        "sources_per_block".into(),
        options.sources_per_block.to_string(),
    ));
    provenance.push(("compression".into(), options.compression.name().into()));
    if options.compression == Compression::Zstd {
        provenance.push(("zstd_level".into(), options.zstd_level.to_string()));
        provenance.push((
            "dictionary_bytes".into(),
            dictionary.as_ref().map_or(0, |d| d.len()).to_string(),
        ));
    }
    let quantization = schema
        .scores
        .iter()
        .zip(&codebooks)
        .zip(&errors)
        .map(|((column, book), err)| err.report(column, book, options.bits.unwrap_or(32)))
        .collect();
    let meta = Meta {
        format: format::FORMAT_NAME.to_string(),
        pairs,
        sources,
        targets: n_targets,
        vocabulary: n_words,
        scores: schema.scores.clone(),
        counts: schema.counts.iter().map(|c| c.name().to_string()).collect(),
        alignment: schema.alignment,
        option_order: format::OptionOrder {
            by: order_column.map(|c| schema.scores[c].clone()),
            ties: "target phrase bytes ascending".into(),
        },
        sources_per_block: options.sources_per_block,
        block_compression: options.compression.name().to_string(),
        max_block_bytes: max_block as u64,
        table_metadata: header.metadata.entries().to_vec(),
        provenance,
        quantization,
    };
    let meta_section = serde_json::to_vec(&meta).expect("metadata serializes");
    let codebook_section = build_codebooks(&codebooks, &widths);
    let mut block_index = Vec::with_capacity(block_offsets.len() * 8);
    for off in &block_offsets {
        block_index.extend_from_slice(&off.to_le_bytes());
    }

    let mut parts: Vec<(SectionKind, Part)> = vec![
        (SectionKind::Metadata, Part::Memory(meta_section)),
        (SectionKind::Codebooks, Part::Memory(codebook_section)),
    ];
    if let Some(d) = dictionary {
        parts.push((SectionKind::Dictionary, Part::Memory(d)));
    }
    parts.push((SectionKind::Vocabulary, Part::Memory(vocabulary_section)));
    parts.push((SectionKind::Targets, Part::Memory(targets_section)));
    parts.push((SectionKind::BlockIndex, Part::Memory(block_index)));
    parts.push((SectionKind::SourceIndex, Part::File(fst_path)));
    parts.push((SectionKind::Options, Part::File(options_path)));
    let (sections, file_bytes) = write_file(out, &parts)?;
    Ok(PackReport {
        meta,
        sections,
        file_bytes,
    })
}

enum Part {
    Memory(Vec<u8>),
    File(PathBuf),
}

impl Part {
    fn len(&self) -> Result<u64> {
        match self {
            Part::Memory(v) => Ok(v.len() as u64),
            Part::File(p) => std::fs::metadata(p)
                .map(|m| m.len())
                .map_err(|e| Error::io(p, "reading", e)),
        }
    }

    fn for_each_chunk(&self, mut f: impl FnMut(&[u8]) -> Result<()>) -> Result<()> {
        match self {
            Part::Memory(v) => f(v),
            Part::File(p) => {
                let mut file =
                    BufReader::new(File::open(p).map_err(|e| Error::io(p, "opening", e))?);
                let mut buf = vec![0u8; 1 << 16];
                loop {
                    let n = file
                        .read(&mut buf)
                        .map_err(|e| Error::io(p, "reading", e))?;
                    if n == 0 {
                        return Ok(());
                    }
                    f(&buf[..n])?;
                }
            }
        }
    }
}

fn write_file(out: &Path, parts: &[(SectionKind, Part)]) -> Result<(Vec<(SectionKind, u64)>, u64)> {
    let mut entries = Vec::with_capacity(parts.len());
    let mut offset = (format::FILE_HEADER_LEN + parts.len() * format::SECTION_ENTRY_LEN) as u64;
    offset += format::padding(offset);
    for (kind, part) in parts {
        let length = part.len()?;
        let mut crc = crc32fast::Hasher::new();
        part.for_each_chunk(|c| {
            crc.update(c);
            Ok(())
        })?;
        entries.push(SectionEntry {
            kind: *kind as u32,
            flags: 0,
            offset,
            length,
            crc32: crc.finalize(),
        });
        offset += length + format::padding(length);
    }
    let mut table = Vec::new();
    for e in &entries {
        table.extend_from_slice(&e.encode());
    }
    let mut header = format::FileHeader {
        major: format::VERSION_MAJOR,
        minor: format::VERSION_MINOR,
        section_count: parts.len() as u32,
        table_crc32: 0,
    };
    header.table_crc32 = format::table_checksum(&header.encode(), &table);

    let mut output = Output::create(out)?;
    let mut written = 0u64;
    let put = |output: &mut Output, written: &mut u64, bytes: &[u8]| -> Result<()> {
        *written += bytes.len() as u64;
        output
            .write_all(bytes)
            .map_err(|e| Error::io(out, "writing", e))
    };
    put(&mut output, &mut written, &header.encode())?;
    put(&mut output, &mut written, &table)?;
    for ((_, part), entry) in parts.iter().zip(&entries) {
        let pad = format::padding(written) as usize;
        put(&mut output, &mut written, &[0u8; 8][..pad])?;
        debug_assert_eq!(written, entry.offset);
        part.for_each_chunk(|c| put(&mut output, &mut written, c))?;
    }
    let pad = format::padding(written) as usize;
    put(&mut output, &mut written, &[0u8; 8][..pad])?;
    output.commit()?;
    let sections = entries
        .iter()
        .map(|e| (SectionKind::from_id(e.kind).expect("own kinds"), e.length))
        .collect();
    let total = written;
    Ok((sections, total))
}

/// The vocabulary section from word frequencies (each word weighted by the options using the
/// targets it occurs in), words numbered most frequent first; returns the section and the ids.
fn build_vocabulary<'a>(
    freq: impl IntoIterator<Item = (&'a str, u64)>,
) -> (Vec<u8>, HashMap<&'a str, u32>) {
    let mut words: Vec<(&str, u64)> = freq.into_iter().collect();
    words.sort_unstable_by(|a, b| b.1.cmp(&a.1).then_with(|| a.0.cmp(b.0)));
    let mut section = Vec::new();
    section.extend_from_slice(&(words.len() as u64).to_le_bytes());
    let mut offset = 0u64;
    section.extend_from_slice(&offset.to_le_bytes());
    for (w, _) in &words {
        offset += w.len() as u64;
        section.extend_from_slice(&offset.to_le_bytes());
    }
    for (w, _) in &words {
        section.extend_from_slice(w.as_bytes());
    }
    let ids = words
        .into_iter()
        .enumerate()
        .map(|(i, (w, _))| (w, i as u32))
        .collect();
    (section, ids)
}

/// Appends one target record (varint token count, varint word ids) to the targets section
/// (whose first 8 bytes are the count); returns the record's reference.
fn push_target(section: &mut Vec<u8>, target: &str, words: &HashMap<&str, u32>) -> u64 {
    let offset = (section.len() - 8) as u64;
    write_varint(section, target.split(' ').count() as u64);
    for w in target.split(' ') {
        write_varint(section, u64::from(words[w]));
    }
    offset
}

/// Numbers target phrases by frequency (most used first, ties by bytes). The table of distinct
/// targets is kept in memory while it fits `budget`; past that, every target occurrence goes
/// through an external sort instead, and pass 2 finds a target's number in an fst.
struct TargetNumbering {
    budget: usize,
    temp_parent: Option<PathBuf>,
    index: HashMap<String, u32>,
    uses: Vec<u64>,
    bytes: usize,
    spill: Option<ExternalSorter>,
}

/// Bytes one distinct target is reckoned to take in the in-memory table, beyond its text.
const TARGET_ENTRY_OVERHEAD: usize = 64;

/// Numbered targets: the two sections and how pass 2 finds a target's reference.
struct Numbered {
    vocabulary_section: Vec<u8>,
    targets_section: Vec<u8>,
    n_targets: u64,
    n_words: u64,
    refs: TargetRefs,
}

enum TargetRefs {
    /// By provisional number (order of first appearance).
    ByNumber(Vec<u64>),
    /// By rank in byte order, found in an fst of the distinct targets.
    ByRank(fst::Map<Vec<u8>>, Vec<u64>),
}

impl TargetRefs {
    fn get(&self, provisional: u32, target: &[u8]) -> Result<u64> {
        match self {
            TargetRefs::ByNumber(refs) => Ok(refs[provisional as usize]),
            TargetRefs::ByRank(ranks, refs) => {
                let rank = ranks.get(target).expect("every target was numbered");
                Ok(refs[rank as usize])
            }
        }
    }
}

impl TargetNumbering {
    fn new(budget: usize, temp_parent: Option<PathBuf>) -> TargetNumbering {
        TargetNumbering {
            budget: budget.max(1),
            temp_parent,
            index: HashMap::default(),
            uses: Vec::new(),
            bytes: 0,
            spill: None,
        }
    }

    /// Counts one use of `target`; returns its provisional number (meaningful only while the
    /// table stays in memory).
    fn note(&mut self, target: &str) -> Result<u32> {
        if let Some(spill) = &mut self.spill {
            spill.push(target.as_bytes(), &[1])?;
            return Ok(u32::MAX);
        }
        let t = match self.index.get(target) {
            Some(&t) => t,
            None => {
                let t = self.uses.len() as u32;
                self.index.insert(target.to_string(), t);
                self.uses.push(0);
                self.bytes += target.len() + TARGET_ENTRY_OVERHEAD;
                t
            }
        };
        self.uses[t as usize] += 1;
        if self.bytes > self.budget {
            // Too many distinct targets for memory: hand the counts so far to an external sort.
            let mut spill = ExternalSorter::new(self.budget, self.temp_parent.clone())?;
            let mut count = Vec::new();
            for (target, t) in std::mem::take(&mut self.index) {
                count.clear();
                write_varint(&mut count, self.uses[t as usize]);
                spill.push(target.as_bytes(), &count)?;
            }
            self.uses = Vec::new();
            self.spill = Some(spill);
        }
        Ok(t)
    }

    fn finish(self) -> Result<Numbered> {
        let Some(spill) = self.spill else {
            let mut targets: Vec<(String, u64, u32)> = self
                .index
                .into_iter()
                .map(|(t, id)| (t, self.uses[id as usize], id))
                .collect();
            targets.sort_unstable_by(|a, b| b.1.cmp(&a.1).then_with(|| a.0.cmp(&b.0)));
            let mut freq: HashMap<&str, u64> = HashMap::default();
            for (t, c, _) in &targets {
                for w in t.split(' ') {
                    *freq.entry(w).or_insert(0) += c;
                }
            }
            let (vocabulary_section, words) = build_vocabulary(freq);
            let mut targets_section = (targets.len() as u64).to_le_bytes().to_vec();
            let mut refs = vec![0u64; targets.len()];
            for (t, _, id) in &targets {
                refs[*id as usize] = push_target(&mut targets_section, t, &words);
            }
            return Ok(Numbered {
                vocabulary_section,
                targets_section,
                n_targets: targets.len() as u64,
                n_words: words.len() as u64,
                refs: TargetRefs::ByNumber(refs),
            });
        };
        // Distinct targets in byte order: sum their uses, rank them, and queue them for
        // numbering by frequency.
        let mut merged = spill.finish()?;
        let mut ranks = fst::MapBuilder::memory();
        let mut by_frequency = ExternalSorter::new(self.budget, self.temp_parent.clone())?;
        let mut freq: HashMap<String, u64> = HashMap::default();
        let mut current: Option<(Vec<u8>, u64)> = None;
        let mut rank = 0u64;
        let mut flush = |target: &[u8], uses: u64, rank: &mut u64| -> Result<()> {
            ranks
                .insert(target, *rank)
                .expect("distinct targets arrive in byte order");
            let mut key = (u64::MAX - uses).to_be_bytes().to_vec();
            key.extend_from_slice(target);
            let mut value = Vec::new();
            write_varint(&mut value, *rank);
            by_frequency.push(&key, &value)?;
            for w in std::str::from_utf8(target)
                .expect("targets are UTF-8")
                .split(' ')
            {
                match freq.get_mut(w) {
                    Some(c) => *c += uses,
                    None => {
                        freq.insert(w.to_string(), uses);
                    }
                }
            }
            *rank += 1;
            Ok(())
        };
        while let Some((key, value)) = merged.next_record()? {
            let uses = format::read_varint(value, &mut 0).expect("sorter record intact");
            match &mut current {
                Some((t, c)) if t.as_slice() == key => *c += uses,
                _ => {
                    if let Some((t, c)) = current.take() {
                        flush(&t, c, &mut rank)?;
                    }
                    current = Some((key.to_vec(), uses));
                }
            }
        }
        if let Some((t, c)) = current.take() {
            flush(&t, c, &mut rank)?;
        }
        let ranks = ranks.into_map();
        let (vocabulary_section, words) =
            build_vocabulary(freq.iter().map(|(w, &c)| (w.as_str(), c)));
        let mut targets_section = rank.to_le_bytes().to_vec();
        let mut refs = vec![0u64; rank as usize];
        let mut ordered = by_frequency.finish()?;
        while let Some((key, value)) = ordered.next_record()? {
            let target = std::str::from_utf8(&key[8..]).expect("targets are UTF-8");
            let r = format::read_varint(value, &mut 0).expect("sorter record intact");
            refs[r as usize] = push_target(&mut targets_section, target, &words);
        }
        Ok(Numbered {
            vocabulary_section,
            targets_section,
            n_targets: rank,
            n_words: words.len() as u64,
            refs: TargetRefs::ByRank(ranks, refs),
        })
    }
}

fn build_codebooks(codebooks: &[Option<Codebook>], widths: &[(u8, u8)]) -> Vec<u8> {
    let mut section = Vec::new();
    for (book, &(mode, bits)) in codebooks.iter().zip(widths) {
        section.push(mode);
        section.push(bits);
        match book {
            Some(b) => {
                section.push(b.domain());
                section.push(0);
                section.extend_from_slice(&(b.len() as u32).to_le_bytes());
                for v in b.values() {
                    section.extend_from_slice(&v.to_le_bytes());
                }
            }
            None => section.extend_from_slice(&[format::domain::LINEAR, 0, 0, 0, 0, 0]),
        }
    }
    section
}

#[derive(Clone, Default)]
struct ErrorStats {
    n: u64,
    sum_sq: f64,
    max: f64,
}

impl ErrorStats {
    fn add_error(&mut self, err: f64) {
        self.n += 1;
        self.sum_sq += err * err;
        self.max = self.max.max(err);
    }

    fn report(
        &self,
        column: &str,
        book: &Option<Codebook>,
        bits: u8,
    ) -> format::QuantizationReport {
        let (storage, bits, domain, entries) = match book {
            Some(b) => (
                "codebook",
                bits,
                if b.domain() == format::domain::LOG {
                    "log"
                } else {
                    "linear"
                },
                b.len() as u32,
            ),
            None => ("f32", 32, "linear", 0),
        };
        format::QuantizationReport {
            column: column.to_string(),
            storage: storage.to_string(),
            bits,
            domain: domain.to_string(),
            entries,
            rms_error: if self.n > 0 {
                (self.sum_sq / self.n as f64).sqrt()
            } else {
                0.0
            },
            max_error: self.max,
        }
    }
}

/// An even sample of raw blocks for dictionary training, within a byte budget: every
/// `stride`-th block is kept, and the stride doubles whenever the budget is exceeded.
struct BlockSample {
    budget: usize,
    stride: u64,
    seen: u64,
    kept: Vec<Vec<u8>>,
    bytes: usize,
}

impl BlockSample {
    fn new(budget: usize) -> BlockSample {
        BlockSample {
            budget: budget.max(1),
            stride: 1,
            seen: 0,
            kept: Vec::new(),
            bytes: 0,
        }
    }

    fn offer(&mut self, block: &[u8]) {
        if self.seen % self.stride == 0 {
            self.kept.push(block.to_vec());
            self.bytes += block.len();
            while self.bytes > self.budget && self.kept.len() > 1 {
                let mut i = 0;
                self.kept.retain(|_| {
                    i += 1;
                    i % 2 == 1
                });
                self.bytes = self.kept.iter().map(Vec::len).sum();
                self.stride *= 2;
            }
        }
        self.seen += 1;
    }

    /// A trained dictionary, or `None` when the sample is too small to train one usefully.
    fn train(&self, size: usize) -> Option<Vec<u8>> {
        if self.kept.len() < 16 || self.bytes < size * 4 {
            return None;
        }
        zstd::dict::from_samples(&self.kept, size).ok()
    }
}

/// Pass 2's sink: the fst of sources and the raw blocks.
struct SourceWriter<'a> {
    fst_builder: fst::MapBuilder<BufWriter<File>>,
    fst_path: &'a Path,
    raw_out: BufWriter<File>,
    raw_path: &'a Path,
    builder: BlockBuilder,
    block_sizes: Vec<u32>,
    samples: BlockSample,
    max_block: usize,
    sources: u64,
    order_column: Option<usize>,
    sources_per_block: u32,
    /// Options whose buffers can be reused.
    spare: Vec<PackedOption>,
}

struct WrittenSources {
    sources: u64,
    block_sizes: Vec<u32>,
    max_block: usize,
    samples: BlockSample,
}

impl SourceWriter<'_> {
    /// Sorts a source's options into the documented order and adds them; empties `group`.
    fn add_source(&mut self, source: &[u8], group: &mut Vec<PackedOption>) -> Result<()> {
        if group.is_empty() {
            return Ok(());
        }
        if let Some(c) = self.order_column {
            // The group arrives in target byte order and the sort is stable, so ties stay in
            // target byte order.
            group.sort_by(|a, b| b.scores[c].total_cmp(&a.scores[c]));
        }
        self.fst_builder
            .insert(source, self.sources)
            .map_err(|e| Error::io(self.fst_path, "writing", std::io::Error::other(e)))?;
        self.builder.add_source(group);
        self.spare.append(group);
        self.sources += 1;
        if self.builder.sources() == self.sources_per_block {
            self.write_block()?;
        }
        Ok(())
    }

    fn write_block(&mut self) -> Result<()> {
        let raw = self.builder.finish();
        if raw.len() as u64 > format::MAX_BLOCK_BYTES {
            return Err(Error::invalid(
                "--block-sources",
                format!(
                    "a block of {} sources takes {} bytes, over the {}-byte limit; use fewer sources per block",
                    self.sources_per_block,
                    raw.len(),
                    format::MAX_BLOCK_BYTES
                ),
            ));
        }
        self.max_block = self.max_block.max(raw.len());
        let werr = |e| Error::io(self.raw_path, "writing", e);
        self.raw_out
            .write_u32::<LE>(raw.len() as u32)
            .map_err(werr)?;
        self.raw_out.write_all(&raw).map_err(werr)?;
        self.block_sizes.push(raw.len() as u32);
        self.samples.offer(&raw);
        Ok(())
    }

    fn finish(mut self) -> Result<WrittenSources> {
        if self.builder.sources() > 0 {
            self.write_block()?;
        }
        self.fst_builder
            .finish()
            .map_err(|e| Error::io(self.fst_path, "writing", std::io::Error::other(e)))?;
        self.raw_out
            .flush()
            .map_err(|e| Error::io(self.raw_path, "writing", e))?;
        Ok(WrittenSources {
            sources: self.sources,
            block_sizes: self.block_sizes,
            max_block: self.max_block,
            samples: self.samples,
        })
    }
}
