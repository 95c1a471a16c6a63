//! One view of a phrase table for measuring, whether it is interchange TSV or packed.

use std::collections::HashMap;
use std::io::BufRead;
use std::path::Path;

use crate::error::{Error, Result};
use crate::files;
use crate::read::Table;
use crate::table::{PhrasePair, TsvReader};

/// One option of a source phrase as the measures see it: the target and its probability.
#[derive(Clone, Debug, PartialEq)]
pub struct Choice {
    /// The target phrase.
    pub target: String,
    /// The value of the probability column (see [`MeasuredTable::open`]).
    pub probability: f64,
}

/// A source phrase of the table found in a sentence: tokens `start..end`, with its targets when
/// they were asked for.
#[derive(Clone, Debug, PartialEq)]
pub struct FoundSpan {
    /// First token.
    pub start: usize,
    /// One past the last token.
    pub end: usize,
    /// The targets (empty unless asked for).
    pub targets: Vec<String>,
}

enum Store {
    /// A packed table, looked up through its index; `column` is the probability's score index.
    Packed { table: Box<Table>, column: usize },
    /// A TSV table held in memory: sources in byte order with their options, and an index.
    Loaded {
        sources: Vec<(String, Vec<Choice>)>,
        index: HashMap<String, usize>,
        /// Whether the file listed sources grouped and in byte order.
        sorted: bool,
    },
}

/// A phrase table that answers "what are the options of source phrase s", for TSV (loaded into
/// memory) and packed tables (looked up in place) alike.
///
/// # Examples
/// ```
/// use baler::measure::MeasuredTable;
/// let tsv = "source\ttarget\tp_t_given_s\nla llave\tthe key\t0.8\nla llave\tthe wrench\t0.2\n";
/// let table = MeasuredTable::from_tsv(tsv.as_bytes(), "tools.tsv", "p_t_given_s")?;
/// let options = table.options("la llave")?;
/// assert_eq!(options.len(), 2);
/// assert_eq!(options[1].target, "the wrench");
/// assert!(table.options("el martillo")?.is_empty());
/// # Ok::<(), baler::Error>(())
/// ```
pub struct MeasuredTable {
    name: String,
    /// The score column read as the probability.
    column: String,
    file_bytes: u64,
    store: Store,
    longest_source: usize,
}

impl MeasuredTable {
    /// Opens the table at `path`: a packed table by its `.bale` extension or its magic bytes,
    /// interchange TSV otherwise (`.gz`/`.zst` read transparently; loaded into memory).
    /// `column` names the score column holding p(target | source), normally `p_t_given_s`.
    ///
    /// # Errors
    /// Unreadable or malformed files, or a table without the column.
    pub fn open(path: &Path, column: &str) -> Result<MeasuredTable> {
        let name = path.display().to_string();
        let file_bytes = std::fs::metadata(path)
            .map_err(|e| Error::io(path, "reading", e))?
            .len();
        if is_packed(path) {
            let table = Table::open(path)?;
            let column_index = table.schema().score_index(column).ok_or_else(|| {
                Error::input(
                    &name,
                    0,
                    format!("the table has no score column {column:?}"),
                )
            })?;
            let mut longest = 0;
            for source in table.source_phrases() {
                longest = longest.max(source?.split(' ').count());
            }
            return Ok(MeasuredTable {
                name,
                column: column.to_string(),
                file_bytes,
                store: Store::Packed {
                    table: Box::new(table),
                    column: column_index,
                },
                longest_source: longest,
            });
        }
        let mut loaded = MeasuredTable::from_tsv(files::open_input(path)?, &name, column)?;
        loaded.file_bytes = file_bytes;
        Ok(loaded)
    }

