"""Shared builders for the reader and profile tests.

Every file a test reads is written here, into pytest's tmp_path, by the
format's own library; nothing is downloaded and nothing large is committed.
"""

from __future__ import annotations

import hashlib
from collections.abc import Callable
from pathlib import Path

import numpy as np
import pandas as pd
import pytest


@pytest.fixture
def survey() -> pd.DataFrame:
    """A small replication-style table: ids, a wage with a gap, a dummy, accented text, dates."""
    return pd.DataFrame(
        {
            "id": np.array([1, 2, 3, 4, 5], dtype=np.int64),
            "wage": [12.5, np.nan, 7.25, 30.0, 18.75],
            "educ": np.array([12, 16, 12, 18, 14], dtype=np.int64),
            "treated": np.array([0, 1, 1, 0, 1], dtype=np.int64),
            "city": pd.Series(["Zürich", "São Paulo", None, "Łódź", "Oslo"], dtype="str"),
            "interview": pd.to_datetime(["2019-03-01", "2019-03-02", None, "2020-11-30", "2021-01-15"]),
        }
    )


def comparable(series: pd.Series) -> list[object]:
    """Values in a form that compares equal across formats (None for any missing value)."""
    if pd.api.types.is_datetime64_any_dtype(series.dtype):
        return [None if pd.isna(value) else pd.Timestamp(value).to_pydatetime() for value in series]
    if pd.api.types.is_numeric_dtype(series.dtype):
        return [None if pd.isna(value) else float(value) for value in series]
    return [None if pd.isna(value) else str(value) for value in series]


def _assert_same_table(read: pd.DataFrame, expected: pd.DataFrame) -> None:
    assert list(read.columns) == list(expected.columns)
    assert isinstance(read.index, pd.RangeIndex) and read.index.start == 0
    for column in expected.columns:
        assert comparable(read[column]) == comparable(expected[column]), column


@pytest.fixture
def same_table() -> Callable[[pd.DataFrame, pd.DataFrame], None]:
    """Assert that a table read back holds the values written, whatever the dtypes."""
    return _assert_same_table


@pytest.fixture
def stored(tmp_path: Path) -> Callable[[bytes], Path]:
    """Store bytes the way uploads are stored: under their SHA-256, with no extension."""

    def store(content: bytes) -> Path:
        path = tmp_path / hashlib.sha256(content).hexdigest()
        path.write_bytes(content)
        return path

    return store
