"""Describe every variable of a data table: kind, missing values, spread, distribution.

The profile is what a reviewer sees first after an upload, and what the design
builder consults to say "text column in a numeric role". It is computed column
by column with numpy on whole arrays (no loop over rows); columns are spread
over a small thread pool because the heavy numpy steps release the GIL.
"""

from __future__ import annotations

import math
import os
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from typing import Any, Literal, NamedTuple

import numpy as np
import pandas as pd

__all__ = [
    "DISTINCT_CAP",
    "DatasetProfile",
    "Histogram",
    "TopValue",
    "VariableKind",
    "VariableProfile",
    "is_numeric",
    "numeric_columns",
    "profile_frame",
]

VariableKind = Literal["numeric", "binary", "integer", "text", "datetime", "empty"]

TOP_VALUES = 10
"""How many of the most frequent values a text variable reports."""

DISTINCT_CAP = 100_000
"""Distinct counts that would need hashing are exact up to here; above it a profile may say only "more than"."""

# Below this many cells the thread pool costs more than it saves.
_PARALLEL_MIN_CELLS = 200_000

# Integer-valued data whose range is at most this wide is counted with a
# direct-address table (one bincount) instead of hashing.
_DIRECT_SPAN_MAX = 1 << 24

# Mean and sd come from a tally when it has at most one distinct value per this many observations.
_FEW_DISTINCT_SHARE = 8

# Keys spanning fewer values than this are counted in a bitmap (one byte each).
_BITMAP_SPAN_MAX = 1 << 26

# Odd 64-bit multipliers: multiplying by an odd number is a bijection on
# 64-bit integers, so equal keys stay equal and different keys stay different.
_MIXERS = (
    -7046029254386353131,
    -4417276706812531889,
    1609587929392839161,
    -2996140730007749221,
    -49064778989728563,
    6260147208722911213,
)
_SMALL_KEYS = 1 << 14
# Above this the hash table would pass 128 MiB per thread: sort instead.
_HASH_KEYS_MAX = 1 << 22


@dataclass(frozen=True)
class Histogram:
    """Counts of a numeric variable in equal-width bins.

    ``edges`` has one more element than ``counts``. As in :func:`numpy.histogram`,
    every bin is half-open ``[edge_i, edge_i+1)`` except the last, which also
    holds its right edge. Infinite values are not binned.
    """

    edges: tuple[float, ...]
    counts: tuple[int, ...]

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-safe data."""
        return {"edges": [_json_float(edge) for edge in self.edges], "counts": list(self.counts)}


@dataclass(frozen=True)
class TopValue:
    """One of the most frequent values of a text variable."""

    value: str
    count: int

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-safe data."""
        return {"value": self.value, "count": self.count}


@dataclass(frozen=True)
class VariableProfile:
    """Summary of one column.

    ``mean``, ``sd`` (with n - 1 in the denominator), ``min`` and ``max`` are
    ``None`` for variables that are not numeric. ``histogram`` is set for
    numeric variables (unless their values are all equal, or nearly so, at a
    magnitude where floats cannot split their range into bins),
    ``top_values`` (most frequent first, at most ten) for text variables.

    ``n_distinct`` is the exact number of distinct values, or ``None`` when it
    was not counted because the variable has more than ``distinct_more_than``
    distinct values (an evenly spaced sample of the values already held that
    many). ``distinct_more_than`` is ``None`` whenever ``n_distinct`` is set.
    """

    name: str
    kind: VariableKind
    n_missing: int
    n_distinct: int | None
    mean: float | None = None
    sd: float | None = None
    min: float | None = None
    max: float | None = None
    histogram: Histogram | None = None
    top_values: tuple[TopValue, ...] | None = None
    distinct_more_than: int | None = None

    @property
    def is_numeric(self) -> bool:
        """True for the numeric kinds (numeric, binary, integer)."""
        return self.kind in ("numeric", "binary", "integer")

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-safe data: NaN and infinities become ``None``."""
        return {
            "name": self.name,
            "kind": self.kind,
            "n_missing": self.n_missing,
            "n_distinct": self.n_distinct,
            "distinct_more_than": self.distinct_more_than,
            "mean": _json_float(self.mean),
            "sd": _json_float(self.sd),
            "min": _json_float(self.min),
            "max": _json_float(self.max),
            "histogram": None if self.histogram is None else self.histogram.to_dict(),
            "top_values": None
            if self.top_values is None
            else [top.to_dict() for top in self.top_values],
        }


@dataclass(frozen=True)
class DatasetProfile:
    """Summary of a whole table: its size and one :class:`VariableProfile` per column."""

    n_rows: int
    n_columns: int
    variables: tuple[VariableProfile, ...] = field(default=())

    def __getitem__(self, name: str) -> VariableProfile:
        for variable in self.variables:
            if variable.name == name:
                return variable
        raise KeyError(name)

    @property
    def names(self) -> tuple[str, ...]:
        """Column names in table order."""
        return tuple(variable.name for variable in self.variables)

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-safe data (no NaN or infinity anywhere)."""
        return {
            "n_rows": self.n_rows,
            "n_columns": self.n_columns,
            "variables": [variable.to_dict() for variable in self.variables],
        }


