"""Confidence sets by test inversion: closed-form quadratic sets, grid inversion, shapes in words.

The expected sets are worked out by hand from the inequalities written in
each test (no outside source is needed for elementary algebra).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from app.estimation.confidence_sets import SHAPE_MEANINGS, ConfidenceSet, grid_inversion, quadratic_set


@pytest.mark.parametrize(
    ("coefficients", "expected", "shape"),
    [
        ((1.0, -3.0, 2.0), [(1.0, 2.0)], "bounded interval"),  # (b-1)(b-2) <= 0
        ((-1.0, 3.0, -2.0), [(-math.inf, 1.0), (2.0, math.inf)], "union of two rays"),  # -(b-1)(b-2) <= 0
        ((1.0, 0.0, 1.0), [], "empty"),  # b^2 + 1 <= 0
        ((-1.0, 0.0, -1.0), [(-math.inf, math.inf)], "whole line"),  # -b^2 - 1 <= 0
        ((0.0, 2.0, -4.0), [(-math.inf, 2.0)], "one ray"),  # 2b - 4 <= 0
        ((0.0, -2.0, -4.0), [(-2.0, math.inf)], "one ray"),  # -2b - 4 <= 0
        ((1e-12, -1.0, 1e-3), [(1e-3 * (1 + 1e-15), 1e12)], "bounded interval"),  # nearly linear: roots 1e-3 and 1e12
    ],
)
def test_quadratic_set(coefficients: tuple[float, float, float], expected: list, shape: str) -> None:
    result = quadratic_set(*coefficients, level=0.95, method="closed form")
    assert len(result.intervals) == len(expected)
    for (low, high), (expected_low, expected_high) in zip(result.intervals, expected):
        assert low == pytest.approx(expected_low, rel=1e-9)
        assert high == pytest.approx(expected_high, rel=1e-9)
    assert result.shape == shape
    assert result.to_details()["shape_meaning"] == SHAPE_MEANINGS[shape]


def test_json_fields_of_a_set_with_unbounded_ends() -> None:
    details = ConfidenceSet([(-math.inf, -1.0), (3.0, math.inf)], 0.95, "closed form").to_details()
    assert details == {
        "confidence_level": 0.95,
        "confidence_set": [[-math.inf, -1.0], [3.0, math.inf]],
        "shape": "union of two rays",
        "shape_meaning": SHAPE_MEANINGS["union of two rays"],
        "inversion": "closed form",
    }


def test_grid_inversion_finds_every_piece_and_unbounded_ends() -> None:
    """Accept where sin(b) >= 0.5 within [-10, 10] (sin(-10) = 0.54, so a piece starts at -10) and beyond |b| > 20."""

    def margin(values: np.ndarray) -> np.ndarray:
        inner = np.where(np.abs(values) <= 10, np.sin(values) - 0.5, -1.0)
        return np.where(np.abs(values) > 20, 1.0, inner)

    result = grid_inversion(margin, center=0.0, scale=2.0, level=0.95)
    expected_inner = []
    for k in range(-3, 3):
        low, high = max(math.pi / 6 + 2 * math.pi * k, -10.0), min(5 * math.pi / 6 + 2 * math.pi * k, 10.0)
        if low < high:
            expected_inner.append((low, high))
    pieces = result.intervals
    assert pieces[0][0] == -math.inf and pieces[0][1] == pytest.approx(-20.0, abs=1e-9)
    assert pieces[-1][1] == math.inf and pieces[-1][0] == pytest.approx(20.0, abs=1e-9)
    assert len(pieces) == len(expected_inner) + 2
    for (low, high), (expected_low, expected_high) in zip(pieces[1:-1], expected_inner):
        assert low == pytest.approx(expected_low, abs=1e-10)
        assert high == pytest.approx(expected_high, abs=1e-10)
    assert result.shape == "several pieces"


def test_grid_inversion_of_a_set_that_accepts_nothing_or_everything() -> None:
    assert grid_inversion(lambda values: -np.ones_like(values), center=1.0, scale=1.0, level=0.95).shape == "empty"
    assert grid_inversion(lambda values: np.ones_like(values), center=1.0, scale=1.0, level=0.95).shape == "whole line"


def test_grid_inversion_reaches_far_boundaries() -> None:
    """A boundary at 1e9 scales from the center is still found (grid points reach 1e12 scales)."""
    result = grid_inversion(lambda values: 1e9 - np.abs(values), center=0.0, scale=1.0, level=0.95)
    assert result.intervals[0][0] == pytest.approx(-1e9, rel=1e-10)
    assert result.intervals[0][1] == pytest.approx(1e9, rel=1e-10)
