"""Balance of pre-treatment covariates across the instruments.

Reference: statsmodels 0.15 OLS of each covariate on the instruments and the
controls not under check, with HC1 or cluster-robust covariance (its default
small-sample correction equals ours), Wald test of the instrument
coefficients; the joint test against a brute-force stacked covariance written
here. Tolerance 1e-8 relative.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

from app.estimation.refit import refit
from app.spec import parse_claim
from tests.simulation import IvDesign, iv_claim, iv_sample

DESIGN = IvDesign(n_obs=600, first_stage=(0.5, 0.4), n_controls=2, n_clusters=40)


@pytest.fixture(scope="module")
def sample() -> pd.DataFrame:
    rng = np.random.default_rng(8)
    frame = iv_sample(DESIGN, rng)
    frame["age_at_entry"] = 40 + 9 * rng.standard_normal(len(frame))
    frame["prior_score"] = 0.35 * frame["z1"] + rng.standard_normal(len(frame))
    return frame


def balance(frame: pd.DataFrame, covariance: str, pre_treatment: list[str], **fields: object) -> dict:
    extra = {"cluster": ["cluster"]} if covariance == "cluster" else {}
    claim = iv_claim(DESIGN, covariance=covariance, pre_treatment=pre_treatment, **extra, **fields)
    return refit(frame, parse_claim(claim)).to_dict()["diagnostics"]["instrument_balance"]


def statsmodels_fit(frame: pd.DataFrame, covariate: str, controls: list[str], covariance: str):
    regressors = sm.add_constant(frame[["z1", "z2", *controls]])
    model = sm.OLS(frame[covariate], regressors)
    if covariance == "cluster":
        return model.fit(cov_type="cluster", cov_kwds={"groups": frame["cluster"].to_numpy()})
    return model.fit(cov_type="HC1")


@pytest.mark.parametrize("covariance", ["robust", "cluster"])
def test_per_covariate_tests_match_statsmodels(sample: pd.DataFrame, covariance: str) -> None:
    result = balance(sample, covariance, ["age_at_entry", "prior_score", "w1"])
    assert result["conditioning"] == ["instruments", "(intercept)", "w2"]  # w1 is under check, so not a control here
    for entry in result["by_covariate"]:
        fit = statsmodels_fit(sample, entry["covariate"], ["w2"], covariance)
        wald = fit.wald_test(np.eye(len(fit.params))[1:3], use_f=False, scalar=True)
        assert entry["statistic"] == pytest.approx(float(np.squeeze(wald.statistic)) / 2, rel=1e-8)
        assert [c["estimate"] for c in entry["coefficients"]] == pytest.approx(fit.params[["z1", "z2"]].tolist(), rel=1e-9)
        assert [c["std_error"] for c in entry["coefficients"]] == pytest.approx(fit.bse[["z1", "z2"]].tolist(), rel=1e-8)


def test_joint_test_uses_the_cross_equation_covariance(sample: pd.DataFrame) -> None:
    covariates = ["age_at_entry", "prior_score"]
    result = balance(sample, "robust", covariates)
    n = len(sample)
    regressors = np.column_stack([sample[["z1", "z2"]].to_numpy(), np.ones(n), sample[["w1", "w2"]].to_numpy()])
    bread = np.linalg.inv(regressors.T @ regressors)
    coefficients, scores = [], []
    for name in covariates:
        beta = bread @ regressors.T @ sample[name].to_numpy()
        coefficients.append(beta[:2])
        scores.append(regressors * (sample[name].to_numpy() - regressors @ beta)[:, None] @ bread[:, :2])
    stacked = np.hstack(scores)
    covariance = n / (n - regressors.shape[1]) * stacked.T @ stacked
    vector = np.concatenate(coefficients)
    assert result["statistic"] == pytest.approx(vector @ np.linalg.solve(covariance, vector) / 4, rel=1e-8)
    assert result["df"] == [4, n - 5]


def test_an_instrument_that_predicts_a_baseline_covariate_is_flagged(sample: pd.DataFrame) -> None:
    result = balance(sample, "robust", ["age_at_entry", "prior_score"])
    entries = {entry["covariate"]: entry for entry in result["by_covariate"]}
    assert entries["prior_score"]["p_value"] < 1e-6
    assert entries["age_at_entry"]["p_value"] > 0.01
    assert result["p_value"] < 1e-6
    assert "not proof" in result["reading"]


def test_rows_with_a_missing_covariate_are_left_out_and_reported(sample: pd.DataFrame) -> None:
    frame = sample.copy()
    frame.loc[::10, "prior_score"] = np.nan
    result = balance(frame, "robust", ["prior_score"])
    assert result["rows_without_covariates"] == 60
    assert result["n_obs"] == 540
    fit = statsmodels_fit(frame.dropna(subset=["prior_score"]), "prior_score", ["w1", "w2"], "robust")
    wald = fit.wald_test(np.eye(len(fit.params))[1:3], use_f=False, scalar=True)
    assert result["by_covariate"][0]["statistic"] == pytest.approx(float(np.squeeze(wald.statistic)) / 2, rel=1e-8)


def test_missing_covariates_with_fixed_effects_are_refused(sample: pd.DataFrame) -> None:
    frame = sample.copy()
    frame.loc[::10, "prior_score"] = np.nan
    result = balance(frame, "robust", ["prior_score"], fixed_effects=["region"])
    assert result["standing"] == "undefined"
    assert "60 rows of the estimation sample lack a pre-treatment covariate" in result["reason"]


def test_fixed_effects_are_partialled_out_of_the_covariates(sample: pd.DataFrame) -> None:
    result = balance(sample, "robust", ["prior_score"], fixed_effects=["region"])
    dummies = pd.get_dummies(sample["region"], prefix="region", drop_first=True, dtype=float)
    regressors = pd.concat([sample[["z1", "z2", "w1", "w2"]], dummies], axis=1).assign(const=1.0)
    fit = sm.OLS(sample["prior_score"], regressors).fit(cov_type="HC1")
    restriction = np.eye(regressors.shape[1])[:2]
    wald = float(np.squeeze(fit.wald_test(restriction, use_f=False, scalar=True).statistic))
    assert result["by_covariate"][0]["statistic"] == pytest.approx(wald / 2, rel=1e-7)


def test_covariates_that_cannot_be_used_say_why(sample: pd.DataFrame) -> None:
    frame = sample.assign(district=np.where(sample["region"] > 3, "north", "south"))
    result = balance(frame, "robust", ["outcome", "z1", "district", "age_at_entry"])
    reasons = {entry["covariate"]: entry["reason"] for entry in result["skipped"]}
    assert "the outcome of the claim" in reasons["outcome"]
    assert "an instrument of the claim" in reasons["z1"]
    assert "holds text" in reasons["district"]
    assert [entry["covariate"] for entry in result["by_covariate"]] == ["age_at_entry"]


def test_not_applicable_without_pre_treatment_covariates(sample: pd.DataFrame) -> None:
    result = balance(sample, "robust", [])
    assert result["standing"] == "not_applicable"
    assert "pre_treatment" in result["reason"]
