"""Design-specific items: measured mediators, random against fixed effects, self-selection.

Sources: Bullock, Green & Ha (2010) for mediators; Mundlak (1978) and
Wooldridge (2010, sec. 10.7.3) for the 5% Mundlak test; Heckman (1979) and
Puhani (2000) for selection.
"""

from __future__ import annotations

import pytest

from app.review.checklist import build_checklist
from tests.review.findings_builder import iv_findings, result, row, with_claim, with_covariance, with_diagnostic, with_rows

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


def chosen_treatment(estimator: str | None, p_value: float, *, instruments: list[str] | None = None) -> dict:
    """A selection claim about a binary treatment people choose (no ``selected`` column), fitted by the control function."""
    instruments = ["schedule_lottery"] if instruments is None else instruments
    claimed = {"estimator": estimator} if estimator else {"estimator": None}
    findings = with_claim(iv_findings(), design="selection", instruments=instruments, selected=None, claimed=claimed)
    findings["sample"]["columns"]["instruments"] = instruments
    findings["estimators"] += [{"code": "control_function", "name": "Control function (probit first stage)"}]
    findings = with_rows(findings, row("control_function", 0.31, 0.07))
    for key in ("first_stage", "effective_f", "hansen_j", "sargan", "anderson_rubin", "clr", "kleibergen_paap_rk_lm", "control_function"):
        findings = with_diagnostic(findings, key, None)
    return with_diagnostic(findings, "treatment_selection", result(2.1, p_value, df=496, distribution="t"))


@pytest.mark.parametrize(("p_value", "standing"), [(0.05, "sound"), (0.0499, "serious"), (0.0501, "sound")])
def test_a_chosen_treatment_claimed_by_ols_when_the_treatment_test_rejects(item, p_value, standing):
    found = item(chosen_treatment("ols", p_value), SELECTION)
    assert found.standing == standing
    assert "OLS: 0.6100" in found.evidence
    assert "Control function (probit first stage): 0.3100 [0.1728, 0.4472]" in found.evidence


def test_the_treatment_test_question_flags_rather_than_asserts(item):
    found = item(chosen_treatment("ols", 1e-9), SELECTION)
    assert found.question.startswith("The test suggests that training_hours was chosen for reasons related to weekly_sales; if so")


def test_a_control_function_claim_is_judged_on_its_excluded_variables(item):
    assert item(chosen_treatment("control_function", 1e-9), SELECTION).standing == "sound"
    assert item(chosen_treatment("control_function", 1e-9, instruments=[]), SELECTION).standing == "concern"


def test_a_chosen_treatment_claim_without_a_stated_estimator_is_read_as_the_control_function(item):
    findings = chosen_treatment(None, 1e-9)
    assert "(Control function (probit first stage), as claimed)" in build_checklist(findings).verdict.summary


def test_a_rejected_treatment_test_makes_the_verdict_not_supported(item):
    unprinted = with_claim(chosen_treatment("ols", 1e-9), claimed={"estimate": None, "std_error": None, "n_obs": None})
    verdict = build_checklist(unprinted).verdict
    assert verdict.code == "not_supported"
    assert "design.selection" in verdict.drivers


@pytest.mark.parametrize(
    "item_id",
    ["relevance.effective_f", "relevance.first_stage_f", "relevance.identification", "overidentification.joint_test", "inference.weak_iv_robust"],
)
def test_instrument_items_in_the_selection_design_say_why_they_do_not_apply(item, item_id):
    found = item(chosen_treatment("ols", 0.5), item_id)
    assert found.standing == "not_applicable"
    assert "refit was made without it" not in found.evidence
    assert "enter the probit for the treatment in the control function" in found.evidence


def test_the_hausman_warning_reaches_the_panel_item(item):
    warning = "the variance difference is not positive definite (3 of 10 eigenvalues are not positive): read the Mundlak test instead"
    findings = with_diagnostic(panel("within", 0.2), "hausman_fe_re", result(12.0, 0.03, df=7, distribution="chi2", warning=warning))
    assert f"Warning on the Hausman test: {warning}." in item(findings, PANEL).evidence
    clean = with_diagnostic(panel("within", 0.2), "hausman_fe_re", result(12.0, 0.03, df=7, distribution="chi2"))
    assert "Warning" not in item(clean, PANEL).evidence


def test_an_undefined_hausman_test_says_why(item):
    undefined = result(standing="undefined", reason="the difference of the variances has no positive eigenvalue")
    found = item(with_diagnostic(panel("within", 0.2), "hausman_fe_re", undefined), PANEL)
    assert "Classical Hausman test: not computed (the difference of the variances has no positive eigenvalue)." in found.evidence


@pytest.mark.parametrize(("p_value", "standing"), [(0.05, "concern"), (0.0499, "serious"), (0.0501, "concern")])
def test_mediator_over_identification_threshold(item, p_value, standing):
    only_through = result(6.0, p_value, df=1, distribution="chi2", drift_per_unit_direct_effect=[])
    assert item(with_diagnostic(mediation("2sls"), "mediation", only_through), MEDIATOR).standing == standing


def test_disagreeing_arms_are_read_as_a_flag_with_both_explanations(item):
    only_through = result(6.0, 0.01, df=1, distribution="chi2", drift_per_unit_direct_effect=[])
    found = item(with_diagnostic(mediation("2sls"), "mediation", only_through), MEDIATOR)
    assert "The test suggests that the arms do not agree" in found.evidence
    assert "different local effects" in found.evidence
    assert "so at least one acts" not in found.evidence


@pytest.mark.parametrize(
    ("findings", "item_id"),
    [(lambda: panel("random_effects", 0.001), PANEL), (lambda: selection("ols", 0.001, excluded=["children_under_six"]), SELECTION)],
)
def test_design_questions_flag_rather_than_assert(item, findings, item_id):
    question = item(findings(), item_id).question
    assert "The test suggests" in question or "The Mundlak test suggests" in question
    assert "are correlated with the regressors, so" not in question and "is significant, so" not in question


def test_the_mundlak_evidence_names_its_own_clustered_errors_not_the_claims(item):
    findings = with_covariance(panel("random_effects", 0.01), "homoskedastic")
    findings["diagnostics"]["mundlak"]["clusters"] = "units (store_id)"
    evidence = item(findings, PANEL).evidence
    assert "unrelated to the regressors (cluster-robust by units (store_id)):" in evidence
    findings["diagnostics"]["mundlak"].pop("clusters")
    assert "unrelated to the regressors (cluster-robust):" in item(findings, PANEL).evidence
