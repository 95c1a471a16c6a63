//! The text interchange format: one phrase pair per line, tab-separated, UTF-8.
//!
//! (`→` stands for a tab)
//!
//! ```text
//! # sentence_pairs=3
//! source→target→alignment→p_t_given_s→count
//! the ferry→el ferry→0-0 1-1→0.5→2
//! ```
//!
//! * Optional leading metadata lines `# key=value`, kept in order.
//! * A header line naming the columns. `source` and `target` are required; `alignment` is
//!   optional; the integer count columns are listed in [`CountColumn`]; every other column is a
//!   float score.
//! * Phrases are tokens separated by single spaces. Alignments are space-separated `i-j` links
//!   (0-based source index, 0-based target index), checked against the phrase lengths.
//!
//! Columns are written in a canonical order: `source`, `target`, `alignment` (if present), the
//! scores in the order they were first read, then the counts in [`CountColumn`] order.

mod format;

pub use format::{format_count, format_score};

use std::fmt::Write as _;
use std::io::{BufRead, Write};

use crate::error::{Error, Result};
use crate::files;

/// The exact integer columns of the interchange format, in canonical order.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum CountColumn {
    /// `count`: joint count of the phrase pair.
    Count,
    /// `count_source`: count of the source phrase.
    CountSource,
    /// `count_target`: count of the target phrase.
    CountTarget,
    /// `cooc`: sentence pairs containing the source phrase on the source side and the target
    /// phrase on the target side.
    Cooc,
    /// `df_source`: sentence pairs whose source side contains the source phrase.
    DfSource,
    /// `df_target`: sentence pairs whose target side contains the target phrase.
    DfTarget,
}

impl CountColumn {
    /// Every count column in canonical order.
    pub const ALL: [CountColumn; 6] = [
        CountColumn::Count,
        CountColumn::CountSource,
        CountColumn::CountTarget,
        CountColumn::Cooc,
        CountColumn::DfSource,
        CountColumn::DfTarget,
    ];

    /// The column name as it appears in a header.
    pub fn name(self) -> &'static str {
        match self {
            CountColumn::Count => "count",
            CountColumn::CountSource => "count_source",
            CountColumn::CountTarget => "count_target",
            CountColumn::Cooc => "cooc",
            CountColumn::DfSource => "df_source",
            CountColumn::DfTarget => "df_target",
        }
    }

    /// Looks a count column up by header name.
    pub fn from_name(name: &str) -> Option<CountColumn> {
        CountColumn::ALL.into_iter().find(|c| c.name() == name)
    }
}

/// Which columns a table has, beyond `source` and `target`.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Schema {
    /// Float score columns, in order.
    pub scores: Vec<String>,
    /// Count columns present, in canonical order.
    pub counts: Vec<CountColumn>,
    /// Whether an `alignment` column is present.
    pub alignment: bool,
}

impl Schema {
    /// Index of the named score column.
    pub fn score_index(&self, name: &str) -> Option<usize> {
        self.scores.iter().position(|s| s == name)
    }

    /// Index of a count column within [`PhrasePair::counts`].
    pub fn count_index(&self, column: CountColumn) -> Option<usize> {
        self.counts.iter().position(|&c| c == column)
    }

    /// The header line (without newline) in canonical column order.
    pub fn header_line(&self) -> String {
        let mut line = String::from("source\ttarget");
        if self.alignment {
            line.push_str("\talignment");
        }
        for s in &self.scores {
            line.push('\t');
            line.push_str(s);
        }
        for c in &self.counts {
            line.push('\t');
            line.push_str(c.name());
        }
        line
    }
}

/// Ordered `# key=value` metadata lines.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Metadata {
    entries: Vec<(String, String)>,
}

impl Metadata {
    /// The value for `key`, if present.
    pub fn get(&self, key: &str) -> Option<&str> {
        self.entries
            .iter()
            .find(|(k, _)| k == key)
            .map(|(_, v)| v.as_str())
    }

    /// Sets `key` to `value`, replacing an existing entry in place or appending.
    pub fn set(&mut self, key: impl Into<String>, value: impl Into<String>) {
        let key = key.into();
        let value = value.into();
        match self.entries.iter_mut().find(|(k, _)| *k == key) {
            Some(entry) => entry.1 = value,
            None => self.entries.push((key, value)),
        }
    }

    /// Every entry in order.
    pub fn entries(&self) -> &[(String, String)] {
        &self.entries
    }

