"""How numbers are written in evidence and reports.

One set of helpers so that every report prints the same number the same way.
Values that are missing (None, as stored for NaN or infinity) print as
``n/a``.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

MISSING = "n/a"
SIGNIFICANT_DIGITS = 4


def as_number(value: object) -> float | None:
    """The value as a finite float, or None when it is missing or not a number."""
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return None
    number = float(value)
    return number if math.isfinite(number) else None


def number(value: object, *, digits: int = SIGNIFICANT_DIGITS) -> str:
    """A number with ``digits`` significant digits, in plain notation where it reads well.

    No thousands separators: numbers often stand in intervals and lists
    (``[-7.769, 14967]``) where a comma would read as a separator.
    """
    x = as_number(value)
    if x is None:
        return MISSING
    if x == 0:
        return "0"
    magnitude = abs(x)
    if magnitude >= 1e7 or magnitude < 1e-4:
        return f"{x:.{digits - 1}e}"
    places = max(0, digits - 1 - math.floor(math.log10(magnitude)))
    return f"{x:.{places}f}"


def setting(value: object) -> str:
    """A setting chosen by a person (q, alpha, delta, a multiplier) in its shortest form: 1, 0.05, 2.5."""
    x = as_number(value)
    return MISSING if x is None else f"{x:g}"


def decimals(value: object, places: int) -> str:
    """A number with a fixed number of decimal places (used beside a printed number)."""
    x = as_number(value)
    return MISSING if x is None else f"{x:.{max(places, 0)}f}"


def count(value: object) -> str:
    """A whole number with thousands separators."""
    x = as_number(value)
    return MISSING if x is None else f"{int(round(x)):,}"


def p_value(value: object) -> str:
    """``p = 0.0312`` style; very small values print as a bound."""
    p = as_number(value)
    if p is None:
        return f"p {MISSING}"
    if p < 1e-4:
        return "p < 0.0001"
    return f"p = {p:.4f}" if p < 0.001 else f"p = {p:.3f}"


def p_value_cell(value: object) -> str:
    """A p-value for a table column: ``0.031`` or ``< 0.0001``."""
    return p_value(value).removeprefix("p = ").removeprefix("p ")


def interval(low: object, high: object) -> str:
    """A closed interval; a missing end is unbounded."""
    left = "-inf" if as_number(low) is None else number(low)
    right = "+inf" if as_number(high) is None else number(high)
    return f"[{left}, {right}]"


def confidence_set(pieces: object) -> str:
    """A confidence set given as ``[[low, high], ...]`` with None for an unbounded end."""
    if not isinstance(pieces, Sequence) or isinstance(pieces, str):
        return MISSING
    if len(pieces) == 0:
        return "empty set"
    parts = []
    for piece in pieces:
        if not isinstance(piece, Sequence) or len(piece) != 2:
            return MISSING
        parts.append(interval(piece[0], piece[1]))
    return " and ".join(parts)


def degrees_of_freedom(df: object) -> str:
    """``1`` or ``2, 423`` for an F test (no thousands separators, which would read as a second comma)."""
    if isinstance(df, Sequence) and not isinstance(df, str):
        return ", ".join(_whole(d) for d in df)
    return _whole(df)


def _whole(value: object) -> str:
    x = as_number(value)
    return MISSING if x is None else str(int(round(x)))


def statistic(value: object, *, distribution: object, df: object) -> str:
    """``F(2, 423) = 49.53`` or ``chi-squared(1) = 0.4435``."""
    names = {"F": "F", "chi2": "chi-squared", "t": "t", "normal": "z"}
    name = names.get(str(distribution), "statistic")
    shown_df = degrees_of_freedom(df) if df is not None else ""
    head = f"{name}({shown_df})" if shown_df and shown_df != MISSING else name
    return f"{head} = {number(value)}"