    /// Loads an interchange TSV table from `input` (named `name` in messages); its size in
    /// bytes is taken as the bytes read.
    pub fn from_tsv<R: BufRead>(input: R, name: &str, column: &str) -> Result<MeasuredTable> {
        let mut counted = CountingReader {
            inner: input,
            bytes: 0,
        };
        let mut reader = TsvReader::new(&mut counted, name)?;
        let column_index = reader.header().schema.score_index(column).ok_or_else(|| {
            Error::input(name, 0, format!("the table has no score column {column:?}"))
        })?;
        let mut index: HashMap<String, usize> = HashMap::new();
        let mut sources: Vec<(String, Vec<Choice>)> = Vec::new();
        let mut pair = PhrasePair::default();
        let mut sorted = true;
        let mut last = String::new();
        while reader.read_into(&mut pair)? {
            if pair.source != last {
                if pair.source < last || index.contains_key(pair.source.as_str()) {
                    sorted = false;
                }
                last.clone_from(&pair.source);
            }
            let choice = Choice {
                target: std::mem::take(&mut pair.target),
                probability: pair.scores[column_index],
            };
            let slot = match index.get(pair.source.as_str()) {
                Some(&i) => i,
                None => {
                    index.insert(pair.source.clone(), sources.len());
                    sources.push((pair.source.clone(), Vec::new()));
                    sources.len() - 1
                }
            };
            sources[slot].1.push(choice);
        }
        drop(reader);
        sources.sort_by(|a, b| a.0.cmp(&b.0));
        for (i, (source, _)) in sources.iter().enumerate() {
            index.insert(source.clone(), i);
        }
        let longest_source = sources
            .iter()
            .map(|(s, _)| s.split(' ').count())
            .max()
            .unwrap_or(0);
        Ok(MeasuredTable {
            name: name.to_string(),
            column: column.to_string(),
            file_bytes: counted.bytes,
            store: Store::Loaded {
                sources,
                index,
                sorted,
            },
            longest_source,
        })
    }

    /// The same table under another name (reports show it instead of the path).
    pub fn with_name(mut self, name: impl Into<String>) -> MeasuredTable {
        self.name = name.into();
        self
    }

    /// The name given when opening (the path).
    pub fn name(&self) -> &str {
        &self.name
    }

    /// The score column read as p(target | source) (given when opening).
    pub fn column(&self) -> &str {
        &self.column
    }

    /// Size of the file in bytes.
    pub fn file_bytes(&self) -> u64 {
        self.file_bytes
    }

    /// Whether the table is packed.
    pub fn is_packed(&self) -> bool {
        matches!(self.store, Store::Packed { .. })
    }

    /// Whether a packing or pruning pass can stream it: packed, or a TSV whose sources come
    /// grouped and in byte order.
    pub fn is_sorted_by_source(&self) -> bool {
        match &self.store {
            Store::Packed { .. } => true,
            Store::Loaded { sorted, .. } => *sorted,
        }
    }

    /// Tokens in the longest source phrase.
    pub fn longest_source(&self) -> usize {
        self.longest_source
    }

    /// The options of `source` in stored order (empty when the table does not have it).
    pub fn options(&self, source: &str) -> Result<Vec<Choice>> {
        match &self.store {
            Store::Packed { table, column } => Ok(table
                .lookup(source)?
                .iter()
                .map(|o| Choice {
                    target: o.target().to_string(),
                    probability: o.scores()[*column],
                })
                .collect()),
            Store::Loaded { sources, index, .. } => Ok(index
                .get(source)
                .map(|&i| sources[i].1.clone())
                .unwrap_or_default()),
        }
    }

    /// Calls `visit` with every source phrase, in byte order, and its options.
    pub fn for_each_source<F>(&self, mut visit: F) -> Result<()>
    where
        F: FnMut(&str, &[Choice]) -> Result<()>,
    {
        match &self.store {
            Store::Loaded { sources, .. } => {
                for (source, choices) in sources {
                    visit(source, choices)?;
                }
                Ok(())
            }
            Store::Packed { table, column } => {
                let mut current = String::new();
                let mut group: Vec<Choice> = Vec::new();
                for pair in table.pairs_iter() {
                    let pair = pair?;
                    if pair.source != current && !group.is_empty() {
                        visit(&current, &group)?;
                        group.clear();
                    }
                    if pair.source != current {
                        current = pair.source;
                    }
                    group.push(Choice {
                        target: pair.target,
                        probability: pair.scores[*column],
                    });
                }
                if !group.is_empty() {
                    visit(&current, &group)?;
                }
                Ok(())
            }
        }
    }