    /// The number of sentence pairs (`# sentence_pairs=N`), if recorded.
    pub fn sentence_pairs(&self) -> Option<u64> {
        self.get("sentence_pairs").and_then(|v| v.parse().ok())
    }
}

/// Metadata and schema: everything before the first record.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Header {
    /// The `# key=value` lines.
    pub metadata: Metadata,
    /// The columns.
    pub schema: Schema,
}

/// One phrase pair with its columns.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct PhrasePair {
    /// Source phrase, tokens separated by single spaces.
    pub source: String,
    /// Target phrase, tokens separated by single spaces.
    pub target: String,
    /// Word links `(source index, target index)`; empty when absent.
    pub alignment: Vec<(u16, u16)>,
    /// Scores, parallel to [`Schema::scores`].
    pub scores: Vec<f64>,
    /// Counts, parallel to [`Schema::counts`].
    pub counts: Vec<u64>,
}

#[derive(Clone, Copy, Debug)]
enum Slot {
    Source,
    Target,
    Alignment,
    Score(usize),
    Count(usize),
}

/// Reads an interchange TSV table record by record.
///
/// # Examples
/// ```
/// let text = "# sentence_pairs=2\nsource\ttarget\tp_t_given_s\tcount\nla nave\tthe ship\t0.5\t3\n";
/// let mut reader = baler::table::TsvReader::new(text.as_bytes(), "example.tsv").unwrap();
/// assert_eq!(reader.header().metadata.sentence_pairs(), Some(2));
/// let pair = reader.next().unwrap().unwrap();
/// assert_eq!((pair.source.as_str(), pair.target.as_str()), ("la nave", "the ship"));
/// assert_eq!((pair.scores[0], pair.counts[0]), (0.5, 3));
/// assert!(reader.next().is_none());
/// ```
pub struct TsvReader<R> {
    input: R,
    file: String,
    line_no: u64,
    header: Header,
    slots: Vec<Slot>,
    buf: String,
}

impl<R: BufRead> TsvReader<R> {
    /// Reads the metadata and header from `input`; `file` names it in error messages.
    pub fn new(mut input: R, file: impl Into<String>) -> Result<TsvReader<R>> {
        let file = file.into();
        let mut metadata = Metadata::default();
        let mut buf = String::new();
        let mut line_no = 0;
        loop {
            line_no += 1;
            if !files::read_line(&mut input, &mut buf, &file, line_no)? {
                return Err(Error::input(
                    &file,
                    line_no,
                    "missing header line (no columns)",
                ));
            }
            if let Some(rest) = buf.strip_prefix('#') {
                let rest = rest.trim();
                match rest.split_once('=') {
                    Some((k, v)) if !k.trim().is_empty() => metadata.set(k.trim(), v.trim()),
                    _ => {
                        return Err(Error::input(
                            &file,
                            line_no,
                            format!("metadata line must be `# key=value`, found {buf:?}"),
                        ))
                    }
                }
                continue;
            }
            break;
        }
        let (schema, slots) = parse_header(&buf).map_err(|r| Error::input(&file, line_no, r))?;
        Ok(TsvReader {
            input,
            file,
            line_no,
            header: Header { metadata, schema },
            slots,
            buf,
        })
    }

    /// The metadata and schema.
    pub fn header(&self) -> &Header {
        &self.header
    }

    /// The file name used in messages.
    pub fn file(&self) -> &str {
        &self.file
    }

    /// The line number of the record read last.
    pub fn line(&self) -> u64 {
        self.line_no
    }

    /// Reads the next record into `pair`, reusing its buffers; false at end of input.
    pub fn read_into(&mut self, pair: &mut PhrasePair) -> Result<bool> {
        loop {
            self.line_no += 1;
            if !files::read_line(&mut self.input, &mut self.buf, &self.file, self.line_no)? {
                return Ok(false);
            }
            if self.buf.is_empty() {
                continue; // blank lines (e.g. a trailing one) carry no record
            }
            return parse_record(&self.buf, &self.slots, &self.header.schema, pair)
                .map(|()| true)
                .map_err(|reason| Error::input(&self.file, self.line_no, reason));
        }
    }
}

/// A record read by [`TsvReader::read_raw`]: its line as read, and its two phrases.
#[derive(Clone, Copy, Debug)]
pub struct RawRecord<'a> {
    /// The whole line, without its line ending.
    pub line: &'a str,
    /// The source phrase.
    pub source: &'a str,
    /// The target phrase.
    pub target: &'a str,
    /// Its line number in the file.
    pub line_no: u64,
}

