"""Structured row filters: ``{column, op, value}`` applied without evaluating any text."""

from __future__ import annotations

import operator
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import pandas as pd

from app.errors import DesignError
from app.spec import FilterOp, RowFilter

_COMPARE: dict[FilterOp, Callable[[pd.Series, object], pd.Series]] = {
    FilterOp.EQ: operator.eq,
    FilterOp.NE: operator.ne,
    FilterOp.LT: operator.lt,
    FilterOp.LE: operator.le,
    FilterOp.GT: operator.gt,
    FilterOp.GE: operator.ge,
}
_ORDERING = {FilterOp.LT, FilterOp.LE, FilterOp.GT, FilterOp.GE}


@dataclass(frozen=True)
class FilterStep:
    """One filter and the number of rows it removed (applied in the listed order)."""

    description: str
    rows_removed: int


def filter_mask(frame: pd.DataFrame, filters: list[RowFilter]) -> tuple[np.ndarray, list[FilterStep]]:
    """Return the boolean mask of rows kept by every filter, and the rows each removed.

    A row whose filter column is missing fails the filter (it cannot be shown
    to satisfy it), except for ``!=`` where a missing value is kept out as well.
    """
    keep = np.ones(len(frame), dtype=bool)
    steps: list[FilterStep] = []
    for row_filter in filters:
        series = frame[row_filter.column]
        passed = _evaluate(series, row_filter)
        removed = int(np.count_nonzero(keep & ~passed))
        keep &= passed
        steps.append(FilterStep(description=row_filter.describe(), rows_removed=removed))
    return keep, steps


def _evaluate(series: pd.Series, row_filter: RowFilter) -> np.ndarray:
    numeric = pd.api.types.is_numeric_dtype(series) or pd.api.types.is_bool_dtype(series)
    values = row_filter.value if isinstance(row_filter.value, list) else [row_filter.value]
    for value in values:
        value_is_number = isinstance(value, (int, float)) and not isinstance(value, bool)
        if numeric and isinstance(value, str):
            raise DesignError(
                f"filter '{row_filter.describe()}': column '{row_filter.column}' holds numbers "
                "but the filter compares it with text"
            )
        if not numeric and value_is_number and row_filter.op in _ORDERING:
            raise DesignError(
                f"filter '{row_filter.describe()}': column '{row_filter.column}' holds text; "
                "'<', '<=', '>' and '>=' need a numeric column"
            )
    if not numeric:
        series = series.astype("str").where(series.notna())
        values = [str(v) for v in values]
    if row_filter.op is FilterOp.IN:
        passed = series.isin(values)
    else:
        passed = _COMPARE[row_filter.op](series, values[0])
    return np.asarray(passed.fillna(False), dtype=bool) & series.notna().to_numpy()
