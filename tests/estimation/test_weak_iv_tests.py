"""Anderson-Rubin, Kleibergen K and CLR tests of the focal coefficient and their confidence sets.

Homoskedastic statistics, p-values and sets are checked against the ivmodels
library (reference/ivmodels_weak_iv.toml, written by
reference/make_ivmodels_weak_iv.py) on the MROZ and CARD examples and a weak
simulated sample. The robust and cluster forms are checked against an
independent brute-force implementation written here from the raw data
arrays (explicit partialling, per-row and per-cluster score sums, fine-grid
inversion) and the CLR conditional p-value against a simulation of its null
distribution and an adaptive quadrature of its integral form.
"""

from __future__ import annotations

import math
import tomllib
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy import integrate, stats

from app.data.design import build_design
from app.estimation.anderson_rubin import anderson_rubin, anderson_rubin_statistic
from app.estimation.conditional_tests import clr_p_value, conditional_statistics, conditional_tests
from app.estimation.covariance import variance_estimator
from app.estimation.reduced_form_system import ReducedFormSystem, reduced_form_system
from app.estimation.refit import design_moments, refit
from app.spec import parse_claim
from tests.estimation.weak_iv_examples import EXAMPLES, example_claim, example_frame
from tests.simulation import IvDesign, iv_claim, iv_sample

REFERENCE = tomllib.loads((Path(__file__).parent / "reference" / "ivmodels_weak_iv.toml").read_text())
TOLERANCE = REFERENCE["tolerance"]


def system_for(frame: pd.DataFrame, claim: dict) -> ReducedFormSystem:
    spec = parse_claim(claim)
    design = build_design(frame, spec)
    moments = design_moments(design)
    return reduced_form_system(moments, variance_estimator(spec.covariance, moments, design.data, design.clusters))


@pytest.fixture(scope="module", params=REFERENCE["example"], ids=lambda example: example["name"])
def example(request: pytest.FixtureRequest) -> tuple[dict, ReducedFormSystem]:
    reference = request.param
    return reference, system_for(example_frame(reference["name"]), example_claim(reference["name"]))


def test_degrees_of_freedom_follow_ivmodels_convention(example: tuple[dict, ReducedFormSystem]) -> None:
    """ivmodels' F(k, n - k - mc - 1) with an intercept is our F(q, n - L), L = q + controls + 1."""
    reference, system = example
    spec = EXAMPLES[reference["name"]]
    q, controls = len(spec["instruments"]), len(spec["controls"])
    assert system.n_obs == reference["n_obs"]
    assert system.inference_df == reference["n_obs"] - q - controls - 1


def test_statistics_and_p_values_match_ivmodels(example: tuple[dict, ReducedFormSystem]) -> None:
    reference, system = example
    q = system.n_instruments
    values = np.array([row["value"] for row in reference["at"]])
    ar = anderson_rubin_statistic(system, values) / q
    ar_p = stats.f.sf(ar, q, system.inference_df)
    computed = conditional_statistics(system, values)
    clr_p = clr_p_value(computed.likelihood_ratio, computed.rank, q)
    for i, row in enumerate(reference["at"]):
        assert ar[i] == pytest.approx(row["anderson_rubin"][0], rel=TOLERANCE["statistic_rel"])
        assert ar_p[i] == pytest.approx(row["anderson_rubin"][1], rel=TOLERANCE["p_value_rel"], abs=1e-15)
        assert computed.k[i] == pytest.approx(row["kleibergen_k"][0], rel=TOLERANCE["statistic_rel"])
        assert stats.chi2.sf(computed.k[i], 1) == pytest.approx(row["kleibergen_k"][1], rel=TOLERANCE["p_value_rel"], abs=1e-15)
        assert computed.likelihood_ratio[i] == pytest.approx(row["clr"][0], rel=TOLERANCE["statistic_rel"])
        assert clr_p[i] == pytest.approx(row["clr"][1], abs=TOLERANCE["clr_p_value_abs"])


def test_confidence_sets_match_ivmodels(example: tuple[dict, ReducedFormSystem]) -> None:
    """AR: ivmodels' exact quadric. K and CLR: its root finding, to its tolerance."""
    reference, system = example
    ar = anderson_rubin(system).details["confidence_set"]
    assert_same_set(ar, reference["sets"]["anderson_rubin"], rel=TOLERANCE["ar_set_rel"], absolute=0.0)
    results = conditional_tests(system)
    for key in ("kleibergen_k", "clr"):
        ours = results[key].details["confidence_set"]
        assert_same_set(ours, reference["sets"][key], rel=0.0, absolute=TOLERANCE["root_finding_abs"])


