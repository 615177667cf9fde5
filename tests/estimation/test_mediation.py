"""A randomized experiment with a measured mediator (design ``mediation``).

Seeded Monte Carlo on invented data (tests/design_simulation.py, true
effect of the mediator 0.45): the mediator shares an unmeasured cause with
the outcome, so OLS of the outcome on the mediator is biased, with or without
the treatment held fixed; 2SLS with the randomized arms as instruments
recovers the effect when the treatment acts only through the mediator; when
one arm also acts directly, 2SLS drifts by exactly the reported drift times
that direct effect (an in-sample identity, checked replication by
replication), and the over-identification test notices. 300 replications of
800 rows: the Monte Carlo standard error of a 95% coverage rate is 0.013.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from app.data.design import build_design
from app.errors import SpecError
from app.estimation.covariance import variance_estimator
from app.estimation.inference import critical_value
from app.estimation.kclass import kclass
from app.estimation.mediation import ASSUMPTION, drift_per_direct_effect
from app.estimation.refit import design_moments, refit
from app.spec import parse_claim
from tests.design_simulation import MediationDesign, mediation_sample

REPLICATIONS = 300
TRUTH = MediationDesign().effect
DIRECT = 0.3


def mediation_claim(**fields: object) -> dict:
    claim = {
        "design": "mediation",
        "outcome": "outcome",
        "mediator": "mediator",
        "treatment": ["arm_a", "arm_b"],
        "controls": ["baseline"],
        "covariance": "robust",
    }
    claim.update(fields)
    return claim


def fit_once(frame: pd.DataFrame) -> dict[str, float]:
    spec = parse_claim(mediation_claim(covariance="homoskedastic"))
    design = build_design(frame, spec)
    moments = design_moments(design)
    variance = variance_estimator(spec.covariance, moments, design.data, design.clusters)
    ols = kclass(moments, kappa=0.0, code="ols", terms=["m"])
    tsls = kclass(moments, kappa=1.0, code="2sls", terms=["m"])
    std_error = float(np.sqrt(variance.covariance(tsls)[0, 0]))
    explained = moments.projected_ss(tsls.residual, moments.layout.instruments)
    sargan = moments.n_obs * explained / moments.quad(tsls.residual, tsls.residual)
    return {
        "ols": float(ols.params[0]),
        "2sls": float(tsls.params[0]),
        "std_error": std_error,
        "df": variance.inference_df(tsls.n_params),
        "sargan": sargan,
        "drift": float(drift_per_direct_effect(moments)[0]),
    }


@pytest.fixture(scope="module")
def draws() -> dict[str, np.ndarray]:
    rng = np.random.default_rng(1_357)
    results: dict[str, list[float]] = {}
    for _ in range(REPLICATIONS):
        frame = mediation_sample(MediationDesign(n_obs=800), rng)
        valid = fit_once(frame)
        broken = fit_once(frame.assign(outcome=frame["outcome"] + DIRECT * frame["arm_a"]))
        for key, value in valid.items():
            results.setdefault(key, []).append(value)
        results.setdefault("broken_2sls", []).append(broken["2sls"])
        results.setdefault("broken_sargan", []).append(broken["sargan"])
    return {key: np.array(values) for key, values in results.items()}


def test_naive_regression_on_the_mediator_is_biased(draws: dict[str, np.ndarray]) -> None:
    bias = draws["ols"].mean() - TRUTH
    assert bias > 10 * draws["ols"].std() / np.sqrt(REPLICATIONS)


def test_2sls_with_the_randomized_arms_recovers_the_effect(draws: dict[str, np.ndarray]) -> None:
    estimates = draws["2sls"]
    assert abs(np.median(estimates) - TRUTH) < 3 * 1.25 * estimates.std() / np.sqrt(REPLICATIONS)
    covered = np.abs(estimates - TRUTH) <= critical_value(int(draws["df"][0])) * draws["std_error"]
    assert 0.91 <= covered.mean() <= 0.99


def test_a_direct_effect_moves_2sls_by_exactly_the_reported_drift(draws: dict[str, np.ndarray]) -> None:
    np.testing.assert_allclose(draws["broken_2sls"] - draws["2sls"], DIRECT * draws["drift"], rtol=1e-8, atol=1e-12)
    assert np.median(draws["broken_2sls"]) - TRUTH > 5 * draws["2sls"].std() / np.sqrt(REPLICATIONS)


def test_overidentification_test_notices_the_direct_effect(draws: dict[str, np.ndarray]) -> None:
    critical = 3.841  # chi-squared(1), 5%
    assert (draws["sargan"] > critical).mean() < 0.09
    assert (draws["broken_sargan"] > critical).mean() > 0.5


@pytest.fixture(scope="module")
def findings() -> dict:
    frame = mediation_sample(MediationDesign(n_obs=1_000), np.random.default_rng(3))
    return refit(frame, parse_claim(mediation_claim())).to_dict()


def test_findings_state_the_assumption_and_test_it_with_several_arms(findings: dict) -> None:
    mediation = findings["diagnostics"]["mediation"]
    assert mediation["assumption"] == ASSUMPTION
    assert "only through the mediator" in mediation["assumption"]
    assert mediation["test"] == "hansen_j"
    assert mediation["statistic"] == findings["diagnostics"]["hansen_j"]["statistic"]
    assert mediation["p_value"] == findings["diagnostics"]["hansen_j"]["p_value"]
    assert [d["arm"] for d in mediation["drift_per_unit_direct_effect"]] == ["arm_a", "arm_b"]


def test_findings_hold_both_naive_fits_2sls_and_the_first_stage(findings: dict) -> None:
    estimators = {row["estimator"] for row in findings["estimates"] if row["term"] == "mediator"}
    assert {"ols", "ols_with_treatment", "2sls"} <= estimators
    treatment_row = next(r for r in findings["estimates"] if r["estimator"] == "ols_with_treatment" and r["term"] == "arm_a")
    assert treatment_row["std_error"] > 0
    assert findings["diagnostics"]["first_stage"][0]["regressor"] == "mediator"
    assert findings["focal"] == ["mediator"]


def test_findings_carry_the_weak_instrument_robust_set_and_the_system_fit(findings: dict) -> None:
    """These keys come from the instrument diagnostics of the IV engine, which the mediation design reuses."""
    pytest.importorskip("app.estimation.instrument_diagnostics", reason="the instrument diagnostics have not landed yet")
    assert "confidence_set" in findings["diagnostics"]["anderson_rubin"]
    assert findings["diagnostics"]["disturbance_correlation"]["standing"] == "computed"


def test_one_arm_cannot_test_the_assumption_but_still_states_it() -> None:
    frame = mediation_sample(MediationDesign(n_obs=600), np.random.default_rng(8))
    mediation = refit(frame, parse_claim(mediation_claim(treatment=["arm_a"]))).to_dict()["diagnostics"]["mediation"]
    assert mediation["standing"] == "not_applicable"
    assert "rests on argument alone" in mediation["reason"]
    assert mediation["assumption"] == ASSUMPTION
    assert len(mediation["drift_per_unit_direct_effect"]) == 1


def test_one_arm_drift_is_one_over_the_first_stage_effect() -> None:
    frame = mediation_sample(MediationDesign(n_obs=600), np.random.default_rng(8))
    findings = refit(frame, parse_claim(mediation_claim(treatment=["arm_a"]))).to_dict()
    first_stage = findings["diagnostics"]["first_stage"][0]["coefficients"][0]["estimate"]
    drift = findings["diagnostics"]["mediation"]["drift_per_unit_direct_effect"][0]["drift"]
    assert drift == pytest.approx(1.0 / first_stage, rel=1e-10)


def test_homoskedastic_claims_test_the_assumption_with_sargan() -> None:
    frame = mediation_sample(MediationDesign(n_obs=600), np.random.default_rng(8))
    findings = refit(frame, parse_claim(mediation_claim(covariance="homoskedastic"))).to_dict()
    assert findings["diagnostics"]["mediation"]["test"] == "sargan"
    assert findings["diagnostics"]["mediation"]["statistic"] == findings["diagnostics"]["sargan"]["statistic"]


@pytest.mark.parametrize(
    ("fields", "message"),
    [
        ({"treatment": []}, "needs the randomized 'treatment' column"),
        ({"mediator": None}, "needs the measured 'mediator' column"),
        ({"instruments": ["arm_a"]}, "name the roles 'treatment' and 'mediator'"),
    ],
)
def test_mediator_claims_without_a_randomized_treatment_are_refused(fields: dict, message: str) -> None:
    with pytest.raises(SpecError, match=message):
        parse_claim(mediation_claim(**fields))
