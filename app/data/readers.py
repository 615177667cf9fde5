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
"""

from __future__ import annotations

import bz2
import codecs
import csv
import io
import itertools
import lzma
import mmap
import re
import unicodedata
import warnings
import zipfile
import zlib
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from app.errors import DataFileError

__all__ = [
    "FORMATS",
    "FORMAT_LABELS",
    "ReadLimits",
    "detect_format",
    "read_table",
]

GiB = 1 << 30
MiB = 1 << 20

FORMATS = ("csv", "tsv", "stata", "spss", "sas", "excel", "parquet", "rds", "rdata")
"""The format names that :func:`detect_format` returns."""

FORMAT_LABELS = {
    "csv": "CSV text",
    "tsv": "tab-separated text",
    "stata": "a Stata file (.dta)",
    "spss": "an SPSS file (.sav)",
    "sas": "a SAS data file (.sas7bdat)",
    "excel": "an Excel workbook (.xlsx)",
    "parquet": "a Parquet file",
    "rds": "an R data file (.rds)",
    "rdata": "an R workspace file (.RData)",
}
"""How each format is named in messages."""

_SUPPORTED = (
    "CSV or TSV text, Stata .dta, SPSS .sav/.zsav, SAS .sas7bdat, Excel .xlsx, "
    "Parquet, and R .rds/.RData"
)


@dataclass(frozen=True)
class ReadLimits:
    """Sizes above which a file is refused before (or instead of) being read.

    Parameters
    ----------
    max_bytes
        Size of the file on disk.
    max_rows, max_columns
        Rows (observations) and columns (variables) of the table.
    max_cells
        Rows times columns. Checked from the file's own metadata before
        reading wherever the format records it (Stata, SPSS, SAS, Parquet).
    max_unpacked_bytes
        Total uncompressed size of the parts of an Excel workbook (from the
        ZIP directory, before anything is inflated) and of the decompressed
        stream of a compressed R file.
    max_compression_ratio
        Largest uncompressed/compressed ratio allowed for a large part
        (over ``ratio_floor_bytes`` uncompressed) of an Excel workbook.
        Real sheets compress 5 to 30 times; a decompression bomb, thousands.
    ratio_floor_bytes
        Parts smaller than this are harmless whatever their ratio.
    """

    max_bytes: int = 2 * GiB
    max_rows: int = 50_000_000
    max_columns: int = 5_000
    max_cells: int = 1_000_000_000
    max_unpacked_bytes: int = 2 * GiB
    max_compression_ratio: float = 100.0
    ratio_floor_bytes: int = 16 * MiB


DEFAULT_LIMITS = ReadLimits()

# ---------------------------------------------------------------------------
# format detection

_HEAD_BYTES = 1 * MiB
_SNIFF_CHARS = 64 * 1024
_SNIFF_RECORDS = 200

_SAS_MAGIC = (
    b"\x00\x00\x00\x00\x00\x00\x00\x00"
    b"\x00\x00\x00\x00\xc2\xea\x81\x60"
    b"\xb3\x14\x11\xcf\xbd\x92\x08\x00"
    b"\x09\xc7\x31\x8c\x18\x1f\x10\x11"
)
_STATA_OLD_VERSIONS = frozenset({104, 105, 108, 110, 111, 112, 113, 114, 115})
_OLE2_MAGIC = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"
_GZIP_MAGIC = b"\x1f\x8b"
_BZIP2_MAGIC = b"BZh"
_XZ_MAGIC = b"\xfd7zXZ\x00"
_RDATA_HEADERS = (b"RDX2\n", b"RDX3\n", b"RDA2\n", b"RDA3\n", b"RDB2\n", b"RDB3\n")
_RDS_HEADER = re.compile(rb"\A(?:X\n\x00\x00\x00[\x02\x03]|B\n[\x02\x03]\x00\x00\x00|A\n[23]\n\d+\n\d+\n)")

# Binary files people upload by mistake, named so that the message helps.
_OTHER_MAGIC: tuple[tuple[bytes, str], ...] = (
    (b"%PDF", "a PDF document"),
    (b"\x89PNG\r\n\x1a\n", "a PNG image"),
    (b"\xff\xd8\xff", "a JPEG image"),
    (b"GIF8", "a GIF image"),
    (b"7z\xbc\xaf\x27\x1c", "a 7-Zip archive"),
    (b"Rar!\x1a\x07", "a RAR archive"),
    (b"\x89HDF\r\n\x1a\n", "an HDF5 file"),
    (b"SQLite format 3\x00", "an SQLite database"),
    (b"\x93NUMPY", "a NumPy array file"),
    (b"\x7fELF", "a program (executable)"),
    (b"HEADER RECORD*******LIBRARY HEADER RECORD!!!!!!!", "a SAS transport file (.xpt)"),
    (b"{\\rtf", "a rich-text (RTF) document"),
    (_OLE2_MAGIC, "an Excel 97-2003 workbook (.xls), a password-protected Excel file, "
     "or another old Microsoft Office file"),
    (_GZIP_MAGIC, "a gzip-compressed file that does not hold R data"),
    (_BZIP2_MAGIC, "a bzip2-compressed file that does not hold R data"),
    (_XZ_MAGIC, "an xz-compressed file that does not hold R data"),
)

_TEXT_EXTENSIONS = frozenset({".csv", ".tsv", ".tab", ".txt"})
_EXTENSION_FORMATS: dict[str, tuple[str, ...]] = {
    **{ext: ("csv", "tsv") for ext in _TEXT_EXTENSIONS},
    ".dta": ("stata",),
    ".sav": ("spss",),
    ".zsav": ("spss",),
    ".sas7bdat": ("sas",),
    ".xlsx": ("excel",),
    ".xlsm": ("excel",),
    ".parquet": ("parquet",),
    ".pq": ("parquet",),
    ".rds": ("rds",),
    ".rdata": ("rdata",),
    ".rda": ("rdata",),
}
_EXTENSION_LABELS = {
    ("csv", "tsv"): "a CSV or TSV text file",
    ("stata",): FORMAT_LABELS["stata"],
    ("spss",): FORMAT_LABELS["spss"],
    ("sas",): FORMAT_LABELS["sas"],
    ("excel",): FORMAT_LABELS["excel"],
    ("parquet",): FORMAT_LABELS["parquet"],
    ("rds",): FORMAT_LABELS["rds"],
    ("rdata",): FORMAT_LABELS["rdata"],
}
_UNSUPPORTED_EXTENSIONS = {
    ".xls": "an Excel 97-2003 workbook (.xls); open it in Excel or LibreOffice and save it as .xlsx or CSV",
    ".ods": "an OpenDocument spreadsheet; save it as .xlsx or CSV",
    ".por": "an SPSS portable file; save it from SPSS as .sav",
    ".xpt": "a SAS transport file; export it from SAS as .sas7bdat or CSV",
    ".json": "a JSON file; export the data as CSV",
    ".xml": "an XML file; export the data as CSV",
    ".html": "a web page; export the data as CSV",
    ".htm": "a web page; export the data as CSV",
    ".pdf": "a PDF document; a table in a PDF has to be exported as CSV first",
    ".doc": "a Word document",
    ".docx": "a Word document",
    ".zip": "a ZIP archive; unpack it and upload the data file inside",
    ".gz": "a compressed file; decompress it and upload the data file inside",
    ".7z": "a 7-Zip archive; unpack it and upload the data file inside",
    ".do": "a Stata do-file (a program, not data); upload the .dta data file",
    ".ado": "a Stata program, not data; upload the .dta data file",
    ".sas": "a SAS program, not data; upload the .sas7bdat data file",
    ".sps": "an SPSS syntax file (a program, not data); upload the .sav data file",
    ".r": "an R script, not data; upload the .rds or .RData data file",
    ".py": "a Python script, not data",
    ".log": "a log file, not data",
    ".smcl": "a Stata log, not data",
}


@dataclass(frozen=True)
class _TextLayout:
    encoding: str  # "utf-8", "utf-16", "utf-32", or a legacy code page
    delimiter: str
    decimal_point: str
    newlines_in_values: bool
    n_header_fields: int


@dataclass(frozen=True)
class _Detected:
    format: str
    text: _TextLayout | None = None
    compression: str | None = None  # for R files: "gzip", "bzip2", "xz" or None


def detect_format(path: Path, *, name: str | None = None) -> str:
    """Decide a file's format from its content, cross-checked with its name.

    Parameters
    ----------
    path
        The file on disk (its own name may carry no extension).
    name
        The file name the user gave; its extension is the one checked. When
        ``None``, the extension of ``path`` is used.

    Returns
    -------
    str
        One of ``"csv"``, ``"tsv"``, ``"stata"``, ``"spss"``, ``"sas"``,
        ``"excel"``, ``"parquet"``, ``"rds"``, ``"rdata"``. Semicolon- and
        pipe-delimited text is ``"csv"``.

    Raises
    ------
    DataFileError
        The file is empty, of no supported format, or its content is not what
        its extension says.
    """
    return _detect(Path(path), _display_name(path, name)).format


def read_table(
    path: Path,
    *,
    name: str | None = None,
    limits: ReadLimits | None = None,
    sheet: str | int | None = None,
    r_object: str | None = None,
) -> pd.DataFrame:
    """Read a data file of any supported format into a DataFrame.

    Parameters
    ----------
    path
        The file on disk.
    name
        The original file name, used for the extension cross-check and in messages.
    limits
        Size limits; :class:`ReadLimits` defaults when ``None``.
    sheet
        Excel only: the sheet to read, by name or by 0-based position. The
        first sheet when ``None``.
    r_object
        R workspace files (.RData) only: the data frame to read when the file
        holds several.

    Returns
    -------
    pandas.DataFrame
        See the module docstring for what the frame is guaranteed to look like.

    Raises
    ------
    DataFileError
        For every problem with the file, with a message that names it.
    """
    path = Path(path)
    limits = limits or DEFAULT_LIMITS
    display = _display_name(path, name)
    size = _file_size(path, display)
    if size > limits.max_bytes:
        raise DataFileError(
            f'"{display}" is {_human_bytes(size)}, more than the {_human_bytes(limits.max_bytes)} '
            "that this server accepts for one data file."
        )
    detected = _detect(path, display)
    reader = _READERS[detected.format]
    with _quiet():
        frame = reader(path, detected, display, limits, sheet=sheet, r_object=r_object)
    return _finish(frame, display, limits, detected.format)


# ---------------------------------------------------------------------------
# detection


def _display_name(path: Path | str, name: str | None) -> str:
    return name if name else Path(path).name


def _extension(display: str) -> str:
    return Path(display).suffix.lower()


def _file_size(path: Path, display: str) -> int:
    try:
        return path.stat().st_size
    except OSError:
        raise DataFileError(f'"{display}" could not be opened: the stored file is missing.') from None


def _read_head(path: Path, display: str) -> bytes:
    try:
        with path.open("rb") as handle:
            return handle.read(_HEAD_BYTES)
    except OSError:
        raise DataFileError(f'"{display}" could not be opened: the stored file is missing.') from None


def _detect(path: Path, display: str) -> _Detected:
    size = _file_size(path, display)
    if size == 0:
        raise DataFileError(f'"{display}" is empty: the file has no content at all.')
    head = _read_head(path, display)
    extension = _extension(display)
    binary = _detect_binary(path, head)
    if extension in _UNSUPPORTED_EXTENSIONS:
        if isinstance(binary, _Detected):
            raise DataFileError(
                f'"{display}" has the extension {extension}, but its content is {FORMAT_LABELS[binary.format]}. '
                "Give it the extension that matches its content and upload it again."
            )
        raise DataFileError(
            f'"{display}" looks like {_UNSUPPORTED_EXTENSIONS[extension]}. SecondStage reads {_SUPPORTED}.'
        )
    expected = _EXTENSION_FORMATS.get(extension)

    if isinstance(binary, _Detected):
        if expected is not None and binary.format not in expected:
            raise _mismatch(display, expected, FORMAT_LABELS[binary.format])
        return binary
    if binary is not None:  # a recognised binary file of another kind
        if expected is not None:
            raise _mismatch(display, expected, binary)
        raise DataFileError(f'"{display}" is {binary}, not a data table. SecondStage reads {_SUPPORTED}.')

    whole = size <= len(head)
    if expected is not None and expected != ("csv", "tsv"):
        # The extension promises a binary format: say so, whatever the text is.
        try:
            layout = _sniff_text(head, display, whole=whole)
            content = FORMAT_LABELS["tsv" if layout.delimiter == "\t" else "csv"]
            if layout.delimiter in ";|":
                content = "delimited text (" + ("semicolon" if layout.delimiter == ";" else "pipe") + "-separated)"
        except DataFileError:
            content = "text or data of an unknown kind" if _looks_textual(head) else "binary data of no known format"
        raise _mismatch(display, expected, content)
    layout = _sniff_text(head, display, whole=whole)
    return _Detected(format="tsv" if layout.delimiter == "\t" else "csv", text=layout)


def _mismatch(display: str, expected: tuple[str, ...], content: str) -> DataFileError:
    return DataFileError(
        f'"{display}" does not look like {_EXTENSION_LABELS[expected]}: its content looks like {content}. '
        "Check that this is the file you meant to upload; if it is, give it the extension that matches its content."
    )


def _detect_binary(path: Path, head: bytes) -> _Detected | str | None:
    """The binary format of the file, a description of an unsupported binary file, or None for text."""
    if head.startswith(b"PAR1"):
        return _Detected("parquet")
    if head.startswith(b"<stata_dta>") or (
        len(head) >= 4
        and head[0] in _STATA_OLD_VERSIONS
        and head[1] in (1, 2)
        and head[2] == 1
        and head[3] == 0
    ):
        return _Detected("stata")
    if head.startswith((b"$FL2", b"$FL3")):
        return _Detected("spss")
    if head.startswith(_SAS_MAGIC):
        return _Detected("sas")
    if head.startswith((b"PK\x03\x04", b"PK\x05\x06")):
        return _zip_kind(path)
    r_kind = _r_kind(head)
    if r_kind is not None:
        return r_kind
    for magic, description in _OTHER_MAGIC:
        if head.startswith(magic):
            return description
    return None


def _zip_kind(path: Path) -> _Detected | str:
    try:
        with zipfile.ZipFile(path) as archive:
            names = set(archive.namelist())
            small = "mimetype" in names and archive.getinfo("mimetype").file_size < 200
            mimetype = archive.read("mimetype") if small else b""
    except (zipfile.BadZipFile, OSError, KeyError, RuntimeError, NotImplementedError, ValueError):
        return "a damaged or incomplete ZIP archive"
    if "xl/workbook.xml" in names:
        return _Detected("excel")
    if b"opendocument.spreadsheet" in mimetype:
        return "an OpenDocument spreadsheet (.ods); save it as .xlsx or CSV"
    if any(name.startswith("word/") for name in names):
        return "a Word document"
    return "a ZIP archive; unpack it and upload the data file inside"


def _r_kind(head: bytes) -> _Detected | None:
    compression = None
    inner = head
    try:
        if head.startswith(_GZIP_MAGIC):
            compression, inner = "gzip", zlib.decompressobj(16 + zlib.MAX_WBITS).decompress(head, 64)
        elif head.startswith(_BZIP2_MAGIC):
            compression, inner = "bzip2", bz2.BZ2Decompressor().decompress(head, 64)
        elif head.startswith(_XZ_MAGIC):
            compression, inner = "xz", lzma.LZMADecompressor().decompress(head, 64)
    except (zlib.error, OSError, lzma.LZMAError, EOFError, ValueError):
        return None
    if inner.startswith(_RDATA_HEADERS):
        return _Detected("rdata", compression=compression)
    if _RDS_HEADER.match(inner):
        return _Detected("rds", compression=compression)
    return None


def _looks_textual(head: bytes) -> bool:
    sample = head[:4096]
    return b"\x00" not in sample and sum(byte < 9 or 13 < byte < 32 for byte in sample) <= len(sample) // 100


# ---------------------------------------------------------------------------
# text: encoding and delimiter


def _sniff_text(head: bytes, display: str, *, whole: bool) -> _TextLayout:
    encoding, text = _decode_head(head, display, whole=whole)
    if not whole:
        text = _cut_at_newline(text, len(text))
    if len(text) > _SNIFF_CHARS:
        text = _cut_at_newline(text, _SNIFF_CHARS)
    stripped = text.lstrip("\ufeff \t\r\n")
    if not stripped:
        raise DataFileError(f'"{display}" is empty: it holds only blank lines or spaces.')
    _refuse_documents(stripped, display)
    _refuse_control_characters(text, display)
    delimiter, rows = _sniff_delimiter(text)
    decimal_point = "," if delimiter == ";" and _decimal_comma(rows[1:]) else "."
    newlines = any("\n" in value or "\r" in value for row in rows for value in row)
    return _TextLayout(
        encoding=encoding,
        delimiter=delimiter,
        decimal_point=decimal_point,
        newlines_in_values=newlines,
        n_header_fields=len(rows[0]) if rows else 0,
    )


def _cut_at_newline(text: str, limit: int) -> str:
    cut = text.rfind("\n", 0, limit)
    return text[:cut] if cut > 0 else text[:limit]


def _decode_head(head: bytes, display: str, *, whole: bool) -> tuple[str, str]:
    """The encoding of a text file (from its first megabyte) and that part decoded."""
    for bom, encoding in (
        (codecs.BOM_UTF32_LE, "utf-32"),
        (codecs.BOM_UTF32_BE, "utf-32"),
        (codecs.BOM_UTF8, "utf-8"),
        (codecs.BOM_UTF16_LE, "utf-16"),
        (codecs.BOM_UTF16_BE, "utf-16"),
    ):
        if head.startswith(bom):
            decoder = codecs.getincrementaldecoder("utf-8-sig" if encoding == "utf-8" else encoding)()
            try:
                return encoding, decoder.decode(head, final=whole)
            except UnicodeDecodeError:
                raise DataFileError(
                    f'"{display}" starts with a marker saying it is {encoding.upper()} text, '
                    f"but its content is not valid {encoding.upper()}. The file may be damaged."
                ) from None
    if b"\x00" in head:
        if _looks_like_bomless_utf16(head):
            raise DataFileError(
                f'"{display}" looks like UTF-16 text saved without a byte-order mark, so its '
                "encoding cannot be read reliably. Save it again as UTF-8 (or as UTF-16 with a "
                "byte-order mark) and upload it again."
            )
        raise DataFileError(
            f'"{display}" is a binary file of no format SecondStage knows. It reads {_SUPPORTED}.'
        )
    try:
        return "utf-8", codecs.getincrementaldecoder("utf-8")().decode(head, final=whole)
    except UnicodeDecodeError:
        encoding = _legacy_encoding(head, display, whole=whole)
        return encoding, head.decode(encoding)


def _looks_like_bomless_utf16(head: bytes) -> bool:
    sample = head[: 64 * 1024 - (64 * 1024) % 2] if len(head) >= 2 else head
    if len(sample) < 4:
        return False
    even, odd = sample[0::2], sample[1::2]
    even_nul = even.count(0) / len(even)
    odd_nul = odd.count(0) / len(odd)
    return (odd_nul > 0.7 and even_nul < 0.1) or (even_nul > 0.7 and odd_nul < 0.1)


_NON_ASCII_RUN = re.compile(rb"[\x80-\xff]+")
_TRAILING_RUN = re.compile(rb"[\x80-\xff]+\Z")


def _legacy_encoding(data: bytes, display: str, *, whole: bool = True) -> str:
    """Windows-1252 when the non-UTF-8 bytes can only sensibly be read that way, else a DataFileError.

    Notes
    -----
    Western European text in Windows-1252 (a superset of the printable part of
    Latin-1) has accented letters and a few symbols scattered among ASCII
    letters, one or two bytes at a time. Text in another single-byte code page
    (Cyrillic, Greek, ...) or a double-byte one (Shift-JIS, GBK, ...) has
    longer runs of high bytes forming whole words, and a file that mixes UTF-8
    with something else has valid UTF-8 sequences among its runs. Those are
    refused instead of being read as mojibake.
    """
    if not whole:
        data = _TRAILING_RUN.sub(b"", data)  # the head may end inside a multi-byte character
    problem = None
    try:
        decoded = data.decode("cp1252")
    except UnicodeDecodeError:
        decoded = None
        problem = "it holds bytes that Windows-1252 (Latin-1) does not use"
    if decoded is not None:
        for match in _NON_ASCII_RUN.finditer(data):
            run = match.group()
            if len(run) > 1 and _is_utf8(run):
                problem = "it mixes UTF-8 with another encoding"
                break
            if len(run) > 3:
                problem = "it has long runs of non-Latin characters"
                break
            before = data[match.start() - 1 : match.start()]
            after = data[match.end() : match.end() + 1]
            letters = run.decode("cp1252")
            if (
                len(run) > 1
                and all(unicodedata.category(char).startswith("L") for char in letters)
                and not before.isalpha()
                and not after.isalpha()
            ):
                problem = "it has whole words written without Latin letters"
                break
    if problem is not None:
        raise DataFileError(
            f'"{display}" has an unknown encoding: it is not UTF-8 text, and it cannot be read '
            f"safely as Windows-1252/Latin-1 either ({problem}). Save it again as UTF-8 "
            '(in Excel: "CSV UTF-8"; in Stata: export delimited writes UTF-8) and upload it again.'
        )
    return "cp1252"


def _is_utf8(run: bytes) -> bool:
    try:
        run.decode("utf-8")
    except UnicodeDecodeError:
        return False
    return True


def _refuse_documents(stripped: str, display: str) -> None:
    start = stripped[:200].lower()
    if start.startswith(("<!doctype html", "<html", "<head", "<body")):
        kind = "a web page (HTML)"
    elif start.startswith("<?xml") or (start.startswith("<") and ">" in start):
        kind = "an XML or HTML document"
    elif start.startswith("{") or re.match(r"\[\s*[\[{\"]", start):
        kind = "a JSON document"
    else:
        return
    raise DataFileError(f'"{display}" is {kind}, not a data table. Export the data as CSV and upload that.')


def _refuse_control_characters(text: str, display: str) -> None:
    sample = text[:_SNIFF_CHARS]
    controls = sum(1 for char in sample if (char < " " and char not in "\t\n\r\f\v") or char == "\x7f")
    if controls > max(2, len(sample) // 200):
        raise DataFileError(
            f'"{display}" is a binary file of no format SecondStage knows. It reads {_SUPPORTED}.'
        )


_CANDIDATE_DELIMITERS = ("\t", ";", ",", "|")


def _sniff_delimiter(text: str) -> tuple[str, list[list[str]]]:
    """The delimiter that splits the sample into the most consistent records."""
    best: tuple[tuple[float, int, int], str, list[list[str]]] | None = None
    single: list[list[str]] | None = None
    for priority, delimiter in enumerate(_CANDIDATE_DELIMITERS):
        try:
            rows = [
                row
                for row in itertools.islice(
                    csv.reader(io.StringIO(text, newline=""), delimiter=delimiter), _SNIFF_RECORDS
                )
                if row
            ]
        except csv.Error:
            continue
        if not rows:
            continue
        if delimiter == ",":
            single = rows
        width = len(rows[0])
        if width < 2:
            continue
        consistency = sum(len(row) == width for row in rows) / len(rows)
        score = (consistency, width, -priority)
        if best is None or score > best[0]:
            best = (score, delimiter, rows)
    if best is not None and best[0][0] >= 0.5:
        return best[1], best[2]
    if best is not None and single is not None and all(len(row) == 1 for row in single):
        return ",", single
    if best is not None:
        return best[1], best[2]
    return ",", single or [[]]


_DECIMAL_COMMA = re.compile(r"^\s*[+-]?\d+,\d+\s*$")
_DECIMAL_POINT = re.compile(r"^\s*[+-]?\d*\.\d+\s*$")


def _decimal_comma(rows: list[list[str]]) -> bool:
    values = [value for row in rows for value in row]
    return any(_DECIMAL_COMMA.match(value) for value in values) and not any(
        _DECIMAL_POINT.match(value) for value in values
    )


# ---------------------------------------------------------------------------
# readers


@contextmanager
def _quiet() -> Iterator[None]:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        yield


_NULL_VALUES = [
    "",
    ".",
    "#N/A",
    "#N/A N/A",
    "#NA",
    "-1.#IND",
    "-1.#QNAN",
    "-NaN",
    "-nan",
    "1.#IND",
    "1.#QNAN",
    "N/A",
    "NA",
    "NULL",
    "NaN",
    "n/a",
    "nan",
    "null",
]
"""pyarrow's own missing-value spellings, plus "." (SAS and Stata write it for missing)."""

