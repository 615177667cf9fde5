"""The 3SLS system of structural equation and first stages, and the disturbance correlation.

References: linearmodels 7.1 ``linearmodels.system.IV3SLS`` (coefficients of
every equation, the first-step residual covariance ``sigma`` and the 3SLS
residuals; tolerance 1e-9), and a seeded Monte Carlo for the coverage of the
correlation's interval (the simulated disturbances have correlation
``endogeneity``; tests/simulation.py).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from linearmodels.system import IV3SLS

from app.data.design import build_design
from app.estimation.covariance import variance_estimator
from app.estimation.reduced_form_system import reduced_form_system
from app.estimation.refit import design_moments, fit_estimators, refit
from app.estimation.system import disturbance_correlation, three_stage_least_squares
from app.spec import parse_claim
from tests.simulation import IvDesign, iv_claim, iv_sample

DESIGN = IvDesign(n_obs=700, first_stage=(0.7, 0.5, 0.3), n_controls=2, heteroskedastic=True)


def pieces(frame: pd.DataFrame, claim: dict):
    spec = parse_claim(claim)
    design = build_design(frame, spec)
    moments = design_moments(design)
    variance = variance_estimator(spec.covariance, moments, design.data, design.clusters)
    tsls = fit_estimators(moments, variance, terms=[*design.endogenous, *design.exogenous]).fits["2sls"]
    system = reduced_form_system(moments, variance)
    return design, moments, variance, tsls, system


@pytest.mark.parametrize("endogenous", [["focal"], ["focal", "dose"]], ids=["one focal", "two focal"])
def test_three_stage_least_squares_matches_linearmodels(endogenous: list[str]) -> None:
    rng = np.random.default_rng(11)
    frame = iv_sample(DESIGN, rng)
    frame["dose"] = 0.8 * frame["z3"] - 0.4 * frame["z2"] + 0.5 * frame["focal"] + rng.standard_normal(len(frame))
    design, moments, _, tsls, system = pieces(frame, iv_claim(DESIGN, endogenous=endogenous, covariance="robust"))
    fit = three_stage_least_squares(moments, tsls=tsls, first_stage_residuals=system.residuals[:, 1:], names=endogenous)
    exog = frame[["w1", "w2"]].assign(const=1.0)
    instruments = frame[["z1", "z2", "z3"]]
    equations = {"structural": {"dependent": frame["outcome"], "exog": exog, "endog": frame[endogenous], "instruments": instruments}}
    for name in endogenous:
        equations[f"first_{name}"] = {"dependent": frame[name], "exog": pd.concat([instruments, exog], axis=1)}
    reference = IV3SLS(equations).fit(cov_type="unadjusted")
    ours_order = ["const", "w1", "w2"]  # the intercept comes first in our exogenous block
    names = [f"structural_{term}" for term in [*endogenous, *ours_order]]
    for name in endogenous:
        names += [f"first_{name}_{term}" for term in ["z1", "z2", "z3", *ours_order]]
    np.testing.assert_allclose(np.concatenate(fit.params), reference.params[names].to_numpy(), rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(fit.first_step_sigma, np.asarray(reference.sigma), rtol=1e-9)
    residuals = np.asarray(reference.resids)
    np.testing.assert_allclose(fit.sigma, residuals.T @ residuals / len(frame), rtol=1e-9)
    np.testing.assert_allclose(fit.params[0], tsls.params, rtol=1e-9)  # exactly identified first stages: 3SLS = 2SLS


def test_interval_covers_the_true_correlation() -> None:
    """300 samples with disturbance correlation 0.5: the 95% interval covers it 92-98% of the time."""
    design = IvDesign(n_obs=400, first_stage=(0.8, 0.5), n_controls=1, endogeneity=0.5)
    rng = np.random.default_rng(2024)
    covered = 0
    replications = 300
    for _ in range(replications):
        frame = iv_sample(design, rng)
        built, moments, variance, tsls, system = pieces(frame, iv_claim(design, covariance="robust"))
        result = disturbance_correlation(
            moments, variance, built.data, tsls=tsls, first_stage_residuals=system.residuals[:, 1:], names=["focal"]
        )
        entry = result.details["by_regressor"][0]
        covered += entry["ci_low"] <= 0.5 <= entry["ci_high"]
    assert 0.92 <= covered / replications <= 0.98, covered


@pytest.mark.parametrize("covariance", ["homoskedastic", "robust", "cluster"])
def test_findings_entry(covariance: str) -> None:
    design = IvDesign(n_obs=600, first_stage=(0.7, 0.4), endogeneity=-0.4, n_clusters=30, cluster_effect=0.8)
    frame = iv_sample(design, np.random.default_rng(6))
    extra = {"cluster": ["cluster"]} if covariance == "cluster" else {}
    findings = refit(frame, parse_claim(iv_claim(design, covariance=covariance, **extra))).to_dict()
    entry = findings["diagnostics"]["disturbance_correlation"]
    by_regressor = entry["by_regressor"][0]
    assert entry["statistic"] == by_regressor["correlation"] < 0
    assert -1 < by_regressor["ci_low"] < by_regressor["correlation"] < by_regressor["ci_high"] < 1
    assert entry["equations"] == ["structural", "first stage: focal"]
    assert entry["estimator"] == "3SLS"
