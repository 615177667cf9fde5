"""Tests for app.data.readers.text: number types taken from the head never change the table pyarrow's inference gives."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pyarrow as pa
import pyarrow.csv
import pytest

from app.data.readers import read_table
from app.data.readers.text import number_types
from app.data.readers.text_layout import TextLayout

UTF8_COMMA = TextLayout(encoding="utf-8", delimiter=",", decimal_point=".", newlines_in_values=False, n_header_fields=3)
HEAD_ROWS = 150_000  # more than the megabyte the head holds


def whole_numbers_then(last_row: bytes) -> bytes:
    """A CSV whose 'yield_t' column holds whole numbers through the head, then ``last_row``."""
    rows = b"".join(b"%d,%d,north\n" % (i, i % 7) for i in range(HEAD_ROWS))
    return b"plot,yield_t,region\n" + rows + last_row


def test_the_head_names_its_whole_number_and_decimal_columns_only() -> None:
    head = b"plot,yield_t,region,empty\n1,2.5,north,\n2,3,south,\n"
    layout = TextLayout(encoding="utf-8", delimiter=",", decimal_point=".", newlines_in_values=False, n_header_fields=4)
    assert number_types(head, layout) == {"plot": pa.int64(), "yield_t": pa.float64()}


def test_no_types_are_taken_from_a_head_with_duplicated_names_or_another_encoding() -> None:
    assert number_types(b"plot,plot,region\n1,2,north\n", UTF8_COMMA) == {}
    latin = TextLayout(encoding="cp1252", delimiter=",", decimal_point=".", newlines_in_values=False, n_header_fields=3)
    assert number_types(b"plot,yield_t,region\n1,2,north\n", latin) == {}


def test_a_head_cut_inside_a_quoted_value_gives_no_types() -> None:
    assert number_types(b'plot,note,region\n1,"two\nlines', UTF8_COMMA) == {}


@pytest.mark.parametrize(
    ("last_row", "expected_dtype"),
    [
        (b"9,2.5,north\n", "float64"),  # a decimal below the head: the column is read as decimals
        (b"9,lost,north\n", "str"),  # text below the head: the column is text
        (b"9,99999999999999999999,north\n", "float64"),  # beyond int64: decimals, as inference reads it
    ],
)
def test_a_value_below_the_head_that_does_not_fit_gives_the_table_inference_gives(
    tmp_path: Path, last_row: bytes, expected_dtype: str
) -> None:
    path = tmp_path / "plots.csv"
    path.write_bytes(whole_numbers_then(last_row))
    frame = read_table(path, name="plots.csv")
    # Reference: pyarrow's own type inference over the whole file, without hints.
    inferred = pyarrow.csv.read_csv(path).to_pandas()
    assert str(frame["yield_t"].dtype) == expected_dtype
    assert frame["yield_t"].iloc[-1] == inferred["yield_t"].iloc[-1]
    pd.testing.assert_series_equal(frame["plot"], inferred["plot"])
