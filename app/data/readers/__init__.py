"""Read a replication file into a pandas DataFrame.

The format is decided by the file's content (magic bytes for binary formats,
decoding and delimiter sniffing for text) and then cross-checked with the
extension of the name the user gave the file: uploads are stored under their
SHA-256, so the stored path may carry no extension at all.

Every problem with the file itself raises :class:`~app.errors.DataFileError`
with a message written for the person who uploaded it. Library exceptions
never escape, and library warnings are silenced here (they would otherwise
reach the logs of the web app or fail a ``-W error`` test run).

The frame returned always has a default ``RangeIndex``, unique non-blank
string column names (surrounding spaces stripped), at least one row, and
columns of four families only: numbers (``int64``/``float64``/``bool``),
dates and times (``datetime64``), text (pandas' ``str`` dtype) and columns
with no value at all (``float64`` NaN). Stata and SPSS value labels are not
applied: labelled variables hold their numeric codes.

The modules of the package:

- ``table``: :func:`read_table`, the entry point, and the reader of each format;
- ``streaming``: :class:`ReadWhileReceiving`, which parses a text table while an
  upload arrives and otherwise gives way to :func:`read_table`;
- ``detection``: :func:`detect_format`, magic bytes and the extension cross-check;
- ``text_layout``: encoding, delimiter and decimal mark of text tables;
- ``text``, ``statistical``, ``spreadsheet``, ``columnar``, ``rdata``: the
  readers of CSV/TSV, Stata/SPSS/SAS, Excel, Parquet and R files;
- ``frames``: the checks and normalisation every table goes through;
- ``limits``: :class:`ReadLimits` and the decompression-bomb guards;
- ``formats`` and ``messages``: format names and shared wording.
"""

from __future__ import annotations

from app.data.readers.detection import detect_format
from app.data.readers.formats import FORMAT_LABELS, FORMATS
from app.data.readers.limits import ReadLimits
from app.data.readers.streaming import ReadWhileReceiving
from app.data.readers.table import read_table

__all__ = [
    "FORMATS",
    "FORMAT_LABELS",
    "ReadLimits",
    "ReadWhileReceiving",
    "detect_format",
    "read_table",
]