_ARROW_ROW_ERROR = re.compile(r"Expected (\d+) columns, got (\d+): ?(.*)", re.DOTALL)


def _read_text(path: Path, detected: _Detected, display: str, limits: ReadLimits, **_: Any) -> pd.DataFrame:
    import pyarrow as pa
    import pyarrow.csv as pacsv

    layout = detected.text
    assert layout is not None
    if layout.n_header_fields > limits.max_columns:
        raise _too_many_columns(display, layout.n_header_fields, limits)

    def attempt(source: Any, encoding: str, newlines: bool) -> pa.Table:
        return pacsv.read_csv(
            source,
            read_options=pacsv.ReadOptions(encoding=encoding, use_threads=True),
            parse_options=pacsv.ParseOptions(delimiter=layout.delimiter, newlines_in_values=newlines),
            convert_options=pacsv.ConvertOptions(
                null_values=_NULL_VALUES,
                strings_can_be_null=True,
                quoted_strings_can_be_null=True,
                decimal_point=layout.decimal_point,
            ),
        )

    def read(source: Callable[[], Any], encoding: str) -> pa.Table:
        try:
            return attempt(source(), encoding, layout.newlines_in_values)
        except pa.ArrowInvalid as first:
            if layout.newlines_in_values or "parse error" not in str(first).lower():
                raise _text_error(path, display, first, encoding) from None
        # A quoted value may span lines further down than the sample reached.
        try:
            return attempt(source(), encoding, True)
        except pa.ArrowInvalid as error:
            raise _text_error(path, display, error, encoding) from None

    encoding = layout.encoding
    arrow_encoding = "utf8" if encoding == "utf-8" else encoding
    table = read(lambda: str(path), arrow_encoding)
    if encoding == "utf-8" and _has_undecodable_text(table):
        data = path.read_bytes()
        try:
            data.decode("utf-8")
        except UnicodeDecodeError:
            legacy = _legacy_encoding(data, display)
            utf8 = data.decode(legacy).encode("utf-8")
            del data
            table = read(lambda: pa.BufferReader(utf8), "utf8")
    last_is_void = table.num_columns > 1 and table.column_names[-1].strip() == ""
    if last_is_void and table.num_rows and table.column(-1).null_count == table.num_rows:
        # "a,b," lines: a trailing delimiter makes an unnamed, empty last column.
        table = table.remove_column(table.num_columns - 1)
    if table.num_rows == 0:
        raise _no_rows(display)
    _check_size(display, table.num_rows, table.num_columns, limits)
    columns = {}
    for position, column in enumerate(table.columns):
        if pa.types.is_null(column.type):
            columns[position] = pa.chunked_array([pa.nulls(len(column), pa.float64())])
    for position, column in columns.items():
        table = table.set_column(position, table.field(position).name, column)
    return table.to_pandas(date_as_object=False, split_blocks=True)


