"""How a text table is written: its encoding, delimiter and decimal mark, sniffed from its first megabyte.

Text that is not a table (a web page, JSON, a binary file) is refused here,
and so is text in an encoding that cannot be recognised safely.
"""

from __future__ import annotations

import codecs
import csv
import io
import itertools
import re
import unicodedata
from dataclasses import dataclass

from app.data.readers.formats import SUPPORTED
from app.errors import DataFileError

_SNIFF_CHARS = 64 * 1024
_SNIFF_RECORDS = 200


@dataclass(frozen=True)
class TextLayout:
    """How a text table is written, as sniffed from its first megabyte."""

    encoding: str  # "utf-8", "utf-16", "utf-32", or a legacy code page
    delimiter: str
    decimal_point: str
    newlines_in_values: bool
    n_header_fields: int


def sniff_text(head: bytes, display: str, *, whole: bool) -> TextLayout:
    """The layout of a text table from its head, or a DataFileError when the text is not a table."""
    encoding, text = decode_head(head, display, whole=whole)
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
    return TextLayout(
        encoding=encoding,
        delimiter=delimiter,
        decimal_point=decimal_point,
        newlines_in_values=newlines,
        n_header_fields=len(rows[0]) if rows else 0,
    )


def _cut_at_newline(text: str, limit: int) -> str:
    cut = text.rfind("\n", 0, limit)
    return text[:cut] if cut > 0 else text[:limit]


def decode_head(head: bytes, display: str, *, whole: bool) -> tuple[str, str]:
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
            f'"{display}" is a binary file of no format SecondStage knows. It reads {SUPPORTED}.'
        )
    try:
        return "utf-8", codecs.getincrementaldecoder("utf-8")().decode(head, final=whole)
    except UnicodeDecodeError:
        encoding = legacy_encoding(head, display, whole=whole)
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


def legacy_encoding(data: bytes, display: str, *, whole: bool = True) -> str:
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
            f'"{display}" is a binary file of no format SecondStage knows. It reads {SUPPORTED}.'
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