def assert_same_set(ours: list, theirs: list, *, rel: float, absolute: float) -> None:
    assert len(ours) == len(theirs), (ours, theirs)
    for (low, high), (ref_low, ref_high) in zip(ours, theirs):
        for value, expected in ((low, ref_low), (high, ref_high)):
            if math.isinf(expected):
                assert value == expected
            else:
                assert value == pytest.approx(expected, rel=rel, abs=absolute)


def test_null_of_no_effect_is_the_reduced_form_test_and_infinity_the_first_stage() -> None:
    """AR(0) is the engine's reduced-form F; AR(b) tends to the first-stage F as |b| grows."""
    frame = example_frame("mroz_parents_education")
    for covariance in ("homoskedastic", "robust"):
        findings = refit(frame, parse_claim(example_claim("mroz_parents_education", covariance))).to_dict()["diagnostics"]
        assert findings["anderson_rubin"]["statistic"] == pytest.approx(findings["reduced_form"]["statistic"], rel=1e-10)
        assert findings["anderson_rubin"]["statistic_at_infinity"] == pytest.approx(findings["first_stage"][0]["statistic"], rel=1e-10)


# ---------------------------------------------------------------------------------------------
# Robust and cluster forms: an independent brute-force implementation from the raw arrays.

HETEROSKEDASTIC = IvDesign(
    n_obs=700, first_stage=(0.25, 0.15, 0.1), n_controls=2, endogeneity=0.6, heteroskedastic=True, n_clusters=45, cluster_effect=0.6
)


@pytest.fixture(scope="module")
def heteroskedastic_sample() -> pd.DataFrame:
    return iv_sample(HETEROSKEDASTIC, np.random.default_rng(31))


def brute_force_covariance(frame: pd.DataFrame, covariance: str) -> tuple[np.ndarray, np.ndarray, float, int]:
    """``(Pi, Cov blocks, df)`` for ``[y, x]`` on ``Z`` after partialling ``[1, W]``, by explicit sums."""
    n = len(frame)
    exog = np.column_stack([np.ones(n), frame[["w1", "w2"]].to_numpy()])
    instruments = frame[["z1", "z2", "z3"]].to_numpy()
    targets = frame[["outcome", "focal"]].to_numpy()

    def partial(values: np.ndarray) -> np.ndarray:
        return values - exog @ np.linalg.lstsq(exog, values, rcond=None)[0]

    z, y = partial(instruments), partial(targets)
    pi = np.linalg.lstsq(z, y, rcond=None)[0]
    residuals = y - z @ pi
    bread = np.linalg.inv(z.T @ z)
    n_params = instruments.shape[1] + exog.shape[1]
    groups = frame["cluster"].to_numpy() if covariance == "cluster" else np.arange(n)
    labels = np.unique(groups)
    scores = np.stack([np.stack([(z[groups == g] * residuals[groups == g, a][:, None]).sum(axis=0) for g in labels]) for a in range(2)])
    if covariance == "cluster":
        factor = len(labels) / (len(labels) - 1) * (n - 1) / (n - n_params)
        df = len(labels) - 1
    else:
        factor = n / (n - n_params)
        df = n - n_params
    blocks = np.empty((2, 2, 3, 3))
    for a in range(2):
        for b in range(2):
            blocks[a, b] = factor * bread @ scores[a].T @ scores[b] @ bread
    return pi, blocks, df, n


def brute_force_statistics(pi: np.ndarray, blocks: np.ndarray, b: float) -> tuple[float, float, float, float]:
    """AR (chi2 form), K, r and LR at b in Kleibergen's (2005) notation, written without rotation."""
    g = pi[:, 0] - b * pi[:, 1]
    v_gg = blocks[0, 0] - b * (blocks[0, 1] + blocks[1, 0]) + b * b * blocks[1, 1]
    v_xg = blocks[1, 0] - b * blocks[1, 1]
    d = pi[:, 1] - v_xg @ np.linalg.solve(v_gg, g)
    v_dd = blocks[1, 1] - v_xg @ np.linalg.solve(v_gg, v_xg.T)
    ar = g @ np.linalg.solve(v_gg, g)
    k = (d @ np.linalg.solve(v_gg, g)) ** 2 / (d @ np.linalg.solve(v_gg, d))
    r = d @ np.linalg.solve(v_dd, d)
    lr = 0.5 * (ar - r + math.sqrt((ar + r) ** 2 - 4 * r * (ar - k)))
    return ar, k, r, lr


