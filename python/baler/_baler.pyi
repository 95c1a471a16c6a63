"""Type hints of the native module ``baler._baler`` (re-exported by ``baler``)."""

from os import PathLike
from typing import Dict, Iterator, List, Optional, Tuple, Union

__version__: str

class Error(Exception):
    """Base class of every error baler raises."""

class CorruptTableError(Error):
    """The file is damaged or not a packed baler table."""

class FileAccessError(Error):
    """The operating system refused to open or read the file."""

class InvalidArgumentError(Error):
    """An argument cannot be used (for example ``max_len=0``)."""

class TranslationOption:
    """One translation option of a source phrase."""

    @property
    def target(self) -> str:
        """The target phrase (words separated by single spaces)."""
    @property
    def target_ids(self) -> List[int]:
        """The target phrase as word ids of the table's target vocabulary."""
    @property
    def scores(self) -> Dict[str, float]:
        """Scores by column name, in the table's column order (quantized values)."""
    @property
    def counts(self) -> Dict[str, int]:
        """Exact counts by column name; empty when the table stores none."""
    @property
    def alignment(self) -> List[Tuple[int, int]]:
        """Word links ``(source index, target index)``; empty when not stored."""

class Pair:
    """One phrase pair, as iterating over a :class:`Table` yields it."""

    @property
    def source(self) -> str:
        """The source phrase."""
    @property
    def target(self) -> str:
        """The target phrase."""
    @property
    def scores(self) -> Dict[str, float]:
        """Scores by column name."""
    @property
    def counts(self) -> Dict[str, int]:
        """Exact counts by column name."""
    @property
    def alignment(self) -> List[Tuple[int, int]]:
        """Word links ``(source index, target index)``."""

class Span:
    """A sub-phrase ``tokens[start:end]`` of a sentence found in the table."""

    @property
    def start(self) -> int:
        """First token."""
    @property
    def end(self) -> int:
        """One past the last token."""
    @property
    def options(self) -> List[TranslationOption]:
        """The options of the sub-phrase, best first."""

class PairIterator(Iterator[Pair]):
    """Iterator over every pair of a table."""

    def __iter__(self) -> "PairIterator": ...
    def __next__(self) -> Pair: ...

class Table:
    """A packed phrase table. Shared freely between threads; lookups release the GIL."""

    def __init__(self, path: Union[str, "PathLike[str]"]) -> None:
        """Opens (memory-maps) the packed table at ``path``.

        Raises :class:`FileAccessError` when the file cannot be read and
        :class:`CorruptTableError` when it is not a valid table."""
    @staticmethod
    def from_bytes(data: bytes) -> "Table":
        """Opens a packed table held in memory; the bytes are copied."""
    def lookup(self, phrase: str) -> List[TranslationOption]:
        """The options of ``phrase`` (tokens separated by single spaces), best first; an
        empty list when the phrase is not in the table."""
    def spans(self, tokens: List[str], max_len: int = 7) -> List[Span]:
        """Every sub-phrase of ``tokens`` of at most ``max_len`` tokens that is in the table,
        ordered by start then length."""
    @property
    def score_names(self) -> List[str]:
        """Score column names, in order."""
    @property
    def count_names(self) -> List[str]:
        """Count column names, in order."""
    @property
    def has_alignment(self) -> bool:
        """Whether options carry word alignments."""
    @property
    def sources(self) -> int:
        """The number of distinct source phrases."""
    @property
    def vocabulary_size(self) -> int:
        """The number of words in the target vocabulary."""
    def word(self, id: int) -> Optional[str]:
        """The text of target word ``id``, or ``None`` outside the vocabulary."""
    def __len__(self) -> int:
        """The number of phrase pairs."""
    def __iter__(self) -> PairIterator:
        """Every phrase pair, in source byte order, options in stored order."""
