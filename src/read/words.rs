//! Target word ids and the target vocabulary, for callers that keep their own word tables
//! (language models, embedded decoders) and want ids instead of text.

use super::{Table, TranslationOption};

impl<'a> TranslationOption<'a> {
    /// The target phrase as word ids of the table's target vocabulary (see [`Table::word`]).
    ///
    /// # Examples
    /// ```
    /// # fn main() -> baler::Result<()> {
    /// # let dir = tempfile::tempdir().unwrap();
    /// # let path = dir.path().join("t.bale");
    /// let tsv = "source\ttarget\nla grúa\tthe crane\n";
    /// baler::pack::pack_tsv(tsv.as_bytes(), "t.tsv", &path, &Default::default())?;
    /// let table = baler::Table::open(&path)?;
    /// let options = table.lookup("la grúa")?;
    /// let option = options.get(0).unwrap();
    /// let words: Vec<&str> = option.target_ids().iter().map(|&id| table.word(id).unwrap()).collect();
    /// assert_eq!(words, ["the", "crane"]);
    /// # Ok(()) }
    /// ```
    pub fn target_ids(&self) -> &'a [u32] {
        let ends = &self.options.id_ends;
        let start = if self.index == 0 {
            0
        } else {
            ends[self.index - 1]
        };
        &self.options.ids[start..ends[self.index]]
    }
}

impl Table {
    /// The text of target word `id`; `None` when `id` is outside the vocabulary or its entry
    /// is damaged.
    pub fn word(&self, id: u32) -> Option<&str> {
        self.sections.word(self.data(), u64::from(id)).ok()
    }

    /// The number of words in the target vocabulary (ids run from 0 to this size minus one).
    pub fn vocabulary_size(&self) -> usize {
        self.sections.words as usize
    }
}
