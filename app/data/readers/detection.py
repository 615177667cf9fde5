"""Deciding a file's format from its content, cross-checked with the extension of its name.

Binary formats are recognised by their magic bytes; anything else must be a
text table (see :mod:`app.data.readers.text_layout`). Uploads are stored
under their SHA-256, so the stored path may carry no extension at all: the
extension checked is the one of the name the user gave the file.
"""

from __future__ import annotations

import bz2
import lzma
import re
import zipfile
import zlib
from dataclasses import dataclass
from pathlib import Path

from app.data.readers.formats import FORMAT_LABELS, SUPPORTED
from app.data.readers.limits import MiB
from app.data.readers.text_layout import TextLayout, sniff_text
from app.errors import DataFileError

HEAD_BYTES = 1 * MiB
"""How much of a file detection reads: magic bytes and text layout are decided from this head."""

_SAS_MAGIC = (
    b"\x00\x00\x00\x00\x00\x00\x00\x00"
    b"\x00\x00\x00\x00\xc2\xea\x81\x60"
    b"\xb3\x14\x11\xcf\xbd\x92\x08\x00"
    b"\x09\xc7\x31\x8c\x18\x1f\x10\x11"
)
_STATA_OLD_VERSIONS = frozenset({104, 105, 108, 110, 111, 112, 113, 114, 115})
_ZIP_MAGIC = (b"PK\x03\x04", b"PK\x05\x06")
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
_TEXT_FORMATS = ("csv", "tsv")
_EXTENSION_FORMATS: dict[str, tuple[str, ...]] = {
    **{ext: _TEXT_FORMATS for ext in _TEXT_EXTENSIONS},
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
class Detected:
    """What detection found: the format, and what its reader needs to know about the file."""

    format: str
    text: TextLayout | None = None
    compression: str | None = None  # for R files: "gzip", "bzip2", "xz" or None

    @classmethod
    def of_text(cls, layout: TextLayout) -> Detected:
        """A text table: TSV when tab-separated, CSV otherwise (also for semicolons and pipes)."""
        return cls(format="tsv" if layout.delimiter == "\t" else "csv", text=layout)


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
    return detect(Path(path), display_name(path, name)).format


def display_name(path: Path | str, name: str | None) -> str:
    """The name used in messages: the user's file name, else the stored file's own."""
    return name if name else Path(path).name


def _extension(display: str) -> str:
    return Path(display).suffix.lower()


def file_size(path: Path, display: str) -> int:
    """The size of the stored file in bytes."""
    try:
        return path.stat().st_size
    except OSError:
        raise DataFileError(f'"{display}" could not be opened: the stored file is missing.') from None


def _read_head(path: Path, display: str) -> bytes:
    try:
        with path.open("rb") as handle:
            return handle.read(HEAD_BYTES)
    except OSError:
        raise DataFileError(f'"{display}" could not be opened: the stored file is missing.') from None


def detect(path: Path, display: str) -> Detected:
    """The file's format (and text layout or compression), or a DataFileError saying why it is not a table."""
    size = file_size(path, display)
    if size == 0:
        raise DataFileError(f'"{display}" is empty: the file has no content at all.')
    head = _read_head(path, display)
    extension = _extension(display)
    binary = _detect_binary(path, head)
    if extension in _UNSUPPORTED_EXTENSIONS:
        if isinstance(binary, Detected):
            raise DataFileError(
                f'"{display}" has the extension {extension}, but its content is {FORMAT_LABELS[binary.format]}. '
                "Give it the extension that matches its content and upload it again."
            )
        raise DataFileError(
            f'"{display}" looks like {_UNSUPPORTED_EXTENSIONS[extension]}. SecondStage reads {SUPPORTED}.'
        )
    expected = _EXTENSION_FORMATS.get(extension)

    if isinstance(binary, Detected):
        if expected is not None and binary.format not in expected:
            raise _mismatch(display, expected, FORMAT_LABELS[binary.format])
        return binary
    if binary is not None:  # a recognised binary file of another kind
        if expected is not None:
            raise _mismatch(display, expected, binary)
        raise DataFileError(f'"{display}" is {binary}, not a data table. SecondStage reads {SUPPORTED}.')

    whole = size <= len(head)
    if expected is not None and expected != _TEXT_FORMATS:
        # The extension promises a binary format: say so, whatever the text is.
        try:
            layout = sniff_text(head, display, whole=whole)
            content = FORMAT_LABELS["tsv" if layout.delimiter == "\t" else "csv"]
            if layout.delimiter in ";|":
                content = "delimited text (" + ("semicolon" if layout.delimiter == ";" else "pipe") + "-separated)"
        except DataFileError:
            content = "text or data of an unknown kind" if _looks_textual(head) else "binary data of no known format"
        raise _mismatch(display, expected, content)
    return Detected.of_text(sniff_text(head, display, whole=whole))


def text_layout_of_head(head: bytes, display: str, *, whole: bool) -> TextLayout | None:
    """The layout of a text table, when a file's head alone shows that :func:`detect` will find one.

    Parameters
    ----------
    head
        The first :data:`HEAD_BYTES` of the file (all of it when shorter).
    display
        The name the user gave the file; its extension is checked.
    whole
        Whether ``head`` is the whole file.

    Returns
    -------
    TextLayout or None
        What ``detect(path, display).text`` is for any file that starts with
        ``head``; ``None`` when the file is not plain text under a text
        extension (or none), or when sniffing refuses it: then only
        :func:`detect` on the whole file says what it is, or why it is refused.
    """
    extension = _extension(display)
    if extension in _UNSUPPORTED_EXTENSIONS or _EXTENSION_FORMATS.get(extension, _TEXT_FORMATS) != _TEXT_FORMATS:
        return None
    if head.startswith(_ZIP_MAGIC) or _binary_kind(head) is not None:
        return None
    try:
        return sniff_text(head, display, whole=whole)
    except DataFileError:
        return None


def _mismatch(display: str, expected: tuple[str, ...], content: str) -> DataFileError:
    return DataFileError(
        f'"{display}" does not look like {_EXTENSION_LABELS[expected]}: its content looks like {content}. '
        "Check that this is the file you meant to upload; if it is, give it the extension that matches its content."
    )


def _detect_binary(path: Path, head: bytes) -> Detected | str | None:
    """The binary format of the file, a description of an unsupported binary file, or None for text."""
    if head.startswith(_ZIP_MAGIC):
        return _zip_kind(path)
    return _binary_kind(head)


def _binary_kind(head: bytes) -> Detected | str | None:
    """What :func:`_detect_binary` says of a head that is not a ZIP archive's."""
    if head.startswith(b"PAR1"):
        return Detected("parquet")
    if head.startswith(b"<stata_dta>") or (
        len(head) >= 4
        and head[0] in _STATA_OLD_VERSIONS
        and head[1] in (1, 2)
        and head[2] == 1
        and head[3] == 0
    ):
        return Detected("stata")
    if head.startswith((b"$FL2", b"$FL3")):
        return Detected("spss")
    if head.startswith(_SAS_MAGIC):
        return Detected("sas")
    r_kind = _r_kind(head)
    if r_kind is not None:
        return r_kind
    for magic, description in _OTHER_MAGIC:
        if head.startswith(magic):
            return description
    return None


def _zip_kind(path: Path) -> Detected | str:
    try:
        with zipfile.ZipFile(path) as archive:
            names = set(archive.namelist())
            small = "mimetype" in names and archive.getinfo("mimetype").file_size < 200
            mimetype = archive.read("mimetype") if small else b""
    except (zipfile.BadZipFile, OSError, KeyError, RuntimeError, NotImplementedError, ValueError):
        return "a damaged or incomplete ZIP archive"
    if "xl/workbook.xml" in names:
        return Detected("excel")
    if b"opendocument.spreadsheet" in mimetype:
        return "an OpenDocument spreadsheet (.ods); save it as .xlsx or CSV"
    if any(name.startswith("word/") for name in names):
        return "a Word document"
    return "a ZIP archive; unpack it and upload the data file inside"


def _r_kind(head: bytes) -> Detected | None:
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
        return Detected("rdata", compression=compression)
    if _RDS_HEADER.match(inner):
        return Detected("rds", compression=compression)
    return None


def _looks_textual(head: bytes) -> bool:
    sample = head[:4096]
    return b"\x00" not in sample and sum(byte < 9 or 13 < byte < 32 for byte in sample) <= len(sample) // 100