def _has_undecodable_text(table: Any) -> bool:
    import pyarrow as pa

    if any(pa.types.is_binary(field.type) or pa.types.is_large_binary(field.type) for field in table.schema):
        return True
    return any("\ufffd" in name for name in table.column_names)


def _text_error(path: Path, display: str, error: Exception, encoding: str) -> DataFileError:
    message = str(error)
    match = _ARROW_ROW_ERROR.search(message)
    if match:
        expected, got, row = match.group(1), match.group(2), match.group(3).strip()
        line = _line_number(path, row) if encoding == "utf8" and row else None
        where = f"line {line}" if line else "a row"
        shown = row if len(row) <= 80 else row[:77] + "..."
        return DataFileError(
            f'"{display}" could not be read as a table: {where} has {got} field{"" if got == "1" else "s"} '
            f"but the header has {expected} (the row reads: {shown!r}). A value with a separator in it must "
            "be in double quotes; check for stray separators or quotes near that row."
        )
    return DataFileError(f'"{display}" could not be read as a table of text: {message}')


def _line_number(path: Path, row: str) -> int | None:
    """The 1-based line of the file that reads exactly ``row`` (pyarrow reports the row, not its number)."""
    pattern = re.compile(rb"(?m)^" + re.escape(row.encode("utf-8")) + rb"\r?$")
    try:
        with path.open("rb") as handle, mmap.mmap(handle.fileno(), 0, access=mmap.ACCESS_READ) as data:
            found = pattern.search(data)
            if found is None:
                return None
            return data[: found.start()].count(b"\n") + 1
    except (OSError, ValueError):
        return None


