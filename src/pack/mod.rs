//! Writing packed tables.
//!
//! [`pack_tsv`] and [`pack_pairs`] take phrase pairs in any order and write a `.bale` file:
//!
//! 1. Every record is pushed through an [`ExternalSorter`] (spilling sorted zstd runs past the
//!    memory budget) while target phrases are counted and score samples drawn.
//! 2. Target phrases are numbered most frequent first and their words form the vocabulary; a
//!    k-means codebook is fitted per score column ([`crate::quantize`]).
//! 3. The sorted stream is cut into blocks of a fixed number of sources (front-coded keys and
//!    options), written plain to a temporary file while their symbols are counted.
//! 4. The counts become the rANS models; target groups and blocks are coded with them (read back
//!    once, checksummed as they are written), and all sections are written behind the section
//!    table.
//!
//! The output goes through [`Output`], so a failed pack leaves no file behind.

mod blocks;
mod direct;

use rustc_hash::FxHashMap as HashMap;
use std::fs::File;
use std::io::{BufRead, BufReader, BufWriter, Read, Write};
use std::path::{Path, PathBuf};

use crate::error::{Error, Result};
use crate::files::Output;
use crate::format::block::{encode_target, BlockRecords, BlockShape, ModelIds, COMPONENTS};
use crate::format::coder::{Counter, Models, PlainSink, PlainSource, RansSink, SymbolSink};
use crate::format::sections::{encode_codebooks, encode_vocabulary, push_group_entry};
use crate::format::{self, write_varint, Compression, Layout, Meta, SectionEntry, SectionKind};
use crate::quantize::{Codebook, Reservoir, DEFAULT_SAMPLE_SIZE};
use crate::sort::{ExternalSorter, SortedRecords};
use crate::table::{Header, PhrasePair, TsvReader};

use blocks::{CostSink, PackedOption};

