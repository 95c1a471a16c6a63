//! `baler._baler`: the Python module of baler's packed-table reader, re-exported by the
//! `baler` package (`python/baler/__init__.py`; type hints in `python/baler/_baler.pyi`).
//!
//! Lookups and span walks run with the GIL released; a table is shared by any number of
//! Python threads, as in Rust.

use std::path::PathBuf;
use std::sync::Arc;

use pyo3::create_exception;
use pyo3::exceptions::PyException;
use pyo3::prelude::*;
use pyo3::types::PyDict;

use baler::read::{Options, PairIter};
use baler::table::PhrasePair;

create_exception!(
    baler,
    Error,
    PyException,
    "Base class of every error baler raises."
);
create_exception!(
    baler,
    CorruptTableError,
    Error,
    "The file is damaged or not a packed baler table."
);
create_exception!(
    baler,
    FileAccessError,
    Error,
    "The operating system refused to open or read the file."
);
create_exception!(
    baler,
    InvalidArgumentError,
    Error,
    "An argument cannot be used (for example `max_len=0`)."
);

fn to_py(e: baler::Error) -> PyErr {
    let message = e.to_string();
    match e {
        baler::Error::Corrupt { .. } => CorruptTableError::new_err(message),
        baler::Error::Io { .. } => FileAccessError::new_err(message),
        baler::Error::InvalidArgument { .. } => InvalidArgumentError::new_err(message),
        _ => Error::new_err(message),
    }
}

/// Column names shared by a table and every option it returns.
struct Columns {
    scores: Vec<String>,
    counts: Vec<String>,
}

/// A packed phrase table, opened from a file (memory-mapped) or from bytes.
///
/// Shared freely between threads; lookups release the GIL.
#[pyclass(module = "baler", frozen)]
struct Table {
    table: Arc<baler::Table>,
    columns: Arc<Columns>,
}

/// One translation option of a source phrase.
#[pyclass(module = "baler", frozen)]
struct TranslationOption {
    /// The target phrase (words separated by single spaces).
    #[pyo3(get)]
    target: String,
    /// The target phrase as word ids of the table's target vocabulary (see `Table.word`).
    #[pyo3(get)]
    target_ids: Vec<u32>,
    /// Word links `(source index, target index)`; empty when the table stores none.
    #[pyo3(get)]
    alignment: Vec<(u16, u16)>,
    score_values: Vec<f64>,
    count_values: Vec<u64>,
    columns: Arc<Columns>,
}

/// One phrase pair of a table, as iteration over the table yields it.
#[pyclass(module = "baler", frozen)]
struct Pair {
    /// The source phrase.
    #[pyo3(get)]
    source: String,
    /// The target phrase.
    #[pyo3(get)]
    target: String,
    /// Word links `(source index, target index)`; empty when the table stores none.
    #[pyo3(get)]
    alignment: Vec<(u16, u16)>,
    score_values: Vec<f64>,
    count_values: Vec<u64>,
    columns: Arc<Columns>,
}

/// A sub-phrase `tokens[start:end]` of a sentence found in the table, with its options.
#[pyclass(module = "baler", frozen)]
struct Span {
    /// First token.
    #[pyo3(get)]
    start: usize,
    /// One past the last token.
    #[pyo3(get)]
    end: usize,
    /// The options of the sub-phrase, best first.
    #[pyo3(get)]
    options: Vec<Py<TranslationOption>>,
}

fn name_dict<'py, T: IntoPyObject<'py> + Copy>(
    py: Python<'py>,
    names: &[String],
    values: &[T],
) -> PyResult<Bound<'py, PyDict>> {
    let dict = PyDict::new(py);
    for (name, &value) in names.iter().zip(values) {
        dict.set_item(name, value)?;
    }
    Ok(dict)
}

/// The `scores` and `counts` getters of a class with `columns`, `score_values` and
/// `count_values` (`TranslationOption`, `Pair`), and its `__repr__` from `$repr`.
macro_rules! scored_methods {
    ($class:ty, |$this:ident| $repr:expr) => {
        #[pymethods]
        impl $class {
            /// Scores by column name, in the table's column order.
            #[getter]
            fn scores<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyDict>> {
                name_dict(py, &self.columns.scores, &self.score_values)
            }

            /// Exact counts by column name (empty when the table stores none).
            #[getter]
            fn counts<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyDict>> {
                name_dict(py, &self.columns.counts, &self.count_values)
            }

            fn __repr__(&self) -> String {
                let $this = self;
                $repr
            }
        }
    };
}

scored_methods!(TranslationOption, |o| format!(
    "TranslationOption(target={:?}, scores={:?})",
    o.target, o.score_values
));
scored_methods!(Pair, |p| format!(
    "Pair(source={:?}, target={:?})",
    p.source, p.target
));

#[pymethods]
impl Span {
    fn __repr__(&self) -> String {
        format!(
            "Span(start={}, end={}, options=<{} options>)",
            self.start,
            self.end,
            self.options.len()
        )
    }
}

fn option_list(
    py: Python<'_>,
    options: &Options,
    columns: &Arc<Columns>,
) -> PyResult<Vec<Py<TranslationOption>>> {
    options
        .iter()
        .map(|o| {
            Py::new(
                py,
                TranslationOption {
                    target: o.target().to_string(),
                    target_ids: o.target_ids().to_vec(),
                    alignment: o.alignment().to_vec(),
                    score_values: o.scores().to_vec(),
                    count_values: o.counts().to_vec(),
                    columns: columns.clone(),
                },
            )
        })
        .collect()
}