def _read_stata(path: Path, detected: _Detected, display: str, limits: ReadLimits, **_: Any) -> pd.DataFrame:
    import pyreadstat

    return _read_readstat(pyreadstat.read_dta, path, display, limits, "a Stata file")


def _read_spss(path: Path, detected: _Detected, display: str, limits: ReadLimits, **_: Any) -> pd.DataFrame:
    import pyreadstat

    return _read_readstat(pyreadstat.read_sav, path, display, limits, "an SPSS file")


def _read_sas(path: Path, detected: _Detected, display: str, limits: ReadLimits, **_: Any) -> pd.DataFrame:
    import pyreadstat

    return _read_readstat(pyreadstat.read_sas7bdat, path, display, limits, "a SAS data file")


def _read_readstat(
    function: Callable[..., Any], path: Path, display: str, limits: ReadLimits, label: str
) -> pd.DataFrame:
    def call(**options: Any) -> Any:
        return function(str(path), output_format="pandas", **options)

    def read(encoding: str | None) -> pd.DataFrame:
        extra = {"encoding": encoding} if encoding else {}
        _, meta = call(metadataonly=True, **extra)
        rows = meta.number_rows
        columns = meta.number_columns or len(meta.column_names)
        if columns:
            _check_size(display, rows if rows is not None and rows >= 0 else 0, columns, limits)
        frame, _ = call(dates_as_pandas_datetime=True, apply_value_formats=False, **extra)
        return frame

    try:
        frame = read(None)
    except Exception as error:  # noqa: BLE001 - readstat raises several unrelated types
        if isinstance(error, DataFileError):
            raise
        if _is_encoding_error(error):
            try:
                frame = read("WINDOWS-1252")
            except DataFileError:
                raise
            except Exception as second:  # noqa: BLE001
                raise _damaged(display, label, second) from None
        else:
            raise _damaged(display, label, error) from None
    # Stata, SPSS and SAS store a missing text value as an empty string.
    for column in frame.columns:
        if _is_text(frame[column]):
            values = frame[column]
            frame[column] = values.mask(values.str.strip() == "")
    return frame


