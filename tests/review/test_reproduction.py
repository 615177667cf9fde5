"""Reproduction of the printed numbers: rounding ranges, near misses and the causes named.

A printed number covers half a unit of its last digit either side: a printed
0.13 matches [0.125, 0.135) — the end farther from zero is excluded, because
0.135 rounds to 0.14 both half-away-from-zero and half-to-even — and a printed
-0.13 matches (-0.135, -0.125].
"""

from __future__ import annotations

import pytest

from app.review.reproduction import compare_estimate, compare_n_obs, compare_std_error, printed_number
from app.review.view import FindingsView
from tests.review.findings_builder import iv_findings, row, with_claim, with_rows

ESTIMATE = "reproduction.estimate"


@pytest.mark.parametrize(
    ("text", "value", "covers"),
    [
        ("0.13", 0.1250, True),
        ("0.13", 0.1349, True),
        ("0.13", 0.135, False),
        ("0.13", 0.13499999, True),
        ("0.13", 0.125 - 1e-12, True),
        ("0.13", 0.1249, False),
        ("0.13", 0.1351, False),
        ("0.130", 0.1304, True),
        ("0.130", 0.1306, False),
        ("-0.13", -0.1251, True),
        ("-0.13", -0.1351, False),
        ("-0.13", -0.135, False),
        ("-0.13", -0.125, True),
        ("-0.13", -0.13499999, True),
        ("0.130", 0.1305, False),
        ("0.130", 0.1295, True),
        ("1.2e3", 1250.0, False),
        ("1.2e3", 1150.0, True),
        ("1.2e3", 1249.0, True),
        ("1.2e3", 1251.0, False),
        ("12", 11.6, True),
        ("\u22120.13", -0.13, True),
    ],
)
def test_printed_number_covers_its_rounding_range(text, value, covers):
    assert printed_number(text).covers(value) is covers


@pytest.mark.parametrize("text", ["", "n.a.", "0.1.2", None, True])
def test_text_that_is_not_a_number(text):
    assert printed_number(text) is None


@pytest.mark.parametrize(
    ("refit", "standing"), [(0.4150, "sound"), (0.4249, "sound"), (0.4149, "concern"), (0.4051, "concern"), (0.4049, "serious")]
)
def test_estimate_match_near_miss_and_miss(item, refit, standing):
    findings = with_rows(iv_findings(), row("2sls", refit, 0.0808))
    found = item(findings, ESTIMATE)
    assert found.standing == standing
    assert (found.question is None) == (standing == "sound")


def test_estimate_that_matches_another_estimator(item):
    findings = with_claim(iv_findings(), claimed={"estimate": "0.61"})
    comparison = compare_estimate(FindingsView(findings))
    assert not comparison.matches
    assert any("OLS estimate" in cause for cause in comparison.causes)
    assert item(findings, ESTIMATE).standing == "serious"


def test_estimate_with_the_opposite_sign_or_in_percent():
    for printed, words in (("-0.42", "opposite sign"), ("42.1", "in percent")):
        comparison = compare_estimate(FindingsView(with_claim(iv_findings(), claimed={"estimate": printed})))
        assert any(words in cause for cause in comparison.causes), comparison.causes


def test_sample_size_before_deleting_missing_values():
    findings = with_claim(iv_findings(), claimed={"n_obs": 512})
    comparison = compare_n_obs(FindingsView(findings))
    assert not comparison.matches
    assert "before deleting rows with missing values (tenure_years: 12)" in comparison.causes[0]


def test_sample_size_with_filters_not_applied():
    findings = with_claim(iv_findings(), claimed={"n_obs": 900})
    findings["sample"].update(rows_read=900, filters=[{"filter": "region == 'north'", "rows_removed": 388}])
    comparison = compare_n_obs(FindingsView(findings))
    assert any("filters may not have been applied" in cause for cause in comparison.causes)


def test_standard_error_traced_to_classical_errors():
    findings = with_claim(iv_findings(), claimed={"std_error": "0.072"})
    variants = {"classical (homoskedastic)": {"std_error": 0.07183}, "cluster-robust by store_id": {"std_error": 0.11}}
    comparison = compare_std_error(FindingsView(findings, variants=variants))
    assert not comparison.matches
    assert "classical (homoskedastic) standard errors (0.0718)" in comparison.causes[0]


def test_standard_error_that_changes_the_conclusion_is_serious(item):
    findings = with_claim(iv_findings(), claimed={"std_error": "0.31"})
    found = item(findings, "reproduction.std_error")
    assert found.standing == "serious"
    assert "changes the conclusion" in found.evidence


def test_first_stage_f_matches_any_of_its_forms(item):
    findings = with_claim(iv_findings(), claimed={"first_stage_f": "48.2"})
    found = item(findings, "reproduction.first_stage_f")
    assert found.standing == "sound"
    assert "heteroskedasticity-robust (HC1) F" in found.evidence
    findings = with_claim(iv_findings(), claimed={"first_stage_f": "61"})
    assert item(findings, "reproduction.first_stage_f").standing == "concern"


def test_numbers_not_entered_are_not_checked(item):
    findings = with_claim(iv_findings(), claimed={"estimate": None, "std_error": None, "n_obs": None})
    for item_id in ("reproduction.estimate", "reproduction.std_error", "reproduction.n_obs", "reproduction.first_stage_f"):
        assert item(findings, item_id).standing == "not_applicable"