fn wrap(table: baler::Table) -> Table {
    let schema = table.schema();
    let columns = Columns {
        scores: schema.scores.clone(),
        counts: schema.counts.iter().map(|c| c.name().to_string()).collect(),
    };
    Table {
        table: Arc::new(table),
        columns: Arc::new(columns),
    }
}

#[pymethods]
impl Table {
    /// Opens the packed table at `path` (memory-mapped; the file must not be modified in place
    /// while it is open).
    #[new]
    fn new(py: Python<'_>, path: PathBuf) -> PyResult<Table> {
        py.detach(|| baler::Table::open(&path))
            .map(wrap)
            .map_err(to_py)
    }

    /// Opens a packed table held in memory; the bytes are copied.
    #[staticmethod]
    fn from_bytes(py: Python<'_>, data: &[u8]) -> PyResult<Table> {
        let copy = data.to_vec();
        py.detach(|| baler::Table::from_bytes(copy))
            .map(wrap)
            .map_err(to_py)
    }

    /// The options of `phrase` (tokens separated by single spaces), best first; an empty list
    /// when the phrase is not in the table.
    fn lookup(&self, py: Python<'_>, phrase: &str) -> PyResult<Vec<Py<TranslationOption>>> {
        let options = py.detach(|| self.table.lookup(phrase)).map_err(to_py)?;
        option_list(py, &options, &self.columns)
    }

    /// Every sub-phrase `tokens[start:end]` of at most `max_len` tokens that is in the table,
    /// ordered by start then length.
    #[pyo3(signature = (tokens, max_len = 7))]
    fn spans(&self, py: Python<'_>, tokens: Vec<String>, max_len: usize) -> PyResult<Vec<Span>> {
        if max_len == 0 {
            return Err(InvalidArgumentError::new_err("max_len must be at least 1"));
        }
        let spans = py
            .detach(|| {
                let words: Vec<&str> = tokens.iter().map(String::as_str).collect();
                self.table.spans(&words, max_len)
            })
            .map_err(to_py)?;
        spans
            .into_iter()
            .map(|s| {
                Ok(Span {
                    start: s.start,
                    end: s.end,
                    options: option_list(py, &s.options, &self.columns)?,
                })
            })
            .collect()
    }

    /// Score column names, in order.
    #[getter]
    fn score_names(&self) -> Vec<String> {
        self.columns.scores.clone()
    }

    /// Count column names, in order (empty when the table stores no counts).
    #[getter]
    fn count_names(&self) -> Vec<String> {
        self.columns.counts.clone()
    }

    /// Whether options carry word alignments.
    #[getter]
    fn has_alignment(&self) -> bool {
        self.table.schema().alignment
    }

    /// The number of distinct source phrases.
    #[getter]
    fn sources(&self) -> u64 {
        self.table.sources()
    }

    /// The number of words in the target vocabulary.
    #[getter]
    fn vocabulary_size(&self) -> usize {
        self.table.vocabulary_size()
    }

    /// The text of target word `id`, or `None` outside the vocabulary.
    fn word(&self, id: u32) -> Option<String> {
        self.table.word(id).map(str::to_string)
    }

    /// The number of phrase pairs.
    fn __len__(&self) -> usize {
        self.table.pairs() as usize
    }

    /// Every phrase pair, in source byte order, options in stored order.
    fn __iter__(&self) -> PairIterator {
        PairIterator {
            cursor: PairCursor::new(self.table.clone(), |t| t.pairs_iter()),
            columns: self.columns.clone(),
        }
    }

    fn __repr__(&self) -> String {
        format!(
            "Table({:?}, pairs={}, scores={:?})",
            self.table.path().display().to_string(),
            self.table.pairs(),
            self.columns.scores
        )
    }
}

type Pairs<'a> = PairIter<'a>;

self_cell::self_cell!(
    /// A pair iterator together with the table it borrows from.
    struct PairCursor {
        owner: Arc<baler::Table>,
        #[not_covariant]
        dependent: Pairs,
    }
);

/// Iterator over every pair of a table; see `Table.__iter__`.
#[pyclass(module = "baler", unsendable)]
struct PairIterator {
    cursor: PairCursor,
    columns: Arc<Columns>,
}

#[pymethods]
impl PairIterator {
    fn __iter__(slf: PyRef<'_, Self>) -> PyRef<'_, Self> {
        slf
    }

    fn __next__(&mut self) -> PyResult<Option<Pair>> {
        let next: Option<baler::Result<PhrasePair>> =
            self.cursor.with_dependent_mut(|_, pairs| pairs.next());
        match next {
            None => Ok(None),
            Some(Err(e)) => Err(to_py(e)),
            Some(Ok(p)) => Ok(Some(Pair {
                source: p.source,
                target: p.target,
                alignment: p.alignment,
                score_values: p.scores,
                count_values: p.counts,
                columns: self.columns.clone(),
            })),
        }
    }
}

/// The native part of the `baler` package.
#[pymodule]
fn _baler(m: &Bound<'_, PyModule>) -> PyResult<()> {
    let py = m.py();
    m.add_class::<Table>()?;
    m.add_class::<TranslationOption>()?;
    m.add_class::<Pair>()?;
    m.add_class::<Span>()?;
    m.add_class::<PairIterator>()?;
    m.add("Error", py.get_type::<Error>())?;
    m.add("CorruptTableError", py.get_type::<CorruptTableError>())?;
    m.add("FileAccessError", py.get_type::<FileAccessError>())?;
    m.add(
        "InvalidArgumentError",
        py.get_type::<InvalidArgumentError>(),
    )?;
    m.add("__version__", env!("CARGO_PKG_VERSION"))?;
    Ok(())
}