def _is_encoding_error(error: Exception) -> bool:
    text = f"{type(error).__name__} {error}".lower()
    return isinstance(error, UnicodeDecodeError) or any(
        word in text for word in ("encod", "unicode", "iconv", "convert string")
    )


def _damaged(display: str, label: str, error: Exception) -> DataFileError:
    detail = str(error).strip() or type(error).__name__
    return DataFileError(
        f'"{display}" looks like {label} but could not be read ({detail}). The file may be damaged, '
        "incomplete (an interrupted upload or download), or written by a program version that is not supported."
    )


def _read_parquet(path: Path, detected: _Detected, display: str, limits: ReadLimits, **_: Any) -> pd.DataFrame:
    import pyarrow as pa
    import pyarrow.parquet as pq

    try:
        handle = pq.ParquetFile(str(path))
        meta = handle.metadata
        _check_size(display, meta.num_rows, len(handle.schema_arrow), limits)
        if meta.num_rows == 0:
            raise _no_rows(display)
        table = handle.read()
    except DataFileError:
        raise
    except (pa.ArrowException, OSError, ValueError) as error:
        raise _damaged(display, "a Parquet file", error) from None
    nested = [
        field.name
        for field in table.schema
        if pa.types.is_nested(field.type) or pa.types.is_binary(field.type) or pa.types.is_large_binary(field.type)
    ]
    if nested:
        raise DataFileError(
            f'"{display}" has columns that do not hold single values (lists, records or raw bytes): '
            f"{_name_list(nested)}. Flatten them into one value per cell and save the file again."
        )
    frame = table.to_pandas(date_as_object=False, split_blocks=True)
    if not isinstance(frame.index, pd.RangeIndex) or frame.index.name is not None:
        # pandas wrote its index into the file: a named index is data (an id), an unnamed one is not.
        named = any(level is not None for level in frame.index.names)
        frame = frame.reset_index(drop=not named)
    return frame


