"""Plausibly exogenous instruments (Conley, Hansen & Rossi 2012): union of 2SLS intervals over bounded direct effects.

References: linearmodels 7.1 IV2SLS refitted on ``y - Z gamma`` at every
vertex of the box (robust, debiased=True, with our t(n - k) critical value);
a dense brute-force grid over the box; the claim's own 2SLS interval at a
zero bound. Tolerance 1e-8 relative.
"""

from __future__ import annotations

import itertools

import numpy as np
import pandas as pd
import pytest
from linearmodels.iv import IV2SLS
from scipy import stats

from app.data.design import build_design
from app.estimation.covariance import variance_estimator
from app.estimation.plausibly_exogenous import plausibly_exogenous
from app.estimation.refit import design_moments, fit_estimators, refit
from app.spec import parse_claim
from tests.simulation import IvDesign, iv_claim, iv_sample

DESIGN = IvDesign(n_obs=700, first_stage=(0.5, 0.3), n_controls=2, effect=0.4, heteroskedastic=True, n_clusters=70)


@pytest.fixture(scope="module")
def sample() -> pd.DataFrame:
    return iv_sample(DESIGN, np.random.default_rng(17))


def union_for(frame: pd.DataFrame, bound: float | None, covariance: str = "robust") -> dict:
    extra = {"cluster": ["cluster"]} if covariance == "cluster" else {}
    claim = iv_claim(DESIGN, covariance=covariance, direct_effect_bound=bound, **extra)
    return refit(frame, parse_claim(claim)).to_dict()


def reference_interval(frame: pd.DataFrame, gamma: np.ndarray) -> tuple[float, float]:
    exog = frame[["w1", "w2"]].assign(const=1.0)
    outcome = frame["outcome"] - frame[["z1", "z2"]].to_numpy() @ gamma
    fit = IV2SLS(outcome, exog, frame[["focal"]], frame[["z1", "z2"]]).fit(cov_type="robust", debiased=True)
    critical = stats.t.ppf(0.975, len(frame) - 4)
    return fit.params["focal"] - critical * fit.std_errors["focal"], fit.params["focal"] + critical * fit.std_errors["focal"]


@pytest.mark.parametrize("covariance", ["robust", "cluster", "homoskedastic"])
def test_zero_bound_gives_the_claims_own_interval(sample: pd.DataFrame, covariance: str) -> None:
    findings = union_for(sample, 0.0, covariance)
    row = next(r for r in findings["estimates"] if r["estimator"] == "2sls" and r["term"] == "focal")
    entry = findings["diagnostics"]["plausibly_exogenous"]["by_regressor"][0]
    assert entry["boxes"][0]["interval"] == [pytest.approx(row["ci_low"], rel=1e-10), pytest.approx(row["ci_high"], rel=1e-10)]


def test_union_matches_refits_at_the_vertices_and_covers_the_box(sample: pd.DataFrame) -> None:
    bound = 0.06
    interval = union_for(sample, bound)["diagnostics"]["plausibly_exogenous"]["by_regressor"][0]["boxes"][0]["interval"]
    vertices = [reference_interval(sample, np.array(signs) * bound) for signs in itertools.product((-1.0, 1.0), repeat=2)]
    assert interval[0] == pytest.approx(min(low for low, _ in vertices), rel=1e-8)
    assert interval[1] == pytest.approx(max(high for _, high in vertices), rel=1e-8)
    for gamma in itertools.product(np.linspace(-bound, bound, 7), repeat=2):
        low, high = reference_interval(sample, np.array(gamma))
        assert interval[0] <= low + 1e-12 and high <= interval[1] + 1e-12


def test_break_even_bound_is_where_the_union_reaches_zero(sample: pd.DataFrame) -> None:
    entry = union_for(sample, None)["diagnostics"]["plausibly_exogenous"]["by_regressor"][0]
    assert entry["interval_without_direct_effect"][0] > 0  # the sample's effect is significant
    delta = entry["break_even_delta"]
    spec = parse_claim(iv_claim(DESIGN, covariance="robust"))
    design = build_design(sample, spec)
    moments = design_moments(design)
    variance = variance_estimator(spec.covariance, moments, design.data, design.clusters)
    tsls = fit_estimators(moments, variance, terms=[*design.endogenous, *design.exogenous]).fits["2sls"]

    def lower_end(bound: float) -> float:
        result = plausibly_exogenous(
            moments, variance, tsls=tsls, reduced_form=np.ones(2), focal=["focal"], instruments=["z1", "z2"], bound=bound
        )
        return result.details["by_regressor"][0]["boxes"][0]["interval"][0]

    assert lower_end(delta) == pytest.approx(0.0, abs=1e-9)
    assert lower_end(0.99 * delta) > 0
    assert lower_end(1.01 * delta) < 0


def test_default_grid_scales_each_instrument_by_its_reduced_form_coefficient(sample: pd.DataFrame) -> None:
    diagnostics = union_for(sample, None)["diagnostics"]
    reduced_form = [abs(c["estimate"]) for c in diagnostics["reduced_form"]["coefficients"]]
    boxes = diagnostics["plausibly_exogenous"]["by_regressor"][0]["boxes"]
    assert [box["share_of_reduced_form"] for box in boxes] == [0.05, 0.10, 0.25, 0.50]
    for box in boxes:
        assert box["bounds"] == [pytest.approx(box["share_of_reduced_form"] * value, rel=1e-10) for value in reduced_form]
    widths = [box["interval"][1] - box["interval"][0] for box in boxes]
    assert widths == sorted(widths)
    share = diagnostics["plausibly_exogenous"]["by_regressor"][0]["break_even_share_of_reduced_form"]
    crossing = [box for box in boxes if box["share_of_reduced_form"] >= share]
    assert all(not box["excludes_zero"] for box in crossing)


def test_an_insignificant_claim_breaks_even_at_zero() -> None:
    design = IvDesign(n_obs=200, first_stage=(0.3, 0.2), effect=0.0)
    frame = iv_sample(design, np.random.default_rng(5))
    entry = refit(frame, parse_claim(iv_claim(design, covariance="robust"))).to_dict()["diagnostics"]["plausibly_exogenous"]
    regressor = entry["by_regressor"][0]
    low, high = regressor["interval_without_direct_effect"]
    assert low < 0 < high
    assert regressor["break_even_delta"] == 0.0
    assert regressor["break_even_share_of_reduced_form"] == 0.0