def is_numeric(series: pd.Series) -> bool:
    """Whether a column holds numbers that can enter a model as they are.

    Booleans count as numeric (0/1). Text, dates, categories and Python objects
    do not, even when the text happens to look like numbers: the reader has
    already turned every fully numeric column into a numeric dtype, so a text
    column here has at least one value that is not a number.
    """
    dtype = series.dtype
    if isinstance(dtype, pd.CategoricalDtype):
        return False
    return bool(pd.api.types.is_bool_dtype(dtype) or _is_real_number_dtype(dtype))


def numeric_columns(frame: pd.DataFrame) -> list[str]:
    """Names of the columns of ``frame`` for which :func:`is_numeric` holds, in order."""
    return [str(name) for name in frame.columns if is_numeric(frame[name])]


def profile_frame(frame: pd.DataFrame, *, bins: int = 20, distinct_cap: int | None = DISTINCT_CAP) -> DatasetProfile:
    """Profile every column of a table.

    Parameters
    ----------
    frame
        The table, typically as returned by :func:`app.data.readers.read_table`.
    bins
        Number of equal-width histogram bins for numeric variables.
    distinct_cap
        Numbers and dates whose distinct values cannot be counted with a
        bitmap (full-precision floats, integers and decimals of a wide range,
        timestamps) are first counted in an evenly spaced sample of about
        ``2 * distinct_cap`` values. When the sample alone holds more than
        ``distinct_cap`` distinct values, the variable reports
        ``distinct_more_than = distinct_cap`` instead of an exact count, which
        is the slowest statistic of a large file. ``None`` always counts exactly.

    Returns
    -------
    DatasetProfile
        Table size and one :class:`VariableProfile` per column, in column order.

    Notes
    -----
    Kinds: ``empty`` when every value is missing; for numbers, ``binary`` when
    there are exactly two distinct values, ``integer`` when every value is a
    whole number, ``numeric`` otherwise; ``datetime`` for dates and times;
    ``text`` for everything else. Missing values are NaN/None/NaT; they are
    excluded from every statistic and from the distinct count. A variable
    whose distinct count was not taken is never ``binary`` (it has more than
    ``distinct_cap`` distinct values). The standard
    deviation is ``sqrt(sum((x - mean)^2) / (n - 1))``, as pandas'
    ``Series.std``; it is ``None`` below two observations.
    """
    if bins < 1:
        raise ValueError("bins must be at least 1")
    if distinct_cap is not None and distinct_cap < 2:
        raise ValueError("distinct_cap must be at least 2, or None")
    columns = [frame.iloc[:, position] for position in range(frame.shape[1])]

    def work(series: pd.Series) -> VariableProfile:
        return _profile_series(series, bins=bins, distinct_cap=distinct_cap)

    workers = min(len(columns), os.cpu_count() or 1, 8)
    if workers > 1 and frame.shape[0] * frame.shape[1] >= _PARALLEL_MIN_CELLS:
        with ThreadPoolExecutor(max_workers=workers, thread_name_prefix="profile") as pool:
            variables = tuple(pool.map(work, columns))
    else:
        variables = tuple(work(series) for series in columns)
    return DatasetProfile(n_rows=int(frame.shape[0]), n_columns=int(frame.shape[1]), variables=variables)