def _read_excel(
    path: Path, detected: _Detected, display: str, limits: ReadLimits, *, sheet: str | int | None = None, **_: Any
) -> pd.DataFrame:
    import openpyxl

    _check_zip_bomb(path, display, limits)
    with path.open("rb") as handle:  # a file object: openpyxl would insist on an .xlsx path name
        try:
            book = openpyxl.load_workbook(handle, read_only=True, data_only=True)
        except Exception as error:  # noqa: BLE001 - openpyxl raises many types for bad files
            raise _damaged(display, "an Excel workbook", error) from None
        return _read_sheet(book, display, limits, sheet)


def _read_sheet(book: Any, display: str, limits: ReadLimits, sheet: str | int | None) -> pd.DataFrame:
    try:
        names = book.sheetnames
        if sheet is None:
            worksheet = book.worksheets[0] if book.worksheets else None
            if worksheet is None:
                raise DataFileError(f'"{display}" has no worksheet with data.')
        elif isinstance(sheet, int):
            if not 0 <= sheet < len(book.worksheets):
                raise DataFileError(
                    f'"{display}" has {len(names)} sheet(s) ({_name_list(names)}); '
                    f"there is no sheet number {sheet + 1}."
                )
            worksheet = book.worksheets[sheet]
        else:
            if sheet not in names:
                raise DataFileError(f'"{display}" has no sheet named "{sheet}"; its sheets are {_name_list(names)}.')
            worksheet = book[sheet]
        try:
            rows = worksheet.iter_rows(values_only=True)
            frame = _sheet_frame(rows, display, worksheet.title, limits)
        except DataFileError:
            raise
        except Exception as error:  # noqa: BLE001
            raise _damaged(display, "an Excel workbook", error) from None
    finally:
        book.close()
    return frame


def _check_zip_bomb(path: Path, display: str, limits: ReadLimits) -> None:
    try:
        with zipfile.ZipFile(path) as archive:
            entries = archive.infolist()
    except (zipfile.BadZipFile, OSError) as error:
        raise _damaged(display, "an Excel workbook", error) from None
    total = sum(entry.file_size for entry in entries)
    if total > limits.max_unpacked_bytes:
        raise DataFileError(
            f'"{display}" would unpack to {_human_bytes(total)}, '
            f"more than the {_human_bytes(limits.max_unpacked_bytes)} "
            "allowed for a workbook. It was not opened. Save the data as CSV instead."
        )
    for entry in entries:
        if entry.file_size < limits.ratio_floor_bytes:
            continue
        ratio = entry.file_size / max(entry.compress_size, 1)
        if ratio > limits.max_compression_ratio:
            raise DataFileError(
                f'"{display}" was refused without being opened: its part {entry.filename} is compressed '
                f"{ratio:,.0f} times ({_human_bytes(entry.compress_size)} unpacking to "
                f"{_human_bytes(entry.file_size)}), far more than real spreadsheet data compresses. "
                "Files built like this (decompression bombs) are used to exhaust a server's memory. "
                "If the workbook is genuine, save the data as CSV and upload that."
            )


_EXCEL_ERRORS = frozenset(
    {"#N/A", "#DIV/0!", "#VALUE!", "#REF!", "#NAME?", "#NUM!", "#NULL!", "#GETTING_DATA", "#SPILL!", "#CALC!"}
)
_TEXT_MISSING = frozenset({"", ".", "NA", "N/A", "n/a", "NaN", "nan", "NULL", "null", "#NA"})


