"""The omitted-cause analyses of a mediator claim examine the claimed regression, arms held fixed.

A mediator claim's naive regression is ``ols_with_treatment`` (outcome on the
mediator, the randomized arms and the controls). Cinelli & Hazlett (2020)
read the focal t statistic of that regression: partial R-squared
``t^2 / (t^2 + df)`` with classical standard errors (their eq. 18), and
Oster's (2019) controlled estimate is its coefficient. Reference: statsmodels
OLS on the same columns (invented data, tests/design_simulation.py).
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm

from app.estimation.refit import refit
from app.spec import parse_claim
from tests.design_simulation import MediationDesign, mediation_sample


@pytest.fixture(scope="module")
def findings() -> dict:
    frame = mediation_sample(MediationDesign(n_obs=900), np.random.default_rng(4112))
    spec = parse_claim(
        {
            "design": "mediation",
            "outcome": "outcome",
            "mediator": "mediator",
            "treatment": ["arm_a", "arm_b"],
            "controls": ["baseline"],
            "covariance": "robust",
            "benchmarks": ["baseline"],
            "claimed": {"estimator": "ols_with_treatment"},
        }
    )
    return {"frame": frame, "findings": refit(frame, spec).to_dict()}


def reference_fit(frame):
    regressors = sm.add_constant(frame[["mediator", "arm_a", "arm_b", "baseline"]])
    return sm.OLS(frame["outcome"], regressors).fit()


def test_cinelli_hazlett_reads_the_regression_with_the_arms(findings: dict) -> None:
    reference = reference_fit(findings["frame"])
    entry = findings["findings"]["diagnostics"]["omitted_cause_sensitivity"][0]
    t = reference.tvalues["mediator"]
    assert entry["estimator"] == "ols_with_treatment"
    assert entry["estimate"] == pytest.approx(reference.params["mediator"], rel=1e-10)
    assert entry["std_error"] == pytest.approx(reference.bse["mediator"], rel=1e-8)
    assert entry["partial_r2_outcome"] == pytest.approx(t**2 / (t**2 + reference.df_resid), rel=1e-8)


def test_oster_controls_include_the_arms(findings: dict) -> None:
    reference = reference_fit(findings["frame"])
    entry = findings["findings"]["diagnostics"]["proportional_selection"][0]
    assert entry["estimator"] == "ols_with_treatment"
    assert entry["controlled_estimate"] == pytest.approx(reference.params["mediator"], rel=1e-10)


def test_the_analysed_estimate_is_the_claimed_row(findings: dict) -> None:
    claimed = next(
        r for r in findings["findings"]["estimates"] if (r["estimator"], r["term"]) == ("ols_with_treatment", "mediator")
    )
    entry = findings["findings"]["diagnostics"]["omitted_cause_sensitivity"][0]
    assert entry["estimate"] == pytest.approx(claimed["estimate"], rel=1e-12)
