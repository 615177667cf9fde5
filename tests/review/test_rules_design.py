"""Design-specific items: measured mediators, random against fixed effects, self-selection.

Sources: Bullock, Green & Ha (2010) for mediators; Mundlak (1978) and
Wooldridge (2010, sec. 10.7.3) for the 5% Mundlak test; Heckman (1979) and
Puhani (2000) for selection.
"""

from __future__ import annotations

import pytest

from tests.review.findings_builder import iv_findings, result, row, with_claim, with_diagnostic, with_rows

MEDIATOR = "design.mediator"
PANEL = "design.panel_effects"
SELECTION = "design.selection"


def mediation(estimator: str) -> dict:
    findings = with_claim(
        iv_findings(), design="mediation", endogenous=[], instruments=[], treatment=["coupon_arm"], mediator="training_hours",
        claimed={"estimator": estimator},
    )
    findings["sample"]["columns"]["instruments"] = ["coupon_arm"]
    return findings


def test_a_naive_mediator_claim_is_serious(item):
    found = item(mediation("ols"), MEDIATOR)
    assert found.standing == "serious"
    assert "coupon_arm" in found.question


def test_an_instrumented_mediator_claim_needs_the_only_through_assumption(item):
    found = item(mediation("2sls"), MEDIATOR)
    assert found.standing == "concern"
    assert "only through training_hours" in found.question


def test_mediator_items_do_not_apply_elsewhere(item):
    assert item(iv_findings(), MEDIATOR).standing == "not_applicable"
    assert item(mediation("2sls"), "design.mediator_manipulated").standing == "reviewer_judgement"


def panel(estimator: str, mundlak_p: float) -> dict:
    findings = with_claim(iv_findings(), design="panel", instruments=[], unit="store_id", time="week", claimed={"estimator": estimator})
    findings["sample"]["columns"]["instruments"] = []
    findings = with_rows(findings, row("random_effects", 0.5, 0.05), row("within", 0.3, 0.07), row("pooled_ols", 0.6, 0.04))
    return with_diagnostic(findings, "mundlak", result(4.0, mundlak_p, df=[2, 299], distribution="F"))


@pytest.mark.parametrize(("p_value", "standing"), [(0.05, "sound"), (0.0499, "serious"), (0.0501, "sound")])
def test_random_effects_claim_when_the_mundlak_test_rejects(item, p_value, standing):
    assert item(panel("random_effects", p_value), PANEL).standing == standing


def test_a_within_claim_is_not_affected_by_the_mundlak_test(item):
    assert item(panel("within", 1e-9), PANEL).standing == "sound"


def selection(estimator: str, p_value: float, *, excluded: list[str]) -> dict:
    findings = with_claim(
        iv_findings(), design="selection", instruments=[], selected="employed", controls=["tenure_years"],
        selection_covariates=["tenure_years", *excluded], claimed={"estimator": estimator},
    )
    findings["sample"]["columns"]["instruments"] = []
    findings = with_rows(findings, row("heckman_two_step", 0.5, 0.05))
    return with_diagnostic(findings, "selection", result(2.0, p_value, df=1, distribution="chi2", rho=0.4, sigma=1.2))


@pytest.mark.parametrize(("p_value", "standing"), [(0.05, "sound"), (0.0499, "serious"), (0.0501, "sound")])
def test_selected_sample_analysed_alone(item, p_value, standing):
    assert item(selection("ols", p_value, excluded=["children_under_six"]), SELECTION).standing == standing


def test_selection_correction_without_an_excluded_variable_is_a_concern(item):
    found = item(selection("heckman_two_step", 0.01, excluded=[]), SELECTION)
    assert found.standing == "concern"
    assert item(selection("heckman_two_step", 0.01, excluded=["children_under_six"]), SELECTION).standing == "sound"


def test_an_instrumented_mediator_claim_whose_arms_disagree_is_serious(item):
    findings = mediation("2sls")
    only_through = result(
        6.0, 0.014, df=1, distribution="chi2",
        drift_per_unit_direct_effect=[{"arm": "coupon_arm", "drift": 0.21}],
    )
    found = item(with_diagnostic(findings, "mediation", only_through), MEDIATOR)
    assert found.standing == "serious"
    assert "coupon_arm 0.2100" in found.evidence
    agreeing = item(with_diagnostic(findings, "mediation", {**only_through, "p_value": 0.4}), MEDIATOR)
    assert agreeing.standing == "concern"
