"""Exclusion and independence: balance at 5%, the break-even direct effect against the reviewer's bound.

Balance checks are common practice borrowed from randomized experiments; the
break-even direct effect is that of Conley, Hansen & Rossi (2012). Exclusion,
as-if-random assignment and monotonicity are left to the reviewer.
"""

from __future__ import annotations

import pytest

from tests.review.findings_builder import FOCAL, iv_findings, result, with_claim, with_diagnostic

BALANCE = "exclusion.balance"
DIRECT = "exclusion.direct_effect"


def balance(p_value: float) -> dict:
    return result(
        None,
        None,
        by_covariate=[
            {"covariate": "age_at_hire", "statistic": 1.1, "p_value": 0.33, "df": [2, 495], "distribution": "F"},
            {"covariate": "prior_sales", "statistic": 3.0, "p_value": p_value, "df": [2, 495], "distribution": "F"},
        ],
    )


@pytest.mark.parametrize(("p_value", "standing"), [(0.05, "sound"), (0.0499, "concern"), (0.0501, "sound")])
def test_instruments_predicting_a_pre_treatment_covariate(item, p_value, standing):
    findings = with_claim(iv_findings(), pre_treatment=["age_at_hire", "prior_sales"])
    found = item(with_diagnostic(findings, "instrument_balance", balance(p_value)), BALANCE)
    assert found.standing == standing
    if standing == "concern":
        assert "prior_sales" in found.question and "age_at_hire" not in found.question


def plausibly_exogenous(break_even: float | None, *, share: float = 0.4) -> dict:
    entry = {"regressor": FOCAL, "break_even_delta": break_even, "break_even_share_of_reduced_form": share}
    return result(None, None, by_regressor=[entry])


@pytest.mark.parametrize(("break_even", "standing"), [(0.3, "serious"), (0.2999, "serious"), (0.3001, "sound")])
def test_break_even_direct_effect_against_the_plausible_bound(item, break_even, standing):
    findings = with_claim(iv_findings(), direct_effect_bound=0.3)
    findings = with_diagnostic(findings, "plausibly_exogenous", plausibly_exogenous(break_even))
    assert item(findings, DIRECT).standing == standing


def test_without_a_bound_the_reviewer_judges_the_break_even_value(item):
    findings = with_diagnostic(iv_findings(), "plausibly_exogenous", plausibly_exogenous(0.12))
    found = item(findings, DIRECT)
    assert found.standing == "reviewer_judgement"
    assert "0.1200" in found.evidence
    assert "proportional to each instrument's own reduced-form coefficient make the claimed effect" in found.evidence
    assert "at 40% of that coefficient" in found.evidence


def test_the_common_break_even_value_is_set_against_each_reduced_form_coefficient(item):
    findings = with_diagnostic(iv_findings(), "plausibly_exogenous", plausibly_exogenous(0.9726))
    coefficients = [{"term": "schedule_lottery", "estimate": 1.161}, {"term": "trainer_distance", "estimate": -2.048}]
    findings["diagnostics"]["reduced_form"]["coefficients"] = coefficients
    found = item(findings, DIRECT)
    assert "that is 84% of schedule_lottery's (1.161) and 47% of trainer_distance's (-2.048) reduced-form coefficient." in found.evidence


def test_no_break_even_value_means_no_direct_effect_overturns_the_claim(item):
    findings = with_diagnostic(iv_findings(), "plausibly_exogenous", plausibly_exogenous(None))
    assert item(findings, DIRECT).standing == "sound"


def test_a_claim_insignificant_with_valid_instruments_has_no_break_even_value(item):
    findings = with_diagnostic(iv_findings(), "plausibly_exogenous", plausibly_exogenous(0.0))
    assert item(findings, DIRECT).standing == "not_applicable"


@pytest.mark.parametrize("item_id", ["exclusion.argument", "exclusion.as_if_random", "exclusion.monotonicity"])
def test_untestable_assumptions_go_to_the_reviewer_with_a_question(item, item_id):
    found = item(iv_findings(), item_id)
    assert found.standing == "reviewer_judgement"
    assert "schedule_lottery" in found.question


def test_a_plain_regression_has_no_instrument_to_check(item):
    findings = with_claim(iv_findings(), instruments=[], claimed={"estimator": "ols"})
    findings["sample"]["columns"]["instruments"] = []
    for item_id in ("exclusion.argument", "exclusion.balance", "relevance.first_stage_f", "overidentification.joint_test"):
        found = item(findings, item_id)
        assert found.standing == "not_applicable"
        assert "no excluded instruments" in found.evidence