impl<R: BufRead> TsvReader<R> {
    /// Whether the columns are in canonical order (`source`, `target`, `alignment`, scores,
    /// counts), the order [`TsvWriter`] writes: then a line read by [`TsvReader::read_raw`]
    /// can be written back as it is.
    pub fn canonical_columns(&self) -> bool {
        let rank = |slot: &Slot| match *slot {
            Slot::Source => (0, 0),
            Slot::Target => (1, 0),
            Slot::Alignment => (2, 0),
            Slot::Score(k) => (3, k),
            Slot::Count(k) => (4, k),
        };
        self.slots.windows(2).all(|w| rank(&w[0]) < rank(&w[1]))
    }

    /// Reads the next record without parsing its scores, counts and alignment (for passing
    /// rows through unchanged, e.g. with columns appended by [`TsvWriter::write_extended`]);
    /// the field count and both phrases are checked. `None` at end of input.
    ///
    /// # Examples
    /// ```
    /// let text = "source\ttarget\tp_t_given_s\nla nave\tthe ship\t0.5\n";
    /// let mut reader = baler::table::TsvReader::new(text.as_bytes(), "example.tsv").unwrap();
    /// let record = reader.read_raw().unwrap().unwrap();
    /// assert_eq!((record.source, record.line), ("la nave", "la nave\tthe ship\t0.5"));
    /// assert!(reader.read_raw().unwrap().is_none());
    /// ```
    pub fn read_raw(&mut self) -> Result<Option<RawRecord<'_>>> {
        loop {
            self.line_no += 1;
            if !files::read_line(&mut self.input, &mut self.buf, &self.file, self.line_no)? {
                return Ok(None);
            }
            if !self.buf.is_empty() {
                break; // blank lines (e.g. a trailing one) carry no record
            }
        }
        let line = self.buf.as_str();
        let (mut source, mut target, mut n) = ("", "", 0);
        let bad = |reason: String| Error::input(&self.file, self.line_no, reason);
        for (i, field) in line.split('\t').enumerate() {
            n += 1;
            match self.slots.get(i) {
                Some(Slot::Source) => source = check_phrase(field, "source").map_err(bad)?,
                Some(Slot::Target) => target = check_phrase(field, "target").map_err(bad)?,
                _ => {}
            }
        }
        if n != self.slots.len() {
            return Err(bad(format!(
                "expected {} tab-separated fields, found {n}",
                self.slots.len()
            )));
        }
        Ok(Some(RawRecord {
            line,
            source,
            target,
            line_no: self.line_no,
        }))
    }
}

impl<R: BufRead> Iterator for TsvReader<R> {
    type Item = Result<PhrasePair>;

    fn next(&mut self) -> Option<Result<PhrasePair>> {
        let mut pair = PhrasePair::default();
        match self.read_into(&mut pair) {
            Ok(true) => Some(Ok(pair)),
            Ok(false) => None,
            Err(e) => Some(Err(e)),
        }
    }
}

fn parse_header(line: &str) -> std::result::Result<(Schema, Vec<Slot>), String> {
    let mut schema = Schema::default();
    let mut slots = Vec::new();
    let mut seen: Vec<&str> = Vec::new();
    let mut counts_in_order: Vec<CountColumn> = Vec::new();
    for name in line.split('\t') {
        if name.is_empty() {
            return Err("empty column name in header".into());
        }
        if seen.contains(&name) {
            return Err(format!("column {name:?} appears twice in header"));
        }
        seen.push(name);
        let slot = match name {
            "source" => Slot::Source,
            "target" => Slot::Target,
            "alignment" => {
                schema.alignment = true;
                Slot::Alignment
            }
            _ => match CountColumn::from_name(name) {
                Some(c) => {
                    counts_in_order.push(c);
                    Slot::Count(0) // index fixed below
                }
                None => {
                    schema.scores.push(name.to_string());
                    Slot::Score(schema.scores.len() - 1)
                }
            },
        };
        slots.push(slot);
    }
    for required in ["source", "target"] {
        if !seen.contains(&required) {
            return Err(format!("header lacks the required column {required:?}"));
        }
    }
    schema.counts = counts_in_order.clone();
    schema.counts.sort();
    let mut k = 0;
    for slot in slots.iter_mut() {
        if let Slot::Count(i) = slot {
            *i = schema
                .count_index(counts_in_order[k])
                .expect("count present");
            k += 1;
        }
    }
    Ok((schema, slots))
}