@pytest.mark.parametrize("covariance", ["robust", "cluster"])
def test_robust_statistics_match_brute_force(heteroskedastic_sample: pd.DataFrame, covariance: str) -> None:
    extra = {"cluster": ["cluster"]} if covariance == "cluster" else {}
    system = system_for(heteroskedastic_sample, iv_claim(HETEROSKEDASTIC, covariance=covariance, **extra))
    pi, blocks, df, _ = brute_force_covariance(heteroskedastic_sample, covariance)
    assert system.inference_df == df
    np.testing.assert_allclose(system.coefficients, pi, rtol=1e-10)
    np.testing.assert_allclose(system.covariance, blocks, rtol=1e-9, atol=1e-14)
    values = np.array([-3.0, -0.4, 0.0, 0.7, 2.5, 40.0])
    computed = conditional_statistics(system, values)
    for i, b in enumerate(values):
        ar, k, r, lr = brute_force_statistics(pi, blocks, b)
        assert computed.anderson_rubin[i] == pytest.approx(ar, rel=1e-8)
        assert computed.k[i] == pytest.approx(k, rel=1e-7)
        assert computed.rank[i] == pytest.approx(r, rel=1e-7)
        assert computed.likelihood_ratio[i] == pytest.approx(lr, rel=1e-7, abs=1e-10)


@pytest.mark.parametrize("covariance", ["robust", "cluster"])
def test_robust_sets_agree_with_fine_grid_inversion(heteroskedastic_sample: pd.DataFrame, covariance: str) -> None:
    """Every boundary of our AR, K and CLR sets lies within one step of a sign change on a grid of 40,001 points."""
    extra = {"cluster": ["cluster"]} if covariance == "cluster" else {}
    system = system_for(heteroskedastic_sample, iv_claim(HETEROSKEDASTIC, covariance=covariance, **extra))
    pi, blocks, df, _ = brute_force_covariance(heteroskedastic_sample, covariance)
    grid = np.linspace(-15, 15, 40_001)
    step = grid[1] - grid[0]
    brute = np.array([brute_force_statistics(pi, blocks, b) for b in grid])
    q = 3
    accepted = {
        "anderson_rubin": brute[:, 0] / q <= stats.f.ppf(0.95, q, df),
        "kleibergen_k": brute[:, 1] <= stats.chi2.ppf(0.95, 1),
        "clr": clr_p_value(brute[:, 3], brute[:, 2], q) >= 0.05,
    }
    sets = {key: result.details["confidence_set"] for key, result in conditional_tests(system).items()}
    sets["anderson_rubin"] = anderson_rubin(system).details["confidence_set"]
    for key, inside in accepted.items():
        crossings = grid[1:][inside[1:] != inside[:-1]]
        ours = [value for piece in sets[key] for value in piece if math.isfinite(value) and -15 < value < 15]
        assert len(ours) == len(crossings), (key, ours, crossings)
        for value, crossing in zip(sorted(ours), crossings):
            assert abs(value - crossing) <= step, (key, value, crossing)
        for low, high in sets[key]:
            assert (low == -math.inf) == bool(inside[0]) or low > -15
            assert (high == math.inf) == bool(inside[-1]) or high < 15


@pytest.mark.parametrize(
    ("statistic", "rank", "q"), [(3.0, 2.0, 2), (5.5, 10.0, 3), (2.0, 0.5, 5), (9.0, 40.0, 4), (1.2, 150.0, 10), (0.3, 1e5, 3)]
)
def test_clr_p_value_matches_simulated_null_distribution(statistic: float, rank: float, q: int) -> None:
    """Moreira's LR given r: ((Q1 + Qq-1 - r) + sqrt((Q1 + Qq-1 + r)^2 - 4 r Qq-1)) / 2 with chi2 draws."""
    rng = np.random.default_rng(97)
    draws = 400_000
    q1 = rng.chisquare(1, draws)
    rest = rng.chisquare(q - 1, draws)
    lr = 0.5 * (q1 + rest - rank + np.sqrt((q1 + rest + rank) ** 2 - 4 * rank * rest))
    simulated = float(np.mean(lr > statistic))
    margin = 5 * math.sqrt(simulated * (1 - simulated) / draws)
    assert clr_p_value(np.array([statistic]), np.array([rank]), q)[0] == pytest.approx(simulated, abs=margin)


