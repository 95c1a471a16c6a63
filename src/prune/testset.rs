//! The source phrases of a test text: what `--keep-test-phrases` keeps, so that a table can be
//! cut down to what decoding that text can use.

use std::path::Path;

use rustc_hash::FxHashSet;

use crate::error::Result;
use crate::files;

/// Longest phrase collected from the test text (longer source phrases are never kept).
pub const MAX_TEST_PHRASE: usize = 16;

/// Every token n-gram (up to [`MAX_TEST_PHRASE`] tokens) of a tokenized text.
///
/// ```
/// let p = baler::prune::testset::TestPhrases::from_text("le bac part\nau quai");
/// assert!(p.contains("bac part") && p.contains("quai"));
/// assert!(!p.contains("part au"));
/// ```
#[derive(Clone, Debug, Default)]
pub struct TestPhrases {
    phrases: FxHashSet<String>,
}

impl TestPhrases {
    /// Collects the phrases of `text`, one sentence a line.
    pub fn from_text(text: &str) -> TestPhrases {
        let mut p = TestPhrases::default();
        for line in text.lines() {
            p.add_line(line);
        }
        p
    }

    /// Reads the phrases of the file at `path` (`.gz`/`.zst` decompressed).
    pub fn from_path(path: &Path) -> Result<TestPhrases> {
        let name = path.to_string_lossy().into_owned();
        let mut input = files::open_input(path)?;
        let mut p = TestPhrases::default();
        let mut line = String::new();
        let mut n = 0;
        while files::read_line(&mut input, &mut line, &name, n + 1)? {
            n += 1;
            p.add_line(&line);
        }
        Ok(p)
    }

    fn add_line(&mut self, line: &str) {
        let tokens: Vec<&str> = line.split(' ').filter(|t| !t.is_empty()).collect();
        for i in 0..tokens.len() {
            for j in i + 1..=(i + MAX_TEST_PHRASE).min(tokens.len()) {
                self.phrases.insert(tokens[i..j].join(" "));
            }
        }
    }

    /// Whether `source` occurs in the text.
    pub fn contains(&self, source: &str) -> bool {
        self.phrases.contains(source)
    }

    /// Distinct phrases collected.
    pub fn len(&self) -> usize {
        self.phrases.len()
    }

    /// Whether none were.
    pub fn is_empty(&self) -> bool {
        self.phrases.is_empty()
    }
}
