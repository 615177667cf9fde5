"""Instrument strength: each rule at, just below and just above its threshold.

Thresholds: first-stage F 10 (Staiger & Stock 1997, common practice);
effective F against the Montiel Olea-Pflueger critical values for tau = 10%
and 30%; Kleibergen-Paap rk LM p-value 0.05; with several focal regressors the
Stock-Yogo 10% maximal-size value and a Sanderson-Windmeijer F of 10.
"""

from __future__ import annotations

import pytest

from tests.review.findings_builder import FOCAL, effective_f, iv_findings, result, with_claim, with_diagnostic

ID_F = "relevance.first_stage_f"


def first_stage(statistic: float) -> list[dict]:
    return [result(statistic, 0.01, df=[2, 495], distribution="F", regressor=FOCAL, partial_r2=0.02, shea_partial_r2=0.02)]


@pytest.mark.parametrize(("statistic", "standing"), [(10.0, "sound"), (9.99, "serious"), (10.01, "sound")])
def test_first_stage_f_against_ten(item, statistic, standing):
    found = item(with_diagnostic(iv_findings(), "first_stage", first_stage(statistic)), ID_F)
    assert found.standing == standing
    assert (found.question is None) == (standing == "sound")


def test_first_stage_f_names_the_variance_estimator(item):
    found = item(iv_findings(), ID_F)
    assert "heteroskedasticity-robust (HC1)" in found.evidence
    assert "Wald F" in found.evidence


@pytest.mark.parametrize(
    ("statistic", "standing"),
    [(23.11, "sound"), (23.10, "concern"), (23.12, "sound"), (12.04, "concern"), (12.03, "serious")],
)
def test_effective_f_against_the_montiel_olea_pflueger_critical_values(item, statistic, standing):
    found = item(with_diagnostic(iv_findings(), "effective_f", effective_f(statistic)), "relevance.effective_f")
    assert found.standing == standing
    assert "23.11" in found.evidence


def test_effective_f_uses_the_conservative_simplified_critical_value(item):
    entry = effective_f(9.0)
    for row in entry["critical_values"]:
        row.update(simplified=row["critical_value"], generalized=4.0)
    found = item(with_diagnostic(iv_findings(), "effective_f", entry), "relevance.effective_f")
    assert found.standing == "serious"
    assert "generalized critical value for 10%, using the estimated bias bound, is 4.000" in found.evidence


def test_effective_f_without_its_critical_value_is_not_judged(item):
    broken = result(30.0, None, critical_values=[])
    found = item(with_diagnostic(iv_findings(), "effective_f", broken), "relevance.effective_f")
    assert found.standing == "not_applicable"


@pytest.mark.parametrize(("p_value", "standing"), [(0.05, "serious"), (0.0499, "sound"), (0.0501, "serious")])
def test_identification_by_the_kleibergen_paap_rank_test(item, p_value, standing):
    test = result(5.9, p_value, df=2, distribution="chi2")
    found = item(with_diagnostic(iv_findings(), "kleibergen_paap_rk_lm", test), "relevance.identification")
    assert found.standing == standing


def two_regressor_findings(*, kp_f: float, weakest_conditional: float) -> dict:
    findings = with_claim(iv_findings(), endogenous=[FOCAL, "coaching_visits"], instruments=["a", "b", "c"])
    findings["focal"] = [FOCAL, "coaching_visits"]
    findings["sample"]["columns"]["instruments"] = ["a", "b", "c"]
    stock_yogo = result(
        None,
        None,
        criteria=[
            {
                "criterion": "tsls_size",
                "tabulated": True,
                "critical_values": [
                    {"threshold": 0.10, "critical_value": 13.43},
                    {"threshold": 0.15, "critical_value": 8.18},
                ],
            }
        ],
    )
    conditional = result(
        weakest_conditional,
        None,
        by_regressor=[
            {"regressor": FOCAL, "statistic": 40.0},
            {"regressor": "coaching_visits", "statistic": weakest_conditional},
        ],
    )
    findings = with_diagnostic(findings, "stock_yogo", stock_yogo)
    findings = with_diagnostic(findings, "sanderson_windmeijer_f", conditional)
    return with_diagnostic(findings, "kleibergen_paap_rk_f", result(kp_f, None))


@pytest.mark.parametrize(("kp_f", "standing"), [(13.43, "sound"), (13.42, "serious"), (13.44, "sound")])
def test_joint_strength_against_stock_yogo(item, kp_f, standing):
    found = item(two_regressor_findings(kp_f=kp_f, weakest_conditional=25.0), "relevance.joint_strength")
    assert found.standing == standing
    assert "13.43" in found.evidence
    assert "assume homoskedastic errors" in found.evidence


@pytest.mark.parametrize(("conditional", "standing"), [(10.0, "sound"), (9.99, "serious"), (10.01, "sound")])
def test_joint_strength_needs_each_conditional_f_of_ten(item, conditional, standing):
    found = item(two_regressor_findings(kp_f=30.0, weakest_conditional=conditional), "relevance.joint_strength")
    assert found.standing == standing
    assert "coaching_visits" in found.evidence


def test_joint_strength_does_not_apply_to_one_focal_regressor(item):
    assert item(iv_findings(), "relevance.joint_strength").standing == "not_applicable"
