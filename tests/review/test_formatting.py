"""How numbers print: significant digits, p-values, intervals and sets, missing values."""

from __future__ import annotations

import math

import pytest

from app.review.formatting import confidence_set, count, number, p_value, p_value_cell, setting, statistic


@pytest.mark.parametrize(
    ("value", "shown"),
    [(-2.844838, "-2.845"), (0.2301473, "0.2301"), (297.4575, "297.5"), (14967.2, "14967"), (0.0012345, "0.001234"),
     (3.2e-6, "3.200e-06"), (0, "0"), (None, "n/a"), (math.nan, "n/a"), (True, "n/a")],
)
def test_numbers_with_four_significant_digits(value, shown):
    assert number(value) == shown


def test_counts_settings_and_p_values():
    assert count(2394) == "2,394"
    assert setting(0.05) == "0.05" and setting(1.0) == "1"
    assert p_value(0.04999) == "p = 0.050" and p_value(0.00042) == "p = 0.0004" and p_value(3e-9) == "p < 0.0001"
    assert p_value_cell(0.31) == "0.310" and p_value_cell(1e-7) == "< 0.0001"


def test_intervals_and_sets_keep_their_commas_unambiguous():
    assert confidence_set([[-7.769, 14967.0]]) == "[-7.769, 14967]"
    assert confidence_set([[None, -2.0], [0.1, None]]) == "[-inf, -2.000] and [0.1000, +inf]"
    assert confidence_set([]) == "empty set"
    assert statistic(297.457, distribution="F", df=[2, 2388]) == "F(2, 2388) = 297.5"
    assert statistic(3.1, distribution="chi2", df=1) == "chi-squared(1) = 3.100"