/// Options for packing.
#[derive(Clone, Debug)]
pub struct PackOptions {
    /// Bits per quantized score (1..=16), or `None` to store scores as f32.
    pub bits: Option<u8>,
    /// Memory budget in bytes (sorting and buffers).
    pub memory: u64,
    /// Source phrases per block: smaller blocks make cold lookups faster and files larger.
    pub sources_per_block: u32,
    /// Target phrases per target group: smaller groups make cold lookups faster and files
    /// larger.
    pub targets_per_group: u32,
    /// Coding of blocks and target groups: [`Compression::Rans`] (compact, the default) or
    /// [`Compression::None`] (plain varints, faster cold decoding).
    pub compression: Compression,
    /// Layout of the file: [`Layout::Compact`] (the default) or [`Layout::Direct`] (read in
    /// place, fastest, larger; `sources_per_block`, `targets_per_group` and `compression` do
    /// not apply to it).
    pub layout: Layout,
    /// Worker threads (0: all cores); packing is single-threaded in format 2.0.
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
            targets_per_group: DEFAULT_TARGETS_PER_GROUP,
            compression: Compression::Rans,
            layout: Layout::Compact,
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
/// Default targets per target group.
pub const DEFAULT_TARGETS_PER_GROUP: u32 = 16;

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
            "block_sources",
            "must be between 1 and 1048576",
        ));
    }
    if options.targets_per_group == 0 || options.targets_per_group > 1 << 20 {
        return Err(Error::invalid(
            "targets_per_group",
            "must be between 1 and 1048576",
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
    provenance: Vec<(String, String)>,
) -> Result<PackReport>
where
    I: Iterator<Item = Result<(u64, PhrasePair)>>,
{
    check_options(options)?;
    let schema = &header.schema;
    let ReadRecords {
        sorted,
        numbering,
        reservoirs,
        pairs,
    } = read_records(records, name, schema.scores.len(), options)?;
    let ids = ModelIds::new(schema.scores.len());
    let Numbered {
        vocabulary_section,
        groups,
        n_targets,
        n_words,
        refs,
    } = numbering.finish(TargetGroups::new(options.targets_per_group, ids))?;
    let layout = ScoreLayout::fit(&reservoirs, schema, options);
    drop(reservoirs);
    let temp = crate::files::TempDir::new(options.temp_dir.as_deref(), "baler-pack-")?;
    let what = (name, unit);
    let Grouped {
        written,
        raw_path,
        errors,
    } = group_sources(sorted, &refs, &layout, ids, options, temp.path(), what)?;
    drop(refs);
    let mut meta = Meta {
        format: format::FORMAT_NAME.to_string(),
        pairs,
        sources: 0,
        targets: n_targets,
        vocabulary: n_words,
        scores: schema.scores.clone(),
        counts: schema.counts.iter().map(|c| c.name().to_string()).collect(),
        alignment: schema.alignment,
        option_order: format::OptionOrder {
            by: layout.order_column.map(|c| schema.scores[c].clone()),
            ties: "target phrase bytes ascending".into(),
        },
        sources_per_block: options.sources_per_block,
        targets_per_group: options.targets_per_group,
        block_compression: options.compression.name().to_string(),
        max_block_bytes: 0,
        layout: options.layout.name().to_string(),
        components: Vec::new(),
        table_metadata: header.metadata.entries().to_vec(),
        provenance: full_provenance(provenance, options),
        quantization: layout.report(schema, &errors, options),
    };
    let codebook_section = encode_codebooks(&layout.codebooks, &layout.widths);
    let parts = match written {
        Written::Direct(sections) => {
            drop(std::fs::remove_file(&raw_path));
            direct_parts(
                sections,
                &mut meta,
                schema,
                codebook_section,
                vocabulary_section,
            )
        }
        Written::Compact(written) => {
            let coded = code_sections(
                written,
                &raw_path,
                groups,
                n_words,
                &layout,
                ids,
                temp.path(),
            )?;
            compact_parts(
                coded,
                &mut meta,
                schema,
                codebook_section,
                vocabulary_section,
            )
        }
    };
    let (sections, file_bytes) = write_file(out, &parts, options.layout)?;
    Ok(PackReport {
        meta,
        sections,
        file_bytes,
    })
}

/// Pass 1's result: the records sorted by `source 0 target`, the targets counted for
/// numbering, and a sample of every score column.
struct ReadRecords {
    sorted: SortedRecords,
    numbering: TargetNumbering,
    reservoirs: Vec<Reservoir>,
    pairs: u64,
}

/// Pass 1: every record through the sorter, targets counted, scores sampled.
fn read_records<I>(
    records: I,
    name: &str,
    n_scores: usize,
    options: &PackOptions,
) -> Result<ReadRecords>
where
    I: Iterator<Item = Result<(u64, PhrasePair)>>,
{
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
    Ok(ReadRecords {
        sorted: sorter.finish()?,
        numbering,
        reservoirs,
        pairs,
    })
}

/// How scores are stored: a codebook per column (or f32), the widths they take, the block
/// shape, and the column options are ordered by.
struct ScoreLayout {
    codebooks: Vec<Option<Codebook>>,
    /// Per column: score mode and bits.
    widths: Vec<(u8, u8)>,
    shape: BlockShape,
    order_column: Option<usize>,
}

impl ScoreLayout {
    fn fit(reservoirs: &[Reservoir], schema: &crate::table::Schema, options: &PackOptions) -> Self {
        let codebooks: Vec<Option<Codebook>> = reservoirs
            .iter()
            .map(|r| options.bits.map(|bits| Codebook::fit(&r.values(), bits)))
            .collect();
        let n_scores = schema.scores.len();
        let order_column =
            schema
                .score_index("p_t_given_s")
                .or(if n_scores > 0 { Some(0) } else { None });
        let widths: Vec<(u8, u8)> = codebooks
            .iter()
            .map(|c| match (c, options.bits) {
                (Some(_), Some(bits)) => (format::score_mode::CODEBOOK, bits),
                _ => (format::score_mode::F32, 32),
            })
            .collect();
        let shape = BlockShape {
            widths: widths
                .iter()
                .map(|&(m, b)| format::score_width(m, b))
                .collect(),
            alignment: schema.alignment,
            counts: schema.counts.len(),
        };
        ScoreLayout {
            codebooks,
            widths,
            shape,
            order_column,
        }
    }

    /// The quantization report of each score column.
    fn report(
        &self,
        schema: &crate::table::Schema,
        errors: &[ErrorStats],
        options: &PackOptions,
    ) -> Vec<format::QuantizationReport> {
        schema
            .scores
            .iter()
            .zip(&self.codebooks)
            .zip(errors)
            .map(|((column, book), err)| err.report(column, book, options.bits.unwrap_or(32)))
            .collect()
    }
}

/// Pass 2's result: the plain blocks (in `raw_path`), what indexes them, and the quantization
/// error of every score column.
struct Grouped {
    written: Written,
    raw_path: PathBuf,
    errors: Vec<ErrorStats>,
}

/// What pass 2 wrote, by layout.
enum Written {
    /// Plain source blocks (in `raw_path`) and what indexes them, still to be coded.
    Compact(WrittenSources),
    /// The direct layout's finished sections.
    Direct(direct::DirectSections),
}

/// Pass 2: the sorted records grouped by source into plain blocks, their symbols counted; a
/// pair given twice is an input error naming both places (`what`: the input's name and its
/// unit of position).
fn group_sources(
    mut sorted: SortedRecords,
    target_refs: &TargetRefs,
    layout: &ScoreLayout,
    ids: ModelIds,
    options: &PackOptions,
    temp: &Path,
    (name, unit): (&str, &str),
) -> Result<Grouped> {
    let raw_path = temp.join("blocks.plain");
    let raw_file = File::create(&raw_path).map_err(|e| Error::io(&raw_path, "creating", e))?;
    let mut direct = match options.layout {
        Layout::Direct => Some(direct::DirectWriter::new(
            temp,
            &layout.shape,
            layout.order_column,
        )?),
        Layout::Compact => None,
    };
    let mut writer = SourceWriter {
        raw_out: BufWriter::with_capacity(1 << 20, raw_file),
        raw_path: &raw_path,
        shape: &layout.shape,
        ids,
        block: BlockRecords::default(),
        counter: (options.compression == Compression::Rans).then(|| Counter::new(ids.count())),
        plain: PlainSink::default(),
        block_sources: Vec::new(),
        first_keys: Vec::new(),
        key_ends: Vec::new(),
        previous_source: Vec::new(),
        sources: 0,
        order_column: layout.order_column,
        sources_per_block: options.sources_per_block,
        spare: Vec::new(),
    };
    let mut errors = vec![ErrorStats::default(); layout.codebooks.len()];
    let mut group: Vec<PackedOption> = Vec::new();
    let mut group_source: Vec<u8> = Vec::new();
    let mut previous_target: Vec<u8> = Vec::new();
    let mut previous_position = 0u64;
    let bar = progress_bar(options.progress, "packing");
    let mut done = 0u64;
    while let Some((k, v)) = sorted.next_record()? {
        let split = k
            .iter()
            .position(|&b| b == 0)
            .expect("key holds a NUL separator");
        let (source, target) = (&k[..split], &k[split + 1..]);
        let spare = match &mut direct {
            Some(d) => &mut d.spare,
            None => &mut writer.spare,
        };
        let mut option = spare.pop().unwrap_or_default();
        let (position, target_number) =
            decode_value(v, &layout.codebooks, &mut errors, &mut option);
        option.target_ref = target_refs.get(target_number, target)?;
        if direct.is_some() {
            option.target.clear();
            option.target.extend_from_slice(target);
        }
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
            match &mut direct {
                Some(d) => d.add_source(&group_source, &mut group)?,
                None => writer.add_source(&group_source, &mut group)?,
            }
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
    match &mut direct {
        Some(d) => d.add_source(&group_source, &mut group)?,
        None => writer.add_source(&group_source, &mut group)?,
    }
    bar.finish_and_clear();
    let written = match direct {
        Some(d) => {
            drop(writer);
            Written::Direct(d.finish()?)
        }
        None => Written::Compact(writer.finish()?),
    };
    Ok(Grouped {
        written,
        raw_path,
        errors,
    })
}

/// Every coded section but the metadata, codebooks and vocabulary.
struct CodedSections {
    sources: u64,
    models: Option<Models>,
    block_index: Vec<u8>,
    first_keys: Vec<u8>,
    /// The block-skips section (rANS coding only).
    block_skips: Option<Vec<u8>>,
    /// The group-skips section (rANS coding only).
    group_skips: Option<Vec<u8>>,
    target_index: Vec<u8>,
    target_data: Vec<u8>,
    blocks: Part,
    max_block_bytes: u64,
    /// Bits each component of the file costs (indexed as [`COMPONENTS`], then per score).
    cost_bits: Vec<f64>,
}

impl CodedSections {
    /// The bytes of each named component, as the metadata records them.
    fn components(&self, schema: &crate::table::Schema) -> Vec<(String, u64)> {
        let mut components: Vec<(String, u64)> = Vec::new();
        for (i, bits) in self.cost_bits.iter().enumerate() {
            let name = match COMPONENTS.get(i) {
                Some(&"-") => continue,
                Some(n) => n.to_string(),
                None => format!("score:{}", schema.scores[i - COMPONENTS.len()]),
            };
            components.push((name, (bits / 8.0).ceil() as u64));
        }
        components
    }
}

/// The rANS models from the symbol counts of blocks and targets; then the target groups and
/// the blocks coded with them (the plain blocks are read back once and removed).
fn code_sections(
    written: WrittenSources,
    raw_path: &Path,
    target_groups: TargetGroups,
    n_words: u64,
    layout: &ScoreLayout,
    ids: ModelIds,
    temp: &Path,
) -> Result<CodedSections> {
    let models = written.counter.map(|mut c| {
        for (m, t) in c.counts.iter_mut().zip(&target_groups.counter.counts) {
            for (x, y) in m.iter_mut().zip(t) {
                *x += y;
            }
        }
        Models::from_counts(&c.counts)
    });
    let mut costs = CostSink::new(ids, models.as_ref(), layout.codebooks.len());
    let (target_index, target_data, max_group, group_skips) =
        target_groups.code(models.as_ref(), n_words, &mut costs);
    let blocks_path = temp.join("blocks.coded");
    let coded = blocks::code_blocks(
        raw_path,
        &written.block_sources,
        &written.first_keys,
        &written.key_ends,
        &layout.shape,
        ids,
        models.as_ref(),
        &mut costs,
        &blocks_path,
    )?;
    drop(std::fs::remove_file(raw_path));
    let cost_bits = std::mem::take(&mut costs.bits);
    drop(costs);
    Ok(CodedSections {
        sources: written.sources,
        models,
        block_index: coded.index,
        // Without any resume point (small tables) the file stays 2.0.
        block_skips: coded
            .skips
            .as_deref()
            .filter(|s| s.iter().any(|p| !p.is_empty()))
            .map(crate::format::sections::encode_block_skips),
        first_keys: written.first_keys,
        group_skips,
        target_index,
        target_data,
        blocks: Part::File {
            path: blocks_path,
            len: coded.bytes,
            crc: coded.crc,
        },
        max_block_bytes: coded.max_block.max(max_group) as u64,
        cost_bits,
    })
}

/// The compact layout's sections, in file order; completes `meta` with what coding found.
fn compact_parts(
    coded: CodedSections,
    meta: &mut Meta,
    schema: &crate::table::Schema,
    codebook_section: Vec<u8>,
    vocabulary_section: Vec<u8>,
) -> Vec<(SectionKind, Part)> {
    meta.sources = coded.sources;
    meta.max_block_bytes = coded.max_block_bytes;
    meta.components = coded.components(schema);
    let meta_section = serde_json::to_vec(&*meta).expect("metadata serializes");
    let mut parts: Vec<(SectionKind, Part)> = vec![
        (SectionKind::Metadata, Part::Memory(meta_section)),
        (SectionKind::Codebooks, Part::Memory(codebook_section)),
    ];
    if let Some(m) = &coded.models {
        parts.push((SectionKind::Models, Part::Memory(m.encode())));
    }
    parts.push((SectionKind::Vocabulary, Part::Memory(vocabulary_section)));
    parts.push((SectionKind::BlockIndex, Part::Memory(coded.block_index)));
    parts.push((SectionKind::BlockKeys, Part::Memory(coded.first_keys)));
    if let Some(skips) = coded.block_skips {
        parts.push((SectionKind::BlockSkips, Part::Memory(skips)));
    }
    parts.push((SectionKind::TargetIndex, Part::Memory(coded.target_index)));
    if let Some(skips) = coded.group_skips {
        parts.push((SectionKind::GroupSkips, Part::Memory(skips)));
    }
    parts.push((SectionKind::Targets, Part::Memory(coded.target_data)));
    parts.push((SectionKind::Blocks, coded.blocks));
    parts
}

/// The direct layout's sections, in file order; completes `meta` with what the writer found.
fn direct_parts(
    written: direct::DirectSections,
    meta: &mut Meta,
    schema: &crate::table::Schema,
    codebook_section: Vec<u8>,
    vocabulary_section: Vec<u8>,
) -> Vec<(SectionKind, Part)> {
    meta.sources = written.sources;
    // Not used by this layout; 1 keeps 2.0's rules for them.
    meta.sources_per_block = 1;
    meta.targets_per_group = 1;
    meta.block_compression = Compression::None.name().to_string();
    meta.max_block_bytes = written.max_record as u64;
    let z = &written.sizes;
    meta.components = vec![
        ("keys".to_string(), z.keys),
        ("prefix-keys".to_string(), z.prefix_records),
        ("hash".to_string(), z.hash),
        ("targets".to_string(), z.text),
        ("target-ends".to_string(), z.ends),
    ];
    if z.extras > 0 {
        meta.components
            .push(("alignments+counts".to_string(), z.extras));
    }
    for (name, bytes) in schema.scores.iter().zip(&z.codes) {
        meta.components.push((format!("score:{name}"), *bytes));
    }
    meta.components.push(("chunk-sums".to_string(), z.chunks));
    let meta_section = serde_json::to_vec(&*meta).expect("metadata serializes");
    let (records_path, records_len, records_crc) = written.records;
    let (text_path, text_len, text_crc) = written.text;
    vec![
        (SectionKind::Metadata, Part::Memory(meta_section)),
        (SectionKind::Codebooks, Part::Memory(codebook_section)),
        (SectionKind::Vocabulary, Part::Memory(vocabulary_section)),
        (SectionKind::DirectChunks, Part::Memory(written.chunks)),
        (SectionKind::DirectHash, Part::Memory(written.hash)),
        (
            SectionKind::DirectRecords,
            Part::File {
                path: records_path,
                len: records_len,
                crc: records_crc,
            },
        ),
        (
            SectionKind::DirectText,
            Part::File {
                path: text_path,
                len: text_len,
                crc: text_crc,
            },
        ),
    ]
}

/// The provenance recorded in the file: the tool and version first, then what the caller
/// gave, then the packing settings.
fn full_provenance(
    mut provenance: Vec<(String, String)>,
    options: &PackOptions,
) -> Vec<(String, String)> {
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
    if options.layout == Layout::Compact {
        provenance.push((
            "sources_per_block".into(),
            options.sources_per_block.to_string(),
        ));
        provenance.push((
            "targets_per_group".into(),
            options.targets_per_group.to_string(),
        ));
        provenance.push(("compression".into(), options.compression.name().into()));
    } else {
        provenance.push(("layout".into(), options.layout.name().into()));
    }
    provenance
}

/// A section's bytes: in memory, or in a temporary file whose length and checksum were taken
/// while it was written (so it is read once, to be copied).
enum Part {
    Memory(Vec<u8>),
    File { path: PathBuf, len: u64, crc: u32 },
}

impl Part {
    fn len(&self) -> u64 {
        match self {
            Part::Memory(v) => v.len() as u64,
            Part::File { len, .. } => *len,
        }
    }

    fn crc(&self) -> u32 {
        match self {
            Part::Memory(v) => crc32fast::hash(v),
            Part::File { crc, .. } => *crc,
        }
    }

    fn for_each_chunk(&self, mut f: impl FnMut(&[u8]) -> Result<()>) -> Result<()> {
        match self {
            Part::Memory(v) => f(v),
            Part::File { path: p, .. } => {
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

fn write_file(
    out: &Path,
    parts: &[(SectionKind, Part)],
    layout: Layout,
) -> Result<(Vec<(SectionKind, u64)>, u64)> {
    let mut entries = Vec::with_capacity(parts.len());
    let mut offset = (format::FILE_HEADER_LEN + parts.len() * format::SECTION_ENTRY_LEN) as u64;
    offset += format::padding(offset);
    for (kind, part) in parts {
        let length = part.len();
        entries.push(SectionEntry {
            kind: *kind as u32,
            flags: 0,
            offset,
            length,
            crc32: part.crc(),
        });
        offset += length + format::padding(length);
    }
    let mut table = Vec::new();
    for e in &entries {
        table.extend_from_slice(&e.encode());
    }
    let mut header = format::FileHeader {
        major: format::VERSION_MAJOR,
        minor: if parts
            .iter()
            .any(|(k, _)| matches!(k, SectionKind::BlockSkips | SectionKind::GroupSkips))
        {
            format::VERSION_MINOR_SKIPS
        } else {
            layout.minor_version()
        },
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
    let section = encode_vocabulary(words.iter().map(|(w, _)| *w));
    let ids = words
        .into_iter()
        .enumerate()
        .map(|(i, (w, _))| (w, i as u32))
        .collect();
    (section, ids)
}

/// Distinct targets in rank order, cut into groups and plain-coded, their symbols counted.
struct TargetGroups {
    per: u32,
    ids: ModelIds,
    in_group: u32,
    current: PlainSink,
    plain: Vec<Vec<u8>>,
    counter: Counter,
    words: Vec<u32>,
    pushed: u64,
}

impl TargetGroups {
    fn new(per: u32, ids: ModelIds) -> TargetGroups {
        TargetGroups {
            per,
            ids,
            in_group: 0,
            current: PlainSink::default(),
            plain: Vec::new(),
            counter: Counter::new(ids.count()),
            words: Vec::new(),
            pushed: 0,
        }
    }

    /// Appends the next target (in rank order); returns its rank.
    fn push(&mut self, target: &str, words: &HashMap<&str, u32>) -> u64 {
        self.words.clear();
        self.words.extend(target.split(' ').map(|w| words[w]));
        encode_target(&self.words, &mut self.current);
        encode_target(&self.words, &mut self.counter);
        self.in_group += 1;
        if self.in_group == self.per {
            self.plain.push(std::mem::take(&mut self.current.out));
            self.in_group = 0;
        }
        self.pushed += 1;
        self.pushed - 1
    }

    /// Codes every group; returns the target index, the targets section and the largest group.
    fn code(
        mut self,
        models: Option<&Models>,
        vocabulary: u64,
        costs: &mut CostSink<'_>,
    ) -> (Vec<u8>, Vec<u8>, usize, Option<Vec<u8>>) {
        if self.in_group > 0 {
            self.plain.push(std::mem::take(&mut self.current.out));
        }
        let mut index = Vec::with_capacity(self.plain.len() * 12 + 8);
        let mut data = Vec::new();
        let mut coded = Vec::new();
        let mut max = 0;
        let n_groups = self.plain.len();
        let middle = crate::format::sections::group_skip_target(self.per);
        let mut skips = Vec::with_capacity(n_groups * 8);
        let mut any_skip = false;
        for (g, plain) in self.plain.iter().enumerate() {
            let n = if g + 1 == n_groups && self.pushed % u64::from(self.per) != 0 {
                self.pushed % u64::from(self.per)
            } else {
                u64::from(self.per)
            };
            let mut src = PlainSource::new(plain);
            let mut rans = models.map(RansSink::new);
            for t in 0..n {
                if let (Some(r), true) = (&mut rans, t as usize == middle && middle > 0) {
                    r.mark(middle);
                }
                self.words.clear();
                // The plain group was written by this process; a failure to parse it is a bug.
                format::block::decode_target(&mut src, vocabulary, &mut self.words)
                    .expect("pass 1's plain target parses");
                encode_target(&self.words, costs);
                if let Some(r) = &mut rans {
                    encode_target(&self.words, r);
                }
            }
            let stored: &[u8] = match &mut rans {
                Some(r) => {
                    r.finish(&mut coded);
                    let point = r.resume_points.first().map(|&(_, pos, state)| (state, pos));
                    any_skip |= point.is_some();
                    crate::format::sections::push_group_skip(&mut skips, point);
                    &coded
                }
                None => plain,
            };
            push_group_entry(&mut index, data.len() as u64, crc32fast::hash(stored));
            data.extend_from_slice(stored);
            max = max.max(stored.len());
        }
        index.extend_from_slice(&(data.len() as u64).to_le_bytes());
        let _ = self.ids;
        (index, data, max, any_skip.then_some(skips))
    }
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
    groups: TargetGroups,
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

    fn finish(self, mut groups: TargetGroups) -> Result<Numbered> {
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
            let mut refs = vec![0u64; targets.len()];
            for (t, _, id) in &targets {
                refs[*id as usize] = groups.push(t, &words);
            }
            return Ok(Numbered {
                vocabulary_section,
                groups,
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
        let mut refs = vec![0u64; rank as usize];
        let mut ordered = by_frequency.finish()?;
        while let Some((key, value)) = ordered.next_record()? {
            let target = std::str::from_utf8(&key[8..]).expect("targets are UTF-8");
            let r = format::read_varint(value, &mut 0).expect("sorter record intact");
            refs[r as usize] = groups.push(target, &words);
        }
        Ok(Numbered {
            vocabulary_section,
            groups,
            n_targets: rank,
            n_words: words.len() as u64,
            refs: TargetRefs::ByRank(ranks, refs),
        })
    }
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

/// Pass 2's sink: plain blocks in a temporary file, their symbol counts and first keys.
struct SourceWriter<'a> {
    raw_out: BufWriter<File>,
    raw_path: &'a Path,
    shape: &'a BlockShape,
    ids: ModelIds,
    block: BlockRecords,
    counter: Option<Counter>,
    plain: PlainSink,
    block_sources: Vec<u32>,
    first_keys: Vec<u8>,
    key_ends: Vec<u32>,
    previous_source: Vec<u8>,
    sources: u64,
    order_column: Option<usize>,
    sources_per_block: u32,
    /// Options whose buffers can be reused.
    spare: Vec<PackedOption>,
}

struct WrittenSources {
    sources: u64,
    block_sources: Vec<u32>,
    first_keys: Vec<u8>,
    key_ends: Vec<u32>,
    counter: Option<Counter>,
}

impl SourceWriter<'_> {
    /// Sorts a source's options into the documented order and adds them; empties `group`.
    fn add_source(&mut self, source: &[u8], group: &mut Vec<PackedOption>) -> Result<()> {
        if group.is_empty() {
            return Ok(());
        }
        if self.sources > 0 && source <= self.previous_source.as_slice() {
            // The sorter delivers sources in byte order; anything else is a bug.
            unreachable!("sources arrive in ascending byte order");
        }
        self.previous_source.clear();
        self.previous_source.extend_from_slice(source);
        if let Some(c) = self.order_column {
            // The group arrives in target byte order and the sort is stable, so ties stay in
            // target byte order.
            group.sort_by(|a, b| b.scores[c].total_cmp(&a.scores[c]));
        }
        if self.block.sources() == 0 {
            self.first_keys.extend_from_slice(source);
            self.key_ends.push(self.first_keys.len() as u32);
        }
        blocks::push_source(&mut self.block, self.shape, source, group);
        self.spare.append(group);
        self.sources += 1;
        if self.block.sources() == self.sources_per_block as usize {
            self.write_block()?;
        }
        Ok(())
    }

    fn write_block(&mut self) -> Result<()> {
        let len = blocks::write_plain_block(
            &self.block,
            self.shape,
            &self.ids,
            self.counter.as_mut(),
            &mut self.plain,
            &mut self.raw_out,
        )
        .map_err(|e| Error::io(self.raw_path, "writing", e))?;
        if len as u64 > format::MAX_BLOCK_BYTES {
            return Err(Error::invalid(
                "--block-sources",
                format!(
                    "a block of {} sources takes {len} bytes, over the {}-byte limit; use fewer sources per block",
                    self.sources_per_block,
                    format::MAX_BLOCK_BYTES
                ),
            ));
        }
        self.block_sources.push(self.block.sources() as u32);
        self.block.clear();
        Ok(())
    }

    fn finish(mut self) -> Result<WrittenSources> {
        if self.block.sources() > 0 {
            self.write_block()?;
        }
        self.raw_out
            .flush()
            .map_err(|e| Error::io(self.raw_path, "writing", e))?;
        Ok(WrittenSources {
            sources: self.sources,
            block_sources: self.block_sources,
            first_keys: self.first_keys,
            key_ends: self.key_ends,
            counter: self.counter,
        })
    }
}