# ---------------------------------------------------------------------------
# one column


def _profile_series(series: pd.Series, *, bins: int, distinct_cap: int | None) -> VariableProfile:
    # Infinite values make inf - inf = NaN in the mean and sd; that is the answer, not a fault.
    with np.errstate(invalid="ignore", over="ignore"):
        return _profile_any(series, bins=bins, distinct_cap=distinct_cap)


def _profile_any(series: pd.Series, *, bins: int, distinct_cap: int | None) -> VariableProfile:
    name = str(series.name)
    dtype = series.dtype
    if isinstance(dtype, pd.CategoricalDtype):
        return _profile_text(name, series)
    if pd.api.types.is_bool_dtype(dtype) or _is_real_number_dtype(dtype):
        return _profile_numeric(name, series, bins=bins, distinct_cap=distinct_cap)
    if pd.api.types.is_datetime64_any_dtype(dtype) or pd.api.types.is_timedelta64_dtype(dtype):
        return _profile_datetime(name, series, distinct_cap=distinct_cap)
    return _profile_text(name, series)


def _is_real_number_dtype(dtype: Any) -> bool:
    return bool(
        pd.api.types.is_numeric_dtype(dtype)
        and not pd.api.types.is_bool_dtype(dtype)
        and not pd.api.types.is_complex_dtype(dtype)
        and not pd.api.types.is_timedelta64_dtype(dtype)
    )


def _numeric_values(series: pd.Series) -> np.ndarray:
    """The column as a numpy array with NaN for missing (int64 kept as int64 when complete)."""
    dtype = series.dtype
    if isinstance(dtype, np.dtype):
        values = series.to_numpy(copy=False)
        if dtype.kind == "b":
            return values.astype(np.float64)
        if dtype.kind == "i" or (dtype.kind == "u" and dtype.itemsize < 8):
            return values.astype(np.int64, copy=False)
        if dtype.kind == "u":
            return values
        return values.astype(np.float64, copy=False)
    # Extension dtypes (nullable Int64/Float64/boolean, pyarrow-backed numbers).
    if series.isna().any():
        return series.to_numpy(dtype=np.float64, na_value=np.nan)
    if pd.api.types.is_integer_dtype(dtype):
        return series.to_numpy(dtype=np.int64)
    return series.to_numpy(dtype=np.float64)


def _profile_numeric(name: str, series: pd.Series, *, bins: int, distinct_cap: int | None) -> VariableProfile:
    values = _numeric_values(series)
    n_rows = values.shape[0]
    if values.dtype.kind == "f":
        missing = np.isnan(values)
        n_missing = int(np.count_nonzero(missing))
        if n_missing:
            values = values[~missing]
    else:
        n_missing = 0
    n = values.shape[0]
    if n == 0:
        return VariableProfile(name=name, kind="empty", n_missing=n_rows, n_distinct=0)

    low = float(values.min())
    high = float(values.max())
    all_finite = bool(np.isfinite(low) and np.isfinite(high))
    integer_valued = values.dtype.kind in "iu" or (all_finite and _all_whole(values))
    counted = _count_numbers(
        values, low=low, high=high, integer_valued=integer_valued, all_finite=all_finite, cap=distinct_cap
    )
    if isinstance(counted, _Tally):
        n_distinct: int | None = counted.n_distinct
        histogram = counted.histogram(bins=bins, low=low, high=high)
        # Per distinct value when they are few; otherwise two passes over the data cost less.
        few = n_distinct * _FEW_DISTINCT_SHARE <= n
        mean, sd = counted.mean_sd() if few else _mean_sd(values.astype(np.float64, copy=False))
    else:
        n_distinct = counted
        floats = values.astype(np.float64, copy=False)
        mean, sd = _mean_sd(floats)
        if all_finite:
            histogram = _histogram(floats, bins=bins, low=low, high=high)
        else:
            finite = floats[np.isfinite(floats)]
            histogram = None
            if finite.size:
                histogram = _histogram(finite, bins=bins, low=float(finite.min()), high=float(finite.max()))

    if n_distinct == 2:
        kind: VariableKind = "binary"
    elif integer_valued:
        kind = "integer"
    else:
        kind = "numeric"
    return VariableProfile(
        name=name,
        kind=kind,
        n_missing=n_missing,
        n_distinct=n_distinct,
        distinct_more_than=distinct_cap if n_distinct is None else None,
        mean=mean,
        sd=sd,
        min=low,
        max=high,
        histogram=histogram,
    )


