"""Numbers on pages: whole numbers as counts, others to four significant digits, missing as n/a."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta, timezone

import pytest

from app.web import templating


@pytest.mark.parametrize(
    ("value", "text"),
    [(2, "2"), (2388, "2,388"), (0.05777, "0.05777"), (-2.8448, "-2.845"), (297.52, "297.5"), (3.46e-20, "3.460e-20"), (None, "n/a")],
)
def test_numbers(value: object, text: str) -> None:
    assert templating.number(value) == text


@pytest.mark.parametrize(("value", "text"), [(0.01458, "0.015"), (0.000812, "0.0008"), (3e-9, "< 0.0001"), (None, "n/a")])
def test_p_values(value: object, text: str) -> None:
    assert templating.pvalue(value) == text


def test_an_interval_needs_both_ends() -> None:
    assert templating.interval(-3.296, -2.394) == "[-3.296, -2.394]"
    assert templating.interval(None, 1.0) == "n/a"


def test_degrees_of_freedom_of_an_f_test() -> None:
    assert templating.degrees_of_freedom([2, 2388]) == "2, 2,388"
    assert templating.degrees_of_freedom(19) == "19"
    assert templating.degrees_of_freedom(None) == ""


def test_times_are_shown_in_utc() -> None:
    moment = datetime(2026, 3, 1, 9, 30, tzinfo=timezone(timedelta(hours=2)))
    assert templating.when(moment) == "2026-03-01 07:30 UTC"
    assert templating.when(datetime(2026, 3, 1, tzinfo=UTC)) == "2026-03-01 00:00 UTC"


def test_item_ids_become_safe_element_ids() -> None:
    assert templating.dom_id("relevance.effective_f") == "relevance--effective_f"