fn parse_record(
    line: &str,
    slots: &[Slot],
    schema: &Schema,
    pair: &mut PhrasePair,
) -> std::result::Result<(), String> {
    pair.source.clear();
    pair.target.clear();
    pair.alignment.clear();
    pair.scores.clear();
    pair.scores.resize(schema.scores.len(), 0.0);
    pair.counts.clear();
    pair.counts.resize(schema.counts.len(), 0);
    let mut alignment_field = None;
    let mut n = 0;
    for (i, field) in line.split('\t').enumerate() {
        n += 1;
        let Some(slot) = slots.get(i) else { continue };
        match *slot {
            Slot::Source => pair.source.push_str(check_phrase(field, "source")?),
            Slot::Target => pair.target.push_str(check_phrase(field, "target")?),
            Slot::Alignment => alignment_field = Some(field),
            Slot::Score(k) => {
                let name = &schema.scores[k];
                let v: f64 = field
                    .parse()
                    .map_err(|_| format!("column {name:?}: {field:?} is not a number"))?;
                if !v.is_finite() {
                    return Err(format!("column {name:?}: {field:?} is not a finite number"));
                }
                pair.scores[k] = v;
            }
            Slot::Count(k) => {
                let name = schema.counts[k].name();
                pair.counts[k] = field.parse().map_err(|_| {
                    format!("column {name:?}: {field:?} is not a non-negative integer")
                })?;
            }
        }
    }
    if n != slots.len() {
        return Err(format!(
            "expected {} tab-separated fields, found {n}",
            slots.len()
        ));
    }
    if let Some(field) = alignment_field {
        parse_alignment(field, &pair.source, &pair.target, &mut pair.alignment)?;
    }
    Ok(())
}

fn check_phrase<'a>(field: &'a str, column: &str) -> std::result::Result<&'a str, String> {
    if field.is_empty() {
        return Err(format!("empty {column} phrase"));
    }
    if field.starts_with(' ') || field.ends_with(' ') || field.contains("  ") {
        return Err(format!(
            "{column} phrase {field:?}: tokens must be separated by single spaces"
        ));
    }
    Ok(field)
}

/// The links of a word alignment: `i-j` pairs of 0-based token indices, separated by spaces or
/// tabs. The one parser of links, for corpora, tables and intermediate files; each caller
/// checks the indices against its own lengths. A link that is not `i-j` comes back as `Err`.
///
/// # Examples
/// ```
/// let links: Vec<_> = baler::table::split_links("0-1 2-0\t1-1").collect();
/// assert_eq!(links, [Ok((0, 1)), Ok((2, 0)), Ok((1, 1))]);
/// assert_eq!(baler::table::split_links("0:1").next(), Some(Err("0:1")));
/// ```
pub fn split_links(
    text: &str,
) -> impl Iterator<Item = std::result::Result<(usize, usize), &str>> + '_ {
    text.split([' ', '\t'])
        .filter(|t| !t.is_empty())
        .map(|link| {
            let (i, j) = link.split_once('-').ok_or(link)?;
            Ok((i.parse().map_err(|_| link)?, j.parse().map_err(|_| link)?))
        })
}

/// Parses space-separated `i-j` links and checks them against the phrase lengths.
///
/// # Examples
/// ```
/// let mut links = Vec::new();
/// baler::table::parse_alignment("0-1 1-0", "la nave", "the ship", &mut links).unwrap();
/// assert_eq!(links, [(0, 1), (1, 0)]);
/// assert!(baler::table::parse_alignment("2-0", "la nave", "the ship", &mut links).is_err());
/// ```
pub fn parse_alignment(
    field: &str,
    source: &str,
    target: &str,
    links: &mut Vec<(u16, u16)>,
) -> std::result::Result<(), String> {
    links.clear();
    if field.is_empty() {
        return Ok(());
    }
    let source_len = source.split(' ').count();
    let target_len = target.split(' ').count();
    let bad = |link: &str| format!("bad link {link:?}: expected i-j with 0-based token indices");
    // In a table the links are separated by single spaces.
    if field.split(' ').any(str::is_empty) || field.contains('\t') {
        return Err(bad(""));
    }
    for link in split_links(field) {
        let (i, j) = link.map_err(bad)?;
        if i >= source_len || j >= target_len {
            return Err(format!(
                "bad link \"{i}-{j}\": outside a {source_len}-token source and {target_len}-token target"
            ));
        }
        links.push((i as u16, j as u16));
    }
    Ok(())
}

