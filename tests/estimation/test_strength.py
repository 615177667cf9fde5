"""Instrument strength: Cragg-Donald F, Kleibergen-Paap rk statistics, Sanderson-Windmeijer conditional F.

References: linearmodels 7.1 ``linearmodels.iv.cragg_donald_f``,
``kleibergen_paap`` (rk LM) and its rk Wald F (``linearmodels.iv.common._kleibergen_paap``,
whose F carries the same small-sample scaling as ours: (n - L)/n robust,
(G - 1)/G (n - L)/(n - 1) clustered); the identities of Kleibergen & Paap
(2006) with one focal regressor and with homoskedastic errors; and, for the
Sanderson-Windmeijer F, a brute-force implementation with linearmodels' 2SLS
and statsmodels' OLS Wald test. Tolerance 1e-8 relative.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from linearmodels.iv import IV2SLS, cragg_donald_f
from linearmodels.iv.common import _kleibergen_paap

from app.estimation.refit import refit
from app.spec import parse_claim
from tests.simulation import IvDesign, iv_claim, iv_sample

RTOL = 1e-8
DESIGN = IvDesign(n_obs=900, first_stage=(0.6, 0.35, 0.2), n_controls=2, heteroskedastic=True, n_clusters=60, cluster_effect=0.5)
COVARIANCES = [("homoskedastic", "unadjusted"), ("robust", "robust"), ("cluster", "clustered")]


@pytest.fixture(scope="module")
def sample() -> pd.DataFrame:
    rng = np.random.default_rng(5)
    frame = iv_sample(DESIGN, rng)
    frame["dose"] = 0.8 * frame["z3"] - 0.4 * frame["z2"] + 0.5 * frame["focal"] + rng.standard_normal(len(frame))
    return frame


def diagnostics_for(frame: pd.DataFrame, endogenous: list[str], covariance: str) -> dict:
    extra = {"cluster": ["cluster"]} if covariance == "cluster" else {}
    claim = iv_claim(DESIGN, endogenous=endogenous, covariance=covariance, **extra)
    return refit(frame, parse_claim(claim)).to_dict()["diagnostics"]


@pytest.mark.parametrize(("ours", "theirs"), COVARIANCES)
@pytest.mark.parametrize("endogenous", [["focal"], ["focal", "dose"]], ids=["one focal", "two focal"])
def test_rank_statistics_match_linearmodels(sample: pd.DataFrame, ours: str, theirs: str, endogenous: list[str]) -> None:
    diagnostics = diagnostics_for(sample, endogenous, ours)
    exog = sample[["w1", "w2"]].assign(const=1.0).to_numpy()
    instruments = sample[["z1", "z2", "z3"]].to_numpy()
    regressors = sample[endogenous].to_numpy()
    config = {"clusters": sample["cluster"].to_numpy()} if theirs == "clustered" else {}
    lm_test, wald_f = _kleibergen_paap(regressors, instruments, exog, theirs, config)
    assert diagnostics["cragg_donald_f"]["statistic"] == pytest.approx(cragg_donald_f(regressors, instruments, exog), rel=RTOL)
    assert diagnostics["kleibergen_paap_rk_f"]["statistic"] == pytest.approx(wald_f, rel=RTOL)
    assert diagnostics["kleibergen_paap_rk_lm"]["statistic"] == pytest.approx(lm_test.stat, rel=RTOL)
    assert diagnostics["kleibergen_paap_rk_lm"]["p_value"] == pytest.approx(lm_test.pval, rel=1e-6, abs=1e-300)
    assert diagnostics["kleibergen_paap_rk_lm"]["df"] == 3 - len(endogenous) + 1


@pytest.mark.parametrize("covariance", ["robust", "cluster"])
def test_kleibergen_paap_f_is_the_robust_first_stage_f_with_one_focal_regressor(sample: pd.DataFrame, covariance: str) -> None:
    diagnostics = diagnostics_for(sample, ["focal"], covariance)
    assert diagnostics["kleibergen_paap_rk_f"]["statistic"] == pytest.approx(diagnostics["first_stage"][0]["statistic"], rel=1e-10)


@pytest.mark.parametrize("endogenous", [["focal"], ["focal", "dose"]], ids=["one focal", "two focal"])
def test_kleibergen_paap_f_is_cragg_donald_with_homoskedastic_errors(sample: pd.DataFrame, endogenous: list[str]) -> None:
    diagnostics = diagnostics_for(sample, endogenous, "homoskedastic")
    assert diagnostics["kleibergen_paap_rk_f"]["statistic"] == pytest.approx(diagnostics["cragg_donald_f"]["statistic"], rel=1e-10)


def test_cragg_donald_is_the_classical_first_stage_f_with_one_focal_regressor(sample: pd.DataFrame) -> None:
    diagnostics = diagnostics_for(sample, ["focal"], "robust")
    homoskedastic = diagnostics_for(sample, ["focal"], "homoskedastic")
    assert diagnostics["cragg_donald_f"]["statistic"] == pytest.approx(homoskedastic["first_stage"][0]["statistic"], rel=1e-10)


@pytest.mark.parametrize(("ours", "statsmodels_cov"), [("homoskedastic", "nonrobust"), ("robust", "HC1")])
def test_sanderson_windmeijer_matches_brute_force(sample: pd.DataFrame, ours: str, statsmodels_cov: str) -> None:
    """2SLS of x_j on the other focal regressor (linearmodels), then OLS of its residual on all
    instruments (statsmodels) and the Wald test of the excluded ones; SW divide by q - p + 1 = 2."""
    entries = diagnostics_for(sample, ["focal", "dose"], ours)["sanderson_windmeijer_f"]["by_regressor"]
    exog = sample[["w1", "w2"]].assign(const=1.0)
    instruments = sample[["z1", "z2", "z3"]]
    for entry, (target, other) in zip(entries, [("focal", "dose"), ("dose", "focal")]):
        first = IV2SLS(sample[target], exog, sample[[other]], instruments).fit(cov_type="unadjusted")
        residual = sample[target] - sample[other] * first.params[other]
        regressors = pd.concat([instruments, exog], axis=1)
        ols = sm.OLS(residual, regressors).fit(cov_type=statsmodels_cov)
        restriction = np.eye(regressors.shape[1])[:3]
        wald = float(np.squeeze(ols.wald_test(restriction, use_f=False, scalar=True).statistic))
        assert entry["regressor"] == target
        assert entry["wald_chi2"] == pytest.approx(wald, rel=RTOL)
        assert entry["statistic"] == pytest.approx(wald / 2, rel=RTOL)


def test_sanderson_windmeijer_needs_several_focal_regressors(sample: pd.DataFrame) -> None:
    result = diagnostics_for(sample, ["focal"], "robust")["sanderson_windmeijer_f"]
    assert result["standing"] == "not_applicable"
    assert "several focal regressors" in result["reason"]
