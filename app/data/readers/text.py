"""Reading CSV and TSV text with pyarrow, once its layout is known."""

from __future__ import annotations

import mmap
import re
from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING, Any

import pandas as pd

from app.data.readers.detection import HEAD_BYTES, Detected
from app.data.readers.frames import no_rows
from app.data.readers.limits import ReadLimits, check_size, too_many_columns
from app.data.readers.text_layout import TextLayout, legacy_encoding
from app.errors import DataFileError

if TYPE_CHECKING:
    import pyarrow as pa

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


def read_text(path: Path, detected: Detected, display: str, limits: ReadLimits, **_: Any) -> pd.DataFrame:
    """A CSV or TSV file, read by pyarrow with the layout detection found."""
    import pyarrow as pa

    layout = detected.text
    assert layout is not None
    if layout.n_header_fields > limits.max_columns:
        raise too_many_columns(display, layout.n_header_fields, limits)

    def read(source: Callable[[], Any], encoding: str, types: dict[str, pa.DataType]) -> pa.Table:
        try:
            return parse_typed(source, layout, encoding=encoding, newlines_in_values=layout.newlines_in_values, types=types)
        except pa.ArrowInvalid as first:
            if layout.newlines_in_values or "parse error" not in str(first).lower():
                raise _text_error(path, display, first, encoding) from None
        # A quoted value may span lines further down than the sample reached.
        try:
            return parse_typed(source, layout, encoding=encoding, newlines_in_values=True, types=types)
        except pa.ArrowInvalid as error:
            raise _text_error(path, display, error, encoding) from None

    encoding = arrow_encoding(layout)
    with path.open("rb") as handle:
        head = handle.read(HEAD_BYTES)
    table = read(lambda: str(path), encoding, number_types(head, layout))
    if needs_second_pass(table, layout):
        data = path.read_bytes()
        try:
            data.decode("utf-8")
        except UnicodeDecodeError:
            legacy = legacy_encoding(data, display)
            utf8 = data.decode(legacy).encode("utf-8")
            del data
            table = read(lambda: pa.BufferReader(utf8), "utf8", {})
    return text_frame(table, display, limits)


def arrow_encoding(layout: TextLayout) -> str:
    """The layout's encoding as pyarrow names it."""
    return "utf8" if layout.encoding == "utf-8" else layout.encoding


def parse_text(
    source: Any,
    layout: TextLayout,
    *,
    encoding: str,
    newlines_in_values: bool,
    types: dict[str, pa.DataType] | None = None,
) -> pa.Table:
    """Parse text in the given layout into a pyarrow Table (pyarrow's own errors are not translated).

    ``source`` is a path, a pyarrow buffer, or a binary file object that
    pyarrow reads in blocks; ``encoding`` is pyarrow's name for it; ``types``
    fixes the type of the columns it names (see :func:`number_types`).
    """
    import pyarrow.csv as pacsv

    return pacsv.read_csv(
        source,
        read_options=pacsv.ReadOptions(encoding=encoding, use_threads=True),
        parse_options=pacsv.ParseOptions(delimiter=layout.delimiter, newlines_in_values=newlines_in_values),
        convert_options=pacsv.ConvertOptions(
            column_types=types or None,
            null_values=_NULL_VALUES,
            strings_can_be_null=True,
            quoted_strings_can_be_null=True,
            decimal_point=layout.decimal_point,
        ),
    )


def number_types(head: bytes, layout: TextLayout) -> dict[str, pa.DataType]:
    """The columns that pyarrow reads as whole numbers (int64) or decimals (float64) in the first lines of UTF-8 text.

    Parsing a whole file with these types fixed gives the table that type
    inference gives whenever every later value fits its column's type
    (inference settles on the narrowest type that holds every value, so these
    columns could only widen), and skips inference's trial conversions: about
    a tenth of the parse. :func:`parse_typed` parses again without them when a
    value does not fit. Empty for other encodings, duplicated column names, or
    a head that does not parse on its own.
    """
    import pyarrow as pa

    end = head.rfind(b"\n")
    if layout.encoding != "utf-8" or end <= 0:
        return {}
    try:
        sample = parse_text(
            pa.BufferReader(head[: end + 1]), layout, encoding="utf8", newlines_in_values=layout.newlines_in_values
        )
    except pa.ArrowInvalid:
        return {}
    if len(set(sample.column_names)) != sample.num_columns:
        return {}
    return {field.name: field.type for field in sample.schema if field.type in (pa.int64(), pa.float64())}


def parse_typed(
    source: Callable[[], Any],
    layout: TextLayout,
    *,
    encoding: str,
    newlines_in_values: bool,
    types: dict[str, pa.DataType],
) -> pa.Table:
    """:func:`parse_text` with ``types`` fixed, and again from a fresh ``source()`` without them if a value does not fit."""
    import pyarrow as pa

    if types:
        try:
            return parse_text(source(), layout, encoding=encoding, newlines_in_values=newlines_in_values, types=types)
        except pa.ArrowInvalid as error:
            if not is_conversion_error(error):
                raise
    return parse_text(source(), layout, encoding=encoding, newlines_in_values=newlines_in_values)


def is_conversion_error(error: Exception) -> bool:
    """Whether pyarrow refused a value that does not fit the type fixed for its column."""
    return "CSV conversion error" in str(error)


def needs_second_pass(table: pa.Table, layout: TextLayout) -> bool:
    """Whether text read as UTF-8 came out with undecodable bytes, so that the whole file must be decoded again."""
    return layout.encoding == "utf-8" and _has_undecodable_text(table)


def text_frame(table: pa.Table, display: str, limits: ReadLimits) -> pd.DataFrame:
    """The DataFrame of a parsed text table: a void last column dropped, sizes checked, empty columns as floats."""
    import pyarrow as pa

    last_is_void = table.num_columns > 1 and table.column_names[-1].strip() == ""
    if last_is_void and table.num_rows and table.column(-1).null_count == table.num_rows:
        # "a,b," lines: a trailing delimiter makes an unnamed, empty last column.
        table = table.remove_column(table.num_columns - 1)
    if table.num_rows == 0:
        raise no_rows(display)
    check_size(display, table.num_rows, table.num_columns, limits)
    columns = {}
    for position, column in enumerate(table.columns):
        if pa.types.is_null(column.type):
            columns[position] = pa.chunked_array([pa.nulls(len(column), pa.float64())])
    for position, column in columns.items():
        table = table.set_column(position, table.field(position).name, column)
    return table.to_pandas(date_as_object=False, split_blocks=True)


def _has_undecodable_text(table: pa.Table) -> bool:
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
