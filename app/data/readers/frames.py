"""The common finish of every reader: column names checked, sizes checked, dtypes brought into four families."""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from app.data.readers.limits import ReadLimits, check_size
from app.errors import DataFileError


def finish_frame(frame: pd.DataFrame, display: str, limits: ReadLimits) -> pd.DataFrame:
    """Check the names and size of a reader's frame and bring its columns into the four families."""
    names = [header_text(name) for name in frame.columns]
    check_names(names, display)
    stripped = [name.strip() for name in names]
    if stripped != list(frame.columns):
        frame.columns = stripped
    if len(frame) == 0:
        raise no_rows(display)
    check_size(display, len(frame), frame.shape[1], limits)
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


def check_names(names: list[str], display: str) -> None:
    """Refuse blank and duplicated column names (surrounding spaces do not count)."""
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


def no_rows(display: str, where: str | None = None) -> DataFileError:
    """The refusal of a table that has column names but no rows."""
    subject = f'"{display}": {where}' if where else f'"{display}"'
    return DataFileError(f"{subject} has a header (column names) but no rows of data.")


def header_text(value: Any) -> str:
    """A header cell as a column name (whole-number floats without their ``.0``)."""
    if value is None:
        return ""
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    return str(value)


def is_text(series: pd.Series) -> bool:
    """Whether a column holds text (categoricals do not count)."""
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