def _sheet_frame(rows: Iterator[tuple[Any, ...]], display: str, title: str, limits: ReadLimits) -> pd.DataFrame:
    header: tuple[Any, ...] | None = None
    data: list[tuple[Any, ...]] = []
    for row in rows:
        if header is None:
            if all(_blank_cell(value) for value in row):
                continue
            header = row
            if len(header) > limits.max_columns:
                header = _trim_trailing_blanks(header)
                if len(header) > limits.max_columns:
                    raise _too_many_columns(display, len(header), limits)
            continue
        data.append(row)
        if len(data) > limits.max_rows:
            raise _too_many_rows(display, len(data), limits)
    if header is None:
        raise DataFileError(f'"{display}": the sheet "{title}" is empty.')
    while data and all(_blank_cell(value) for value in data[-1]):
        data.pop()
    width = max([len(_trim_trailing_blanks(header))] + [len(_trim_trailing_blanks(row)) for row in data])
    if not data:
        raise _no_rows(display, f'the sheet "{title}"')
    columns: dict[str, pd.Series] = {}
    names = [_header_text(header[position] if position < len(header) else None) for position in range(width)]
    _check_names(names, display)
    for position, name in enumerate(names):
        values = [row[position] if position < len(row) else None for row in data]
        columns[name] = _excel_column(values)
    return pd.DataFrame(columns)


def _blank_cell(value: Any) -> bool:
    return value is None or (isinstance(value, str) and value.strip() == "")


def _trim_trailing_blanks(row: tuple[Any, ...]) -> tuple[Any, ...]:
    end = len(row)
    while end and _blank_cell(row[end - 1]):
        end -= 1
    return row[:end]


def _header_text(value: Any) -> str:
    if value is None:
        return ""
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    return str(value)


def _excel_column(values: list[Any]) -> pd.Series:
    import datetime as dt

    cleaned: list[Any] = []
    kinds: set[str] = set()
    for value in values:
        if isinstance(value, str):
            stripped = value.strip()
            if stripped in _EXCEL_ERRORS or stripped in _TEXT_MISSING:
                value = None
        if value is None:
            cleaned.append(None)
            continue
        if isinstance(value, bool):
            kinds.add("bool")
        elif isinstance(value, (int, float)):
            kinds.add("number")
        elif isinstance(value, (dt.datetime, dt.date)):
            kinds.add("datetime")
        else:
            kinds.add("text")
        cleaned.append(value)
    if not kinds:
        return pd.Series([np.nan] * len(values), dtype="float64")
    if kinds == {"number"}:
        return pd.to_numeric(pd.Series(cleaned, dtype=object))
    if kinds == {"bool"}:
        if any(value is None for value in cleaned):
            return pd.Series([np.nan if value is None else float(value) for value in cleaned], dtype="float64")
        return pd.Series(cleaned, dtype=bool)
    if kinds == {"datetime"}:
        return pd.to_datetime(pd.Series(cleaned, dtype=object))
    return pd.Series([None if value is None else _cell_text(value) for value in cleaned], dtype="str")


def _cell_text(value: Any) -> str:
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    return str(value)


def _read_r(
    path: Path, detected: _Detected, display: str, limits: ReadLimits, *, r_object: str | None = None, **_: Any
) -> pd.DataFrame:
    import pyreadr

    label = FORMAT_LABELS[detected.format]
    if detected.compression is not None:
        _check_stream_bomb(path, detected.compression, display, limits, label)
    try:
        if detected.format == "rds":
            result = pyreadr.read_r(str(path))
        else:
            listed = [entry.get("object_name") for entry in pyreadr.list_objects(str(path))]
            listed = [name for name in listed if name is not None]
            if r_object is None and len(listed) > 1:
                raise DataFileError(
                    f'"{display}" holds {len(listed)} objects ({_name_list(listed)}). '
                    "Choose which data frame to read."
                )
            if r_object is not None and r_object not in listed:
                raise DataFileError(
                    f'"{display}" has no object named "{r_object}"; it holds {_name_list(listed) or "no data frame"}.'
                )
            result = pyreadr.read_r(str(path), use_objects=[r_object] if r_object else None)
    except DataFileError:
        raise
    except Exception as error:  # noqa: BLE001 - pyreadr raises several types for bad files
        raise _damaged(display, label, error) from None
    frames = [(key, value) for key, value in result.items() if isinstance(value, pd.DataFrame)]
    if not frames:
        raise DataFileError(
            f'"{display}" holds no data frame that can be read (lists, models and other R objects are not tables). '
            "In R, save the data frame itself with saveRDS() or write.csv()."
        )
    if len(frames) > 1:
        raise DataFileError(
            f'"{display}" holds {len(frames)} data frames ({_name_list([str(key) for key, _ in frames])}). '
            "Choose which one to read."
        )
    frame = frames[0][1]
    index = frame.index
    if not isinstance(index, pd.RangeIndex):
        trivial = index.astype(str).tolist() == [str(position + 1) for position in range(len(index))]
        if trivial:
            frame = frame.reset_index(drop=True)
        else:
            name = "rownames" if "rownames" not in frame.columns else "_rownames"
            frame = frame.reset_index(names=name)
    return frame


def _check_stream_bomb(path: Path, compression: str, display: str, limits: ReadLimits, label: str) -> None:
    """Inflate a compressed R file into nothing, counting, and stop as soon as it passes the limit."""
    try:
        total = _inflated_size(path, compression, stop_after=limits.max_unpacked_bytes)
    except (OSError, zlib.error, lzma.LZMAError, EOFError, ValueError) as error:
        raise _damaged(display, label, error) from None
    if total > limits.max_unpacked_bytes:
        raise DataFileError(
            f'"{display}" would unpack to more than {_human_bytes(limits.max_unpacked_bytes)}, '
            "the limit for one data file, so it was not read."
        )


def _inflated_size(path: Path, compression: str, *, stop_after: int) -> int:
    step = 16 * MiB
    total = 0
    with path.open("rb") as handle:
        if compression == "gzip":
            gunzip = zlib.decompressobj(16 + zlib.MAX_WBITS)
            for chunk in iter(lambda: handle.read(MiB), b""):
                while chunk and not gunzip.eof:
                    total += len(gunzip.decompress(chunk, step))
                    if total > stop_after:
                        return total
                    chunk = gunzip.unconsumed_tail
                if gunzip.eof:
                    break
            return total
        inflater: Any = bz2.BZ2Decompressor() if compression == "bzip2" else lzma.LZMADecompressor()
        for chunk in iter(lambda: handle.read(MiB), b""):
            total += len(inflater.decompress(chunk, max_length=step))
            while not inflater.eof and not inflater.needs_input and total <= stop_after:
                total += len(inflater.decompress(b"", max_length=step))
            if total > stop_after or inflater.eof:
                break
    return total