/// Writes an interchange TSV table.
///
/// # Examples
/// ```
/// use baler::table::{Header, PhrasePair, TsvWriter};
/// let mut header = Header::default();
/// header.schema.scores.push("p_t_given_s".into());
/// let mut w = TsvWriter::new(Vec::new(), &header).unwrap();
/// w.write_pair(&PhrasePair { source: "muelle".into(), target: "pier".into(),
///                            scores: vec![0.25], ..Default::default() }).unwrap();
/// let text = String::from_utf8(w.into_inner()).unwrap();
/// assert_eq!(text, "source\ttarget\tp_t_given_s\nmuelle\tpier\t0.25\n");
/// ```
pub struct TsvWriter<W> {
    out: W,
    schema: Schema,
    line: String,
}

impl<W: Write> TsvWriter<W> {
    /// Writes the metadata lines and the header.
    pub fn new(mut out: W, header: &Header) -> std::io::Result<TsvWriter<W>> {
        let mut text = String::new();
        for (k, v) in header.metadata.entries() {
            let _ = writeln!(text, "# {k}={v}");
        }
        text.push_str(&header.schema.header_line());
        text.push('\n');
        out.write_all(text.as_bytes())?;
        Ok(TsvWriter {
            out,
            schema: header.schema.clone(),
            line: String::new(),
        })
    }

    /// A writer of records with `schema`'s columns and no metadata or header line (for
    /// output that only ever goes to people or to `cut`, such as `baler lookup --no-header`).
    pub fn headless(out: W, schema: &Schema) -> TsvWriter<W> {
        TsvWriter {
            out,
            schema: schema.clone(),
            line: String::new(),
        }
    }

    /// Writes one record; its columns must match the schema given to [`TsvWriter::new`].
    pub fn write_pair(&mut self, pair: &PhrasePair) -> std::io::Result<()> {
        self.write_row(pair, None)
    }

    /// Writes one record whose alignment column is `alignment`, already in the column's form
    /// (`i-j` links joined by spaces, as [`write_alignment`] writes them); `pair.alignment` is
    /// not read. For a writer that holds each distinct alignment's text once.
    pub fn write_pair_aligned(
        &mut self,
        pair: &PhrasePair,
        alignment: &str,
    ) -> std::io::Result<()> {
        self.write_row(pair, Some(alignment))
    }

    fn write_row(&mut self, pair: &PhrasePair, alignment: Option<&str>) -> std::io::Result<()> {
        debug_assert_eq!(pair.scores.len(), self.schema.scores.len());
        debug_assert_eq!(pair.counts.len(), self.schema.counts.len());
        let line = &mut self.line;
        line.clear();
        line.push_str(&pair.source);
        line.push('\t');
        line.push_str(&pair.target);
        if self.schema.alignment {
            line.push('\t');
            match alignment {
                Some(text) => line.push_str(text),
                None => write_alignment(line, &pair.alignment),
            }
        }
        for &s in &pair.scores {
            line.push('\t');
            format_score(line, s);
        }
        for &c in &pair.counts {
            line.push('\t');
            format_count(line, c);
        }
        line.push('\n');
        self.out.write_all(line.as_bytes())
    }

    /// Writes a record read with [`TsvReader::read_raw`] from a table in canonical column
    /// order ([`TsvReader::canonical_columns`]), followed by `counts`: the count columns this
    /// writer's schema has after the reader's.
    pub fn write_extended(&mut self, line: &str, counts: &[u64]) -> std::io::Result<()> {
        let out = &mut self.line;
        out.clear();
        out.push_str(line);
        for &c in counts {
            out.push('\t');
            format_count(out, c);
        }
        out.push('\n');
        self.out.write_all(out.as_bytes())
    }

    /// The underlying writer.
    pub fn into_inner(self) -> W {
        self.out
    }

    /// Mutable access to the underlying writer (e.g. to flush it).
    pub fn get_mut(&mut self) -> &mut W {
        &mut self.out
    }
}

/// Appends links as space-separated `i-j`.
pub fn write_alignment(out: &mut String, links: &[(u16, u16)]) {
    for (k, (i, j)) in links.iter().enumerate() {
        if k > 0 {
            out.push(' ');
        }
        let mut digits = itoa::Buffer::new();
        out.push_str(digits.format(*i));
        out.push('-');
        out.push_str(digits.format(*j));
    }
}

#[cfg(test)]
mod tests;
