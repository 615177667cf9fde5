"""Wild cluster bootstrap with restricted residuals, computed by the fast algorithm.

Reference: a brute-force bootstrap written here that builds every bootstrap
sample ``y*`` (and ``x*`` for WRE) row by row with the same cluster weights and
refits it with numpy least squares and an explicit cluster-robust covariance
(Davidson & MacKinnon 2010 for the WRE data-generating process). The fast
algorithm (MacKinnon 2023) must give the same statistic in every replication,
to 1e-9 relative.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from app.data.design import build_design
from app.estimation.covariance import variance_estimator
from app.estimation.reduced_form_system import reduced_form_system
from app.estimation.refit import design_moments, fit_estimators, refit
from app.estimation.wild_bootstrap import anderson_rubin_draws, cluster_pieces, draw_weights, restricted_efficient_draws
from app.spec import parse_claim
from tests.simulation import IvDesign, iv_claim, iv_sample


def few_clusters(n_clusters: int) -> IvDesign:
    return IvDesign(
        n_obs=500, first_stage=(0.3, 0.2, 0.1), n_controls=2, n_clusters=n_clusters, cluster_effect=0.7, heteroskedastic=True
    )


def brute_force(frame: pd.DataFrame, weights: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """AR Wald (chi2 form) and WRE t-statistics for each row of ``weights``, refitting every sample."""
    n = len(frame)
    clusters = pd.factorize(frame["cluster"], sort=True)[0]
    g = clusters.max() + 1
    y, x = frame["outcome"].to_numpy(), frame["focal"].to_numpy()
    exog = np.column_stack([np.ones(n), frame[["w1", "w2"]].to_numpy()])
    instruments = np.column_stack([frame[["z1", "z2", "z3"]].to_numpy(), exog])
    gamma = np.linalg.lstsq(exog, y, rcond=None)[0]
    restricted = y - exog @ gamma
    augmented = np.linalg.lstsq(np.column_stack([instruments, restricted]), x, rcond=None)[0]
    first_stage = augmented[:-1]
    first_residual = x - instruments @ first_stage

    def cluster_covariance(scores: np.ndarray, bread: np.ndarray, k: int) -> np.ndarray:
        sums = np.stack([scores[clusters == c].sum(axis=0) for c in range(g)])
        return g / (g - 1) * (n - 1) / (n - k) * bread @ sums.T @ sums @ bread

    ar, t = [], []
    for row in weights:
        v = row[clusters]
        y_star = exog @ gamma + restricted * v
        coefficients = np.linalg.lstsq(instruments, y_star, rcond=None)[0]
        residual = y_star - instruments @ coefficients
        bread = np.linalg.inv(instruments.T @ instruments)
        covariance = cluster_covariance(instruments * residual[:, None], bread, instruments.shape[1])
        ar.append(coefficients[:3] @ np.linalg.solve(covariance[:3, :3], coefficients[:3]))
        x_star = instruments @ first_stage + first_residual * v
        regressors = np.column_stack([x_star, exog])
        fitted = instruments @ np.linalg.lstsq(instruments, regressors, rcond=None)[0]
        delta = np.linalg.solve(fitted.T @ regressors, fitted.T @ y_star)
        residual = y_star - regressors @ delta
        covariance = cluster_covariance(fitted * residual[:, None], np.linalg.inv(fitted.T @ fitted), regressors.shape[1])
        t.append(delta[0] / np.sqrt(covariance[0, 0]))
    return np.array(ar), np.array(t)


@pytest.mark.parametrize("n_clusters", [9, 23], ids=["Webb weights", "Rademacher weights"])
def test_fast_algorithm_matches_refitting_every_bootstrap_sample(n_clusters: int) -> None:
    design = few_clusters(n_clusters)
    frame = iv_sample(design, np.random.default_rng(n_clusters))
    spec = parse_claim(iv_claim(design, covariance="cluster", cluster=["cluster"]))
    built = build_design(frame, spec)
    moments = design_moments(built)
    variance = variance_estimator(spec.covariance, moments, built.data, built.clusters)
    tsls = fit_estimators(moments, variance, terms=[*built.endogenous, *built.exogenous]).fits["2sls"]
    system = reduced_form_system(moments, variance)
    pieces = cluster_pieces(moments, variance.dimensions[0].cross_products(), n_params_ar=system.n_params, n_params_2sls=tsls.n_params)
    weights = draw_weights(np.random.default_rng(1), replications=40, n_clusters=n_clusters)
    expected_ar, expected_t = brute_force(frame.iloc[built.rows].reset_index(drop=True), weights)
    np.testing.assert_allclose(anderson_rubin_draws(moments, pieces, weights), expected_ar, rtol=1e-9)
    np.testing.assert_allclose(restricted_efficient_draws(moments, pieces, weights), expected_t, rtol=1e-9)
    distinct = np.unique(weights)
    assert len(distinct) == (6 if n_clusters < 12 else 2)


def test_findings_entry_is_seeded_and_shows_its_replications() -> None:
    design = few_clusters(15)
    frame = iv_sample(design, np.random.default_rng(3))
    claim = iv_claim(design, covariance="cluster", cluster=["cluster"], bootstrap={"replications": 999, "seed": 77})
    first = refit(frame, parse_claim(claim)).to_dict()
    second = refit(frame, parse_claim(claim)).to_dict()
    entry = first["diagnostics"]["wild_cluster_bootstrap"]
    assert entry == second["diagnostics"]["wild_cluster_bootstrap"]
    assert entry["replications"] == 999 and entry["seed"] == 77 and entry["clusters"] == 15
    assert entry["weights"] == "Rademacher"
    assert entry["anderson_rubin"]["statistic"] == pytest.approx(first["diagnostics"]["reduced_form"]["statistic"], rel=1e-10)
    row = next(r for r in first["estimates"] if r["estimator"] == "2sls" and r["term"] == "focal")
    assert entry["wald"]["statistic"] == pytest.approx(row["statistic"], rel=1e-10)
    assert 0 <= entry["p_value"] <= 1 and 0 <= entry["wald"]["p_value"] <= 1


@pytest.mark.parametrize(
    ("claim_fields", "reason"),
    [
        ({"covariance": "robust"}, "does not cluster"),
        ({"covariance": "cluster", "cluster": ["site"]}, "cluster-robust tests are usually adequate"),
        ({"covariance": "cluster", "cluster": ["cluster", "region"]}, "one-way clustering"),
    ],
    ids=["not clustered", "many clusters", "two-way"],
)
def test_when_the_bootstrap_does_not_apply(claim_fields: dict, reason: str) -> None:
    design = IvDesign(n_obs=900, first_stage=(0.5, 0.3), n_clusters=20)
    frame = iv_sample(design, np.random.default_rng(5))
    frame["site"] = np.arange(len(frame)) % 60
    entry = refit(frame, parse_claim(iv_claim(design, **claim_fields))).to_dict()["diagnostics"]["wild_cluster_bootstrap"]
    assert entry["standing"] == "not_applicable"
    assert reason in entry["reason"]