_READERS: dict[str, Callable[..., pd.DataFrame]] = {
    "csv": _read_text,
    "tsv": _read_text,
    "stata": _read_stata,
    "spss": _read_spss,
    "sas": _read_sas,
    "excel": _read_excel,
    "parquet": _read_parquet,
    "rds": _read_r,
    "rdata": _read_r,
}


# ---------------------------------------------------------------------------
# the common finish: names, sizes, dtypes


def _finish(frame: pd.DataFrame, display: str, limits: ReadLimits, fmt: str) -> pd.DataFrame:
    names = [_header_text(name) for name in frame.columns]
    _check_names(names, display)
    stripped = [name.strip() for name in names]
    if stripped != list(frame.columns):
        frame.columns = stripped
    if len(frame) == 0:
        raise _no_rows(display)
    _check_size(display, len(frame), frame.shape[1], limits)
    if not isinstance(frame.index, pd.RangeIndex) or frame.index.start != 0 or frame.index.step != 1:
        frame = frame.reset_index(drop=True)
    conversions = {}
    for position in range(frame.shape[1]):
        series = frame.iloc[:, position]
        converted = _normalise_column(series)
        if converted is not series:
            conversions[position] = converted
    if conversions:
        frame = frame.copy(deep=False)
        for position, series in conversions.items():
            frame.isetitem(position, series)
    return frame


def _check_names(names: list[str], display: str) -> None:
    stripped = [name.strip() for name in names]
    blank = [position + 1 for position, name in enumerate(stripped) if not name]
    if blank:
        where = ", ".join(str(position) for position in blank[:10])
        raise DataFileError(
            f'"{display}" has {"a column" if len(blank) == 1 else f"{len(blank)} columns"} with no name '
            f"(column {where}). Every column needs a name in the first row."
        )
    seen: dict[str, int] = {}
    for position, name in enumerate(stripped, start=1):
        if name in seen:
            raise DataFileError(
                f'"{display}" has two columns named "{name}" (columns {seen[name]} and {position}). '
                "Column names must be unique: rename one of them."
            )
        seen[name] = position


def _check_size(display: str, rows: int, columns: int, limits: ReadLimits) -> None:
    if columns > limits.max_columns:
        raise _too_many_columns(display, columns, limits)
    if rows > limits.max_rows:
        raise _too_many_rows(display, rows, limits)
    if rows * columns > limits.max_cells:
        raise DataFileError(
            f'"{display}" has {rows:,} rows and {columns:,} columns ({rows * columns:,} values), more than the '
            f"{limits.max_cells:,} values this server reads from one file. Keep only the variables you need."
        )


def _too_many_columns(display: str, columns: int, limits: ReadLimits) -> DataFileError:
    return DataFileError(
        f'"{display}" has {columns:,} columns, more than the {limits.max_columns:,} this server reads. '
        "Keep only the variables you need."
    )


def _too_many_rows(display: str, rows: int, limits: ReadLimits) -> DataFileError:
    return DataFileError(
        f'"{display}" has more than {limits.max_rows:,} rows, the most this server reads from one file.'
    )


def _no_rows(display: str, where: str | None = None) -> DataFileError:
    subject = f'"{display}": {where}' if where else f'"{display}"'
    return DataFileError(f"{subject} has a header (column names) but no rows of data.")


def _is_text(series: pd.Series) -> bool:
    return pd.api.types.is_string_dtype(series.dtype) and not isinstance(series.dtype, pd.CategoricalDtype)


def _normalise_column(series: pd.Series) -> pd.Series:
    """Bring a column into one of the four families: numbers, datetimes, text, all-missing."""
    dtype = series.dtype
    if isinstance(dtype, pd.CategoricalDtype):
        return series.astype("str")
    if isinstance(dtype, np.dtype):
        if dtype.kind in "biufmM":
            return series
        if dtype.kind == "O":
            return _normalise_objects(series)
        return series.astype("str")
    if isinstance(dtype, pd.StringDtype):
        return series if dtype == pd.StringDtype(na_value=np.nan) else series.astype("str")
    if isinstance(dtype, pd.DatetimeTZDtype):
        return series
    if pd.api.types.is_bool_dtype(dtype):
        if series.isna().any():
            return series.astype("float64")
        return series.astype(bool)
    if pd.api.types.is_integer_dtype(dtype):
        if series.isna().any():
            return series.astype("float64")
        return series.astype("int64")
    if pd.api.types.is_float_dtype(dtype):
        return series.astype("float64")
    if pd.api.types.is_datetime64_any_dtype(dtype):
        return series
    return _normalise_objects(series.astype(object))


def _normalise_objects(series: pd.Series) -> pd.Series:
    inferred = pd.api.types.infer_dtype(series, skipna=True)
    if inferred == "empty":
        return pd.Series(np.nan, index=series.index, dtype="float64", name=series.name)
    if inferred == "string":
        return series.astype("str")
    if inferred in ("integer", "floating", "mixed-integer-float", "decimal"):
        numbers = pd.to_numeric(series)
        return numbers if inferred == "integer" and not series.isna().any() else numbers.astype("float64")
    if inferred == "boolean":
        return series.astype(bool) if not series.isna().any() else series.astype("float64")
    if inferred in ("datetime", "datetime64", "date"):
        return pd.to_datetime(series)
    if inferred == "bytes":
        return series.map(lambda value: value.decode("utf-8", "replace") if isinstance(value, bytes) else value).astype(
            "str"
        )
    return series.map(lambda value: None if _is_missing(value) else str(value)).astype("str")


def _is_missing(value: Any) -> bool:
    return value is None or value is pd.NaT or (isinstance(value, float) and np.isnan(value))


def _name_list(names: list[str]) -> str:
    shown = ", ".join(f'"{name}"' for name in names[:8])
    return shown + (f" and {len(names) - 8} more" if len(names) > 8 else "")


def _human_bytes(count: int) -> str:
    size = float(count)
    for unit in ("bytes", "KiB", "MiB", "GiB", "TiB"):
        if size < 1024 or unit == "TiB":
            return f"{size:,.0f} {unit}" if unit == "bytes" else f"{size:,.1f} {unit}"
        size /= 1024
    return f"{count} bytes"
