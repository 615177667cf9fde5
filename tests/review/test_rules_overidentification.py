"""Over-identification: the joint test at its 5% threshold, and which instrument the C statistic blames.

Hansen J is read with robust or clustered errors, Sargan with classical ones
(Sargan 1958; Hansen 1982). With one over-identifying restriction every C
statistic equals J (Hayashi 2000, sec. 3.6), so no instrument can be singled out.
"""

from __future__ import annotations

import pytest

from tests.review.findings_builder import iv_findings, result, with_claim, with_covariance, with_diagnostic

JOINT = "overidentification.joint_test"
BLAMED = "overidentification.blamed_instrument"


@pytest.mark.parametrize(("p_value", "standing"), [(0.05, "sound"), (0.0499, "serious"), (0.0501, "sound")])
def test_hansen_j_with_robust_errors(item, p_value, standing):
    findings = with_diagnostic(iv_findings(), "hansen_j", result(3.84, p_value, df=1, distribution="chi2"))
    found = item(findings, JOINT)
    assert found.standing == standing
    assert "Hansen J" in found.evidence


def test_sargan_with_classical_errors(item):
    findings = with_covariance(iv_findings(), "homoskedastic")
    findings = with_diagnostic(findings, "sargan", result(9.0, 0.003, df=1, distribution="chi2"))
    found = item(findings, JOINT)
    assert found.standing == "serious"
    assert "Sargan" in found.evidence


def test_exactly_identified_model_cannot_be_tested(item):
    reason = "the model is exactly identified; over-identification cannot be tested"
    findings = with_diagnostic(iv_findings(), "hansen_j", result(standing="not_applicable", reason=reason))
    found = item(findings, JOINT)
    assert found.standing == "not_applicable"
    assert "exactly identified" in found.evidence


def test_one_restriction_cannot_single_out_an_instrument(item):
    findings = with_diagnostic(iv_findings(), "hansen_j", result(20.0, 1e-5, df=1, distribution="chi2"))
    found = item(findings, BLAMED)
    assert found.standing == "concern"
    assert "cannot say which instrument" in found.evidence


def three_instruments(c_p_values: dict[str, float], *, joint_p: float, j_without: dict[str, float] | None = None) -> dict:
    """Three instruments, one focal regressor: C statistics and the J of the two instruments left (chi2(1))."""
    names = list(c_p_values)
    findings = with_claim(iv_findings(), instruments=names)
    findings["sample"]["columns"]["instruments"] = names
    findings = with_diagnostic(findings, "hansen_j", result(12.0, joint_p, df=2, distribution="chi2"))
    j_without = j_without or {name: 0.5 for name in names}
    entries = [
        result(4.0, p, df=1, distribution="chi2", instruments=[name], j_without_suspects=j_without[name])
        for name, p in c_p_values.items()
    ]
    return with_diagnostic(findings, "c_statistic", entries)


@pytest.mark.parametrize(("p_value", "standing"), [(0.05, "concern"), (0.0499, "serious"), (0.0501, "concern")])
def test_c_statistic_names_the_blamed_instrument(item, p_value, standing):
    findings = three_instruments({"schedule_lottery": 0.7, "trainer_distance": 0.6, "store_footfall": p_value}, joint_p=0.001)
    found = item(findings, BLAMED)
    assert found.standing == standing
    if standing == "serious":
        assert "store_footfall" in found.question
        assert "schedule_lottery" not in found.question


@pytest.mark.parametrize(("j_rest", "standing"), [(3.8415, "concern"), (3.84, "serious")])
def test_blamed_only_if_the_other_instruments_then_agree(item, j_rest, standing):
    """chi2(1) 95% quantile is 3.8415: the remaining J must stay below it."""
    findings = three_instruments(
        {"schedule_lottery": 0.01, "trainer_distance": 0.6, "store_footfall": 0.7},
        joint_p=0.001,
        j_without={"schedule_lottery": j_rest, "trainer_distance": 40.0, "store_footfall": 40.0},
    )
    assert item(findings, BLAMED).standing == standing


def test_every_c_rejecting_names_only_the_one_whose_removal_restores_agreement(item):
    findings = three_instruments(
        {"schedule_lottery": 1e-6, "trainer_distance": 1e-4, "store_footfall": 1e-40},
        joint_p=1e-40,
        j_without={"schedule_lottery": 190.0, "trainer_distance": 210.0, "store_footfall": 0.06},
    )
    found = item(findings, BLAMED)
    assert found.standing == "serious"
    assert "singles out store_footfall:" in found.question


def test_no_instrument_blamed_and_joint_test_passes(item):
    findings = three_instruments({"schedule_lottery": 0.7, "trainer_distance": 0.6, "store_footfall": 0.4}, joint_p=0.5)
    assert item(findings, BLAMED).standing == "sound"


def test_missing_c_statistic_is_reported_as_missing(item):
    findings = three_instruments({"a": 0.7, "b": 0.6, "c": 0.4}, joint_p=0.5)
    found = item(with_diagnostic(findings, "c_statistic", None), BLAMED)
    assert found.standing == "not_applicable"
    assert "'c_statistic'" in found.evidence