def _mean_sd(floats: np.ndarray) -> tuple[float, float | None]:
    """Mean and standard deviation (n - 1), in two passes; no sd below two values."""
    mean = float(floats.mean())
    if floats.shape[0] < 2:
        return mean, None
    # Squared in place and summed pairwise, as pandas does; np.dot would
    # call BLAS, whose helper threads then spin and take CPU from the rest.
    deviations = floats - mean
    return mean, float(np.sqrt(np.square(deviations, out=deviations).sum() / (floats.shape[0] - 1)))


@dataclass(frozen=True)
class _Tally:
    """How often each value occurs: ``counts[k]`` values equal ``(first + k) / scale``.

    Whole numbers have ``scale`` 1; numbers with d decimals, ``10**d``. Every
    statistic then takes one step per possible value instead of a pass over
    the data.
    """

    counts: np.ndarray
    first: int
    scale: float

    @property
    def n_distinct(self) -> int:
        """Number of distinct values."""
        return int(np.count_nonzero(self.counts))

    def mean_sd(self) -> tuple[float, float | None]:
        """Mean and standard deviation (n - 1); no sd below two values.

        Notes
        -----
        With ``k`` the offsets present and ``w`` their counts, the mean offset
        ``m = sum(w k) / n`` comes from an exact integer sum, the mean is
        ``(first + m) / scale``, and the deviations ``(k - m) / scale`` do not
        lose digits to a large ``first``.
        """
        present = np.flatnonzero(self.counts)
        weights = self.counts[present]
        n = int(weights.sum())
        mean_offset = int((present * weights).sum()) / n
        mean = (self.first + mean_offset) / self.scale
        if n < 2:
            return mean, None
        deviations = (present - mean_offset) / self.scale
        return mean, math.sqrt(float((weights * deviations * deviations).sum()) / (n - 1))

    def histogram(self, *, bins: int, low: float, high: float) -> Histogram | None:
        """The histogram :func:`numpy.histogram` gives for the values (``low`` and ``high`` their bounds).

        Notes
        -----
        For whole numbers: for a whole number v and any edge e, ``v < e``
        exactly when ``v < ceil(e)``, so bin i (``e_i <= v < e_i+1``, the last
        bin closed) holds the values from ``ceil(e_i)`` up to ``ceil(e_i+1) - 1``:
        differences of the cumulative counts. Beyond 2**53 not every whole
        number is a float, so there (and for a single value, where numpy
        widens the range by 0.5), and for decimals, the distinct values are
        binned with their counts as weights. ``None`` as for :func:`_histogram`.
        """
        try:
            edges = np.histogram_bin_edges(np.empty(0), bins=bins, range=(low, high))
        except ValueError:
            return None
        if self.scale == 1 and low < high and max(abs(low), abs(high)) < 2.0**53:
            starts = np.clip(np.ceil(edges) - low, 0, self.counts.shape[0]).astype(np.intp)
            starts[-1] = self.counts.shape[0]
            cumulative = np.concatenate(([0], np.cumsum(self.counts)))
            counts = cumulative[starts[1:]] - cumulative[starts[:-1]]
        else:
            present = np.flatnonzero(self.counts)
            values = (present + self.first).astype(np.float64) / self.scale
            counts, edges = np.histogram(values, bins=bins, range=(low, high), weights=self.counts[present])
        return Histogram(edges=tuple(float(e) for e in edges), counts=tuple(int(c) for c in counts))


