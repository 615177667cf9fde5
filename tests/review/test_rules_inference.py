"""Inference: weak-instrument-robust sets against the usual interval; few clusters; classical errors.

The robust set is Anderson-Rubin when exactly identified and CLR when
over-identified (Andrews, Moreira & Stock 2006; Andrews, Stock & Sun 2019).
Fewer than 50 clusters is a concern (common practice; Cameron & Miller 2015).
"""

from __future__ import annotations

import pytest

from app.review.rules.inference import is_unbounded, set_contains
from tests.review.findings_builder import iv_findings, result, row, with_covariance, with_diagnostic, with_rows

ROBUST = "inference.weak_iv_robust"
CLUSTERS = "inference.few_clusters"


@pytest.mark.parametrize(
    ("pieces", "contains"),
    [([[0.0, 1.0]], True), ([[1e-9, 1.0]], False), ([[None, -0.5], [0.2, None]], False), ([[None, None]], True), ([], False)],
)
def test_confidence_set_membership(pieces, contains):
    assert set_contains(pieces, 0.0) is contains


def test_unbounded_sets():
    assert is_unbounded([[None, -0.5], [0.2, None]])
    assert not is_unbounded([[0.1, 0.5]])


@pytest.mark.parametrize(
    ("low", "standing"), [(0.0, "serious"), (-0.0001, "serious"), (0.0001, "sound")]
)
def test_clr_set_must_exclude_zero_when_the_usual_interval_does(item, low, standing):
    findings = with_diagnostic(iv_findings(), "clr", result(4.0, 0.06, confidence_set=[[low, 0.9]]))
    found = item(findings, ROBUST)
    assert found.standing == standing
    assert "Conditional likelihood-ratio (CLR)" in found.evidence


def test_exactly_identified_claims_read_the_anderson_rubin_set(item):
    findings = iv_findings(instruments=["schedule_lottery"])
    findings["sample"]["columns"]["instruments"] = ["schedule_lottery"]
    findings = with_diagnostic(findings, "anderson_rubin", result(3.0, 0.08, confidence_set=[[-0.05, 0.9]]))
    found = item(findings, ROBUST)
    assert found.standing == "serious"
    assert "Anderson-Rubin" in found.evidence


def test_agreement_when_both_include_zero(item):
    findings = with_rows(iv_findings(), row("2sls", 0.1, 0.08))
    findings = with_diagnostic(findings, "clr", result(1.0, 0.3, confidence_set=[[-0.3, 0.5]]))
    assert item(findings, ROBUST).standing == "sound"


@pytest.mark.parametrize(
    ("pieces", "words"), [([[None, -2.0], [0.1, None]], "unbounded"), ([], "empty")]
)
def test_unbounded_or_empty_sets_are_a_concern(item, pieces, words):
    findings = with_diagnostic(iv_findings(), "clr", result(9.0, 0.003, confidence_set=pieces))
    found = item(findings, ROBUST)
    assert found.standing == "concern"
    assert words in found.question


@pytest.mark.parametrize(("count", "standing"), [(50, "sound"), (49, "concern"), (51, "sound")])
def test_number_of_clusters(item, count, standing):
    findings = with_covariance(iv_findings(), "cluster", clusters={"store": count})
    found = item(findings, CLUSTERS)
    assert found.standing == standing
    assert f"G = {count}" in found.evidence


def bootstrap(*, wald_p: float | None, ar_p: float) -> dict:
    return result(
        3.0, ar_p, replications=9999, seed=20240611, clusters=18,
        anderson_rubin={"statistic": 3.0, "p_value": ar_p}, wald={"statistic": 4.1, "p_value": wald_p},
    )


@pytest.mark.parametrize(("boot_p", "standing"), [(0.05, "serious"), (0.0499, "sound"), (0.0501, "serious")])
def test_wild_cluster_bootstrap_of_the_coefficient_test_decides(item, boot_p, standing):
    findings = with_covariance(iv_findings(), "cluster", clusters={"store": 18})
    found = item(with_diagnostic(findings, "wild_cluster_bootstrap", bootstrap(wald_p=boot_p, ar_p=0.9)), CLUSTERS)
    assert found.standing == standing
    assert "9,999 replications" in found.evidence
    assert "2SLS t statistic" in found.evidence


def test_anderson_rubin_bootstrap_when_there_is_no_coefficient_bootstrap(item):
    findings = with_covariance(iv_findings(), "cluster", clusters={"store": 18})
    found = item(with_diagnostic(findings, "wild_cluster_bootstrap", bootstrap(wald_p=None, ar_p=0.2)), CLUSTERS)
    assert found.standing == "serious"
    assert "Anderson-Rubin test of no effect" in found.evidence


def test_clusters_do_not_apply_without_clustering(item):
    assert item(iv_findings(), CLUSTERS).standing == "not_applicable"


def test_classical_standard_errors_are_a_concern(item):
    assert item(with_covariance(iv_findings(), "homoskedastic"), "inference.variance_choice").standing == "concern"
    assert item(iv_findings(), "inference.variance_choice").standing == "sound"