@pytest.mark.parametrize("q", [2, 3, 5, 30])
def test_clr_p_value_matches_adaptive_quadrature_including_extreme_strength(q: int) -> None:
    """P(LR <= m | r) = P(Q1 <= m (1 - Q_{q-1}/(m + r))), integrated by scipy's adaptive quad over Q_{q-1}."""

    def adaptive(m: float, r: float) -> float:
        total = m + r
        top = min(total, stats.chi2.isf(1e-17, q - 1))

        def integrand(u: float) -> float:
            return stats.chi2.cdf(m * (1 - u / total), 1) * stats.chi2.pdf(u, q - 1)

        return 1 - integrate.quad(integrand, 0, top, limit=1000, epsabs=1e-15, epsrel=1e-13, points=[min(q, top / 2)])[0]

    for m in (1e-4, 0.3, 3.84, 20.0, 150.0):
        for r in (0.0, 0.1, 10.0, 1e4, 1e7):
            assert clr_p_value(np.array([m]), np.array([r]), q)[0] == pytest.approx(adaptive(m, r), abs=1e-10), (m, r)


def test_clr_with_one_instrument_is_chi_squared_one() -> None:
    assert clr_p_value(np.array([3.84]), np.array([12.0]), 1)[0] == pytest.approx(stats.chi2.sf(3.84, 1))


# ---------------------------------------------------------------------------------------------
# What cannot apply says why.


def test_several_focal_regressors_give_the_joint_anderson_rubin_test_only(heteroskedastic_sample: pd.DataFrame) -> None:
    noise = np.random.default_rng(8).standard_normal(len(heteroskedastic_sample))
    frame = heteroskedastic_sample.assign(
        dose=heteroskedastic_sample["z3"] - 0.5 * heteroskedastic_sample["z2"] + heteroskedastic_sample["focal"] + noise
    )
    claim = iv_claim(HETEROSKEDASTIC, endogenous=["focal", "dose"], covariance="robust")
    diagnostics = refit(frame, parse_claim(claim)).to_dict()["diagnostics"]
    joint = diagnostics["anderson_rubin"]
    assert joint["standing"] == "computed"
    assert joint["statistic"] == pytest.approx(diagnostics["reduced_form"]["statistic"], rel=1e-10)
    assert joint["confidence_set"] is None and "2 dimensions" in joint["confidence_set_note"]
    for key in ("kleibergen_k", "clr"):
        assert diagnostics[key]["standing"] == "not_applicable"
        assert "one focal regressor" in diagnostics[key]["reason"]


def test_fewer_clusters_than_instruments_is_undefined_with_a_reason() -> None:
    design = IvDesign(n_obs=300, first_stage=(0.5, 0.4, 0.3), n_controls=1, n_clusters=3)
    frame = iv_sample(design, np.random.default_rng(4))
    diagnostics = refit(frame, parse_claim(iv_claim(design, covariance="cluster", cluster=["cluster"]))).to_dict()["diagnostics"]
    for key in ("anderson_rubin", "kleibergen_k", "clr"):
        assert diagnostics[key]["standing"] == "undefined"
        assert "singular" in diagnostics[key]["reason"]
        assert diagnostics[key]["statistic"] is None


def test_few_clusters_allow_the_test_of_no_effect_but_not_the_robust_sets() -> None:
    """Five clusters and three instruments: the 3 x 3 covariance of the reduced form is usable,
    the 6 x 6 joint covariance with the first stage (rank at most 5) is not."""
    design = IvDesign(n_obs=400, first_stage=(0.5, 0.4, 0.3), n_controls=1, n_clusters=5, heteroskedastic=True)
    frame = iv_sample(design, np.random.default_rng(14))
    diagnostics = refit(frame, parse_claim(iv_claim(design, covariance="cluster", cluster=["cluster"]))).to_dict()["diagnostics"]
    ar = diagnostics["anderson_rubin"]
    assert ar["standing"] == "computed" and ar["statistic"] > 0
    assert ar["confidence_set"] is None and "cannot be inverted" in ar["confidence_set_note"]
    for key in ("kleibergen_k", "clr"):
        assert diagnostics[key]["standing"] == "undefined"
        assert "fewer clusters than twice the number of instruments" in diagnostics[key]["reason"]
