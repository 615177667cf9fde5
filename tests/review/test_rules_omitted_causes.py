"""Omitted common causes: naive against instrumented estimates, Cinelli-Hazlett bounds, Oster's delta.

Thresholds: control-function p-value 0.05 (Hausman 1978; Wooldridge 2010,
sec. 6.3.1); an adjusted interval that includes zero for a cause as strong as
the benchmark, k = 1 (Cinelli & Hazlett 2020); |delta| = 1 (Oster 2019).
"""

from __future__ import annotations

import pytest

from tests.review.findings_builder import FOCAL, iv_findings, result, with_claim, with_diagnostic

NAIVE = "omitted_causes.naive_vs_instrumented"
SENSITIVITY = "omitted_causes.sensitivity"
SELECTION = "omitted_causes.proportional_selection"


def ols_claim() -> dict:
    return with_claim(iv_findings(), claimed={"estimator": "ols", "estimate": "0.61", "std_error": "0.04"})


@pytest.mark.parametrize(("p_value", "standing"), [(0.05, "sound"), (0.0499, "serious"), (0.0501, "sound")])
def test_a_claim_on_ols_is_in_doubt_when_the_control_function_test_rejects(item, p_value, standing):
    findings = with_diagnostic(ols_claim(), "control_function", result(3.9, p_value, df=1, distribution="chi2"))
    assert item(findings, NAIVE).standing == standing


def test_an_instrumented_claim_is_sound_whatever_the_endogeneity_test(item):
    findings = with_diagnostic(iv_findings(), "control_function", result(30.0, 1e-8, df=1, distribution="chi2"))
    found = item(findings, NAIVE)
    assert found.standing == "sound"
    assert "OLS 0.6100 against 2SLS 0.4213" in found.evidence


def sensitivity(*bounds: tuple[float, float, float]) -> list[dict]:
    """One entry per focal regressor; bounds are (multiplier k, adjusted ci_low, adjusted ci_high)."""
    return [
        result(
            0.31,
            None,
            regressor=FOCAL,
            estimate=0.61,
            std_error=0.04,
            partial_r2_outcome=0.3,
            robustness_value_q=0.31,
            robustness_value_q_alpha=0.27,
            q=1.0,
            alpha=0.05,
            benchmark_bounds=[
                {"benchmark": "tenure_years", "multiplier": k, "available": True, "adjusted_estimate": (low + high) / 2,
                 "adjusted_ci_low": low, "adjusted_ci_high": high}
                for k, low, high in bounds
            ],
        )
    ]


@pytest.mark.parametrize(
    ("low", "standing"), [(0.0, "serious"), (-0.0001, "serious"), (0.0001, "sound")]
)
def test_a_cause_as_strong_as_the_benchmark(item, low, standing):
    findings = with_diagnostic(ols_claim(), "omitted_cause_sensitivity", sensitivity((1.0, low, 0.5)))
    found = item(findings, SENSITIVITY)
    assert found.standing == standing
    assert "RV_q (q = 1): 0.3100" in found.evidence


def test_a_cause_three_times_as_strong_is_a_concern(item):
    bounds = sensitivity((1.0, 0.2, 0.6), (2.0, 0.05, 0.5), (3.0, -0.1, 0.45))
    found = item(with_diagnostic(ols_claim(), "omitted_cause_sensitivity", bounds), SENSITIVITY)
    assert found.standing == "concern"
    assert "3 times as strong as tenure_years" in found.question


def test_without_benchmarks_the_reviewer_judges(item):
    found = item(with_diagnostic(ols_claim(), "omitted_cause_sensitivity", sensitivity()), SENSITIVITY)
    assert found.standing == "reviewer_judgement"


def test_sensitivity_is_for_reference_when_the_claim_uses_instruments(item):
    findings = with_diagnostic(iv_findings(), "omitted_cause_sensitivity", sensitivity((1.0, -0.1, 0.5)))
    found = item(findings, SENSITIVITY)
    assert found.standing == "not_applicable"
    assert "for reference" in found.evidence


def panel_claim(estimator: str) -> dict:
    findings = with_claim(iv_findings(), design="panel", instruments=[], unit="store_id", claimed={"estimator": estimator})
    findings["sample"]["columns"]["instruments"] = []
    findings["estimators"] += [{"code": "within", "name": "Fixed effects (within)"}, {"code": "random_effects", "name": "Random effects"}]
    entries = sensitivity((1.0, -0.1, 0.5))
    entries[0]["estimator"] = "within"
    return with_diagnostic(findings, "omitted_cause_sensitivity", entries)