def _count_numbers(
    values: np.ndarray, *, low: float, high: float, integer_valued: bool, all_finite: bool, cap: int | None
) -> _Tally | int | None:
    """A tally of the values, their exact distinct count, or ``None`` when a sample shows more than ``cap``.

    ``values`` hold no NaN; ``low`` and ``high`` are their bounds. Whole
    numbers in a range of at most :data:`_DIRECT_SPAN_MAX` are tallied with
    one bincount, and so are short decimals (see :func:`_decimal_keys`) whose
    keys span such a range. Other numbers are counted from 64-bit keys, after
    :func:`_sample_exceeds` had its say.
    """
    if integer_valued and high - low <= _DIRECT_SPAN_MAX:
        first = values.min()  # in the values' own dtype: int64 beyond 2**53 stays exact
        offsets = (values - first).astype(np.intp, copy=False)
        return _Tally(counts=np.bincount(offsets), first=int(first), scale=1.0)
    if values.dtype.kind == "f":
        if _sample_exceeds(values, _float_keys, cap):
            return None
        decimal = _decimal_keys(values, low, high) if all_finite and not integer_valued else None
        if decimal is None:
            # Bit patterns of floats span a huge range: hash them directly.
            return _count_distinct_keys(_float_keys(values))
        if decimal.high - decimal.low <= _DIRECT_SPAN_MAX:
            return _Tally(counts=np.bincount(decimal.keys - decimal.low), first=decimal.low, scale=decimal.scale)
        return _count_distinct_keys(decimal.keys, decimal.low, decimal.high)
    keys = values.astype(np.int64, copy=False)
    if _sample_exceeds(keys, _same_keys, cap):
        return None
    return _count_distinct_keys(keys, int(keys.min()), int(keys.max()))


def _float_keys(values: np.ndarray) -> np.ndarray:
    """64-bit keys equal exactly when the floats are equal (``+ 0.0`` folds -0.0 into 0.0)."""
    return (values + 0.0).view(np.int64)


def _same_keys(keys: np.ndarray) -> np.ndarray:
    """Integer keys as they are."""
    return keys