    /// Every sub-sequence of `tokens` of at most `max_len` tokens that is a source phrase of
    /// the table, ordered by start then length; with `with_targets`, each with its targets.
    ///
    /// # Examples
    /// ```
    /// use baler::measure::MeasuredTable;
    /// let tsv = "source\ttarget\tp_t_given_s\nla\tthe\t1\nla llave\tthe key\t1\n";
    /// let table = MeasuredTable::from_tsv(tsv.as_bytes(), "t.tsv", "p_t_given_s")?;
    /// let spans = table.spans(&["la", "llave", "roja"], 7, false)?;
    /// let found: Vec<(usize, usize)> = spans.iter().map(|s| (s.start, s.end)).collect();
    /// assert_eq!(found, [(0, 1), (0, 2)]);
    /// # Ok::<(), baler::Error>(())
    /// ```
    pub fn spans(
        &self,
        tokens: &[&str],
        max_len: usize,
        with_targets: bool,
    ) -> Result<Vec<FoundSpan>> {
        match &self.store {
            Store::Packed { table, .. } if !with_targets => {
                // the index alone answers whether a span is a source: no block is decoded
                let mut found = Vec::new();
                for_each_subphrase(tokens, max_len, |start, end, key| {
                    if table.source_ordinal(key)?.is_some() {
                        found.push(FoundSpan {
                            start,
                            end,
                            targets: Vec::new(),
                        });
                    }
                    Ok(())
                })?;
                Ok(found)
            }
            Store::Packed { table, .. } => Ok(table
                .spans(tokens, max_len)?
                .into_iter()
                .map(|s| FoundSpan {
                    start: s.start,
                    end: s.end,
                    targets: s.options.iter().map(|o| o.target().to_string()).collect(),
                })
                .collect()),
            Store::Loaded { sources, index, .. } => {
                let mut found = Vec::new();
                for_each_subphrase(tokens, max_len, |start, end, key| {
                    if let Some(&i) = index.get(key) {
                        let targets = if with_targets {
                            sources[i].1.iter().map(|c| c.target.clone()).collect()
                        } else {
                            Vec::new()
                        };
                        found.push(FoundSpan {
                            start,
                            end,
                            targets,
                        });
                    }
                    Ok(())
                })?;
                Ok(found)
            }
        }
    }
}

/// Calls `f(start, end, phrase)` for every sub-phrase of at most `max_len` tokens, by start
/// then length, building each phrase from the previous one.
fn for_each_subphrase(
    tokens: &[&str],
    max_len: usize,
    mut f: impl FnMut(usize, usize, &str) -> Result<()>,
) -> Result<()> {
    let mut key = String::new();
    for start in 0..tokens.len() {
        key.clear();
        for end in start + 1..=(start + max_len).min(tokens.len()) {
            if end > start + 1 {
                key.push(' ');
            }
            key.push_str(tokens[end - 1]);
            f(start, end, &key)?;
        }
    }
    Ok(())
}

pub use crate::read::is_packed;

struct CountingReader<R> {
    inner: R,
    bytes: u64,
}

impl<R: BufRead> std::io::Read for CountingReader<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = self.inner.read(buf)?;
        self.bytes += n as u64;
        Ok(n)
    }
}

impl<R: BufRead> BufRead for CountingReader<R> {
    fn fill_buf(&mut self) -> std::io::Result<&[u8]> {
        self.inner.fill_buf()
    }
    fn consume(&mut self, amt: usize) {
        self.bytes += amt as u64;
        self.inner.consume(amt);
    }
}
