"""Reading Stata, SPSS and SAS files with pyreadstat (value labels are not applied)."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path
from typing import Any

import pandas as pd

from app.data.readers.detection import Detected
from app.data.readers.frames import is_text
from app.data.readers.limits import ReadLimits, check_size
from app.data.readers.messages import damaged
from app.errors import DataFileError


def read_stata(path: Path, detected: Detected, display: str, limits: ReadLimits, **_: Any) -> pd.DataFrame:
    """A Stata .dta file."""
    import pyreadstat

    return _read_readstat(pyreadstat.read_dta, path, display, limits, "a Stata file")


def read_spss(path: Path, detected: Detected, display: str, limits: ReadLimits, **_: Any) -> pd.DataFrame:
    """An SPSS .sav or .zsav file."""
    import pyreadstat

    return _read_readstat(pyreadstat.read_sav, path, display, limits, "an SPSS file")


def read_sas(path: Path, detected: Detected, display: str, limits: ReadLimits, **_: Any) -> pd.DataFrame:
    """A SAS .sas7bdat file."""
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
            check_size(display, rows if rows is not None and rows >= 0 else 0, columns, limits)
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
                raise damaged(display, label, second) from None
        else:
            raise damaged(display, label, error) from None
    # Stata, SPSS and SAS store a missing text value as an empty string.
    for column in frame.columns:
        if is_text(frame[column]):
            values = frame[column]
            frame[column] = values.mask(values.str.strip() == "")
    return frame


def _is_encoding_error(error: Exception) -> bool:
    text = f"{type(error).__name__} {error}".lower()
    return isinstance(error, UnicodeDecodeError) or any(
        word in text for word in ("encod", "unicode", "iconv", "convert string")
    )