def _sample_exceeds(values: np.ndarray, keys: Callable[[np.ndarray], np.ndarray], cap: int | None) -> bool:
    """Whether an evenly spaced sample of about ``2 * cap`` values holds more than ``cap`` distinct ones.

    Notes
    -----
    A sample cannot hold more distinct values than the whole column, so a
    ``True`` answer proves that the column has more than ``cap``. Counting
    the sample costs a fraction of counting every value.
    """
    if cap is None or values.shape[0] <= 2 * cap:
        return False
    sample = values[:: values.shape[0] // (2 * cap)]
    return _count_distinct_keys(keys(sample)) > cap


def _all_whole(values: np.ndarray) -> bool:
    sample = values[:: max(1, values.shape[0] // 512)]
    if not np.array_equal(sample, np.trunc(sample)):
        return False
    return bool(np.array_equal(values, np.trunc(values)))


def _histogram(values: np.ndarray, *, bins: int, low: float, high: float) -> Histogram | None:
    """Equal-width bins between ``low`` and ``high``, the data's own bounds (passed to spare numpy two passes).

    ``None`` when floats cannot split the range into ``bins`` bins: values
    that are all equal, or nearly so, at a magnitude beyond about 1e15.
    """
    try:
        counts, edges = np.histogram(values, bins=bins, range=(low, high))
    except ValueError:
        return None
    return Histogram(edges=tuple(float(e) for e in edges), counts=tuple(int(c) for c in counts))


class _DecimalKeys(NamedTuple):
    """Integer keys ``rint(x * scale)`` of numbers with few decimals, and their bounds."""

    keys: np.ndarray
    low: int
    high: int
    scale: float


def _decimal_keys(values: np.ndarray, low: float, high: float) -> _DecimalKeys | None:
    """Integer keys ``rint(x * 10**d)`` and their bounds when every value has at most d decimals (d <= 9).

    Notes
    -----
    Numbers read from text usually carry few decimals. When ``rint(x * 10**d) / 10**d``
    gives back every x exactly, two different x cannot share a key (each x
    equals its key divided by ``10**d``), so counting distinct keys counts
    distinct values. Keys of a narrow range are then tallied or counted in a
    bitmap, much faster than hashing 64-bit floats.
    """
    step = max(1, values.shape[0] // 512)
    sample = values[::step]
    for places in range(1, 10):
        scale = 10.0**places
        if np.array_equal(np.rint(sample * scale) / scale, sample):
            break
    else:
        return None
    if max(abs(low), abs(high)) * scale >= 2.0**52:
        return None
    scaled = values * scale
    np.rint(scaled, out=scaled)
    if not np.array_equal(scaled / scale, values):
        return None
    # rint and a positive scale keep the order, so the bounds map to the key bounds.
    return _DecimalKeys(scaled.astype(np.int64), int(np.rint(low * scale)), int(np.rint(high * scale)), scale)


def _count_distinct_keys(keys: np.ndarray, low: int | None = None, high: int | None = None) -> int:
    """Exact number of distinct 64-bit integer keys (``low`` and ``high``, when given, are their bounds).

    Notes
    -----
    Keys within a narrow known range are marked in a bitmap, one byte per
    possible key. Otherwise: sorting a million float64 values takes ~60 ms on the reference machine
    (numpy's scalar sort). Instead each round hashes the keys (a multiply by an
    odd constant, which is a bijection, then the top bits as a slot) into a
    table with four to eight slots per key. A slot whose keys all equal the one
    written last holds exactly one distinct key; only the keys of slots that
    mix different keys go to the next round, with another multiplier. Few
    keys remain after two or three rounds; they are sorted.
    """
    if keys.shape[0] == 0:
        return 0
    if low is not None and high is not None and high - low < _BITMAP_SPAN_MAX:
        span = high - low
        seen = np.zeros(span + 1, dtype=np.bool_)
        seen[keys - low] = True
        return int(np.count_nonzero(seen))
    total = 0
    for multiplier in _MIXERS:
        n = keys.shape[0]
        if n <= _SMALL_KEYS or n > _HASH_KEYS_MAX:
            break
        bits = n.bit_length() + 2
        mask = (1 << bits) - 1
        hashed = keys * multiplier
        slots = (hashed >> (64 - bits)) & mask
        last = np.empty(mask + 1, dtype=np.int64)
        last[slots] = hashed
        differs = last.take(slots) != hashed
        used = np.zeros(mask + 1, dtype=np.bool_)
        used[slots] = True
        total += int(np.count_nonzero(used))
        if not differs.any():
            return total
        mixed = np.zeros(mask + 1, dtype=np.bool_)
        mixed[slots[differs]] = True
        total -= int(np.count_nonzero(mixed))
        keys = hashed[mixed.take(slots)]
    if keys.shape[0] == 0:
        return total
    ordered = np.sort(keys)
    return total + 1 + int(np.count_nonzero(ordered[1:] != ordered[:-1]))


def _profile_datetime(name: str, series: pd.Series, *, distinct_cap: int | None) -> VariableProfile:
    missing = series.isna().to_numpy()
    n_missing = int(np.count_nonzero(missing))
    if n_missing == len(series):
        return VariableProfile(name=name, kind="empty", n_missing=n_missing, n_distinct=0)
    if isinstance(series.dtype, np.dtype):
        keys = series.to_numpy(copy=False).view(np.int64)
        if n_missing:
            keys = keys[~missing]
        n_distinct = None if _sample_exceeds(keys, _same_keys, distinct_cap) else _count_distinct_keys(keys)
    else:
        n_distinct = int(series.nunique(dropna=True))
    return VariableProfile(
        name=name,
        kind="datetime",
        n_missing=n_missing,
        n_distinct=n_distinct,
        distinct_more_than=distinct_cap if n_distinct is None else None,
    )


def _profile_text(name: str, series: pd.Series) -> VariableProfile:
    n_missing = int(series.isna().sum())
    if n_missing == len(series):
        return VariableProfile(name=name, kind="empty", n_missing=n_missing, n_distinct=0)
    counts = series.value_counts(dropna=True, sort=True)
    if isinstance(series.dtype, pd.CategoricalDtype):
        counts = counts[counts > 0]  # unused categories are listed with a zero count
    top = tuple(
        TopValue(value=str(value), count=int(count))
        for value, count in zip(counts.index[:TOP_VALUES], counts.to_numpy()[:TOP_VALUES], strict=True)
    )
    return VariableProfile(
        name=name, kind="text", n_missing=n_missing, n_distinct=int(len(counts)), top_values=top
    )


def _json_float(value: float | None) -> float | None:
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None