def test_sensitivity_names_the_estimator_it_analyses(item):
    found = item(panel_claim("within"), SENSITIVITY)
    assert found.standing == "serious"
    assert found.evidence.startswith("Fixed effects (within) estimate 0.6100")


def test_sensitivity_of_another_estimator_than_the_claimed_one_is_for_reference(item):
    found = item(panel_claim("random_effects"), SENSITIVITY)
    assert found.standing == "not_applicable"
    assert "The claim rests on Random effects; this analysis examines the Fixed effects (within) regression" in found.evidence
    assert "for reference only" in found.evidence


def test_findings_without_the_analysed_estimator_read_as_the_within_fit_in_a_panel(item):
    findings = panel_claim("random_effects")
    del findings["diagnostics"]["omitted_cause_sensitivity"][0]["estimator"]
    assert "examines the Fixed effects (within) regression" in item(findings, SENSITIVITY).evidence
    assert item(with_claim(findings, design="iv"), SENSITIVITY).evidence.startswith("The claim rests on Random effects; this analysis examines the OLS regression")


def oster(delta_for_zero: float, *, excludes_zero: bool = True) -> list[dict]:
    return [
        result(0.5, None, regressor=FOCAL, delta=1.0, r2_max=0.52, beta_star=0.5, controlled_estimate=0.61,
               delta_for_zero=delta_for_zero, identified_set_excludes_zero=excludes_zero, warnings=[])
    ]


@pytest.mark.parametrize(
    ("delta", "standing"), [(1.0, "sound"), (0.99, "concern"), (1.01, "sound"), (-0.5, "concern"), (-1.2, "sound")]
)
def test_oster_delta_for_a_zero_effect(item, delta, standing):
    found = item(with_diagnostic(ols_claim(), "proportional_selection", oster(delta)), SELECTION)
    assert found.standing == standing


def test_oster_for_another_estimator_is_for_reference(item):
    entries = oster(0.5)
    entries[0]["estimator"] = "ols"
    found = item(with_diagnostic(iv_findings(), "proportional_selection", entries), SELECTION)
    assert found.standing == "not_applicable"
    assert "The claim rests on 2SLS; this analysis examines the OLS regression" in found.evidence


def test_oster_identified_set_containing_zero_is_a_concern(item):
    findings = with_diagnostic(ols_claim(), "proportional_selection", oster(2.0, excludes_zero=False))
    assert item(findings, SELECTION).standing == "concern"


def test_shared_source_is_left_to_the_reviewer(item):
    found = item(iv_findings(), "omitted_causes.shared_source")
    assert found.standing == "reviewer_judgement"
    assert found.question


def test_the_question_names_a_sign_reversal_when_the_adjusted_estimate_crosses_zero(item):
    bounds = sensitivity((1.0, 0.2, 0.6), (2.0, -0.3, -0.1))
    found = item(with_diagnostic(ols_claim(), "omitted_cause_sensitivity", bounds), SENSITIVITY)
    assert found.standing == "concern"
    assert "2 times as strong as tenure_years would reverse the sign of the estimate" in found.question


def test_the_question_says_indistinguishable_when_only_the_interval_reaches_zero(item):
    bounds = sensitivity((1.0, 0.2, 0.6), (2.0, -0.05, 0.5))
    found = item(with_diagnostic(ols_claim(), "omitted_cause_sensitivity", bounds), SENSITIVITY)
    assert "would make the estimate indistinguishable from zero" in found.question


def test_a_capped_outcome_bound_says_so_instead_of_a_zero_width_interval(item):
    bounds = sensitivity((1.0, 0.2, 0.6), (2.0, -0.6417, -0.6417))
    bounds[0]["benchmark_bounds"][1].update(r2yz_dx_capped=True, adjusted_estimate=-0.6417)
    found = item(with_diagnostic(ols_claim(), "omitted_cause_sensitivity", bounds), SENSITIVITY)
    assert "A cause 2 x as strong as tenure_years: adjusted estimate -0.6417; the bound" in found.evidence
    assert "capped there" in found.evidence
    assert "[-0.6417, -0.6417]" not in found.evidence
    assert "would reverse the sign of the estimate" in found.question
