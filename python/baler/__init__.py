"""Read packed baler phrase tables (``.bale`` files) from Python.

>>> import baler
>>> table = baler.Table("demo-out/toolshed.bale")          # doctest: +SKIP
>>> [o.target for o in table.lookup("the workshop")]        # doctest: +SKIP
['el taller']

Lookups and span walks release the GIL, so one table can serve a thread pool. Errors raise
subclasses of :class:`baler.Error`.
"""

from baler._baler import (
    CorruptTableError,
    Error,
    FileAccessError,
    InvalidArgumentError,
    Pair,
    PairIterator,
    Span,
    Table,
    TranslationOption,
    __version__,
)

__all__ = [
    "CorruptTableError",
    "Error",
    "FileAccessError",
    "InvalidArgumentError",
    "Pair",
    "PairIterator",
    "Span",
    "Table",
    "TranslationOption",
    "__version__",
]
