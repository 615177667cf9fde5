"""Projected meats for many residual pairs agree with the variance estimators and with explicit sums.

References: the engine's own ``VarianceEstimator.meat`` for pairs of equal
residuals (which it symmetrises), and explicit per-row / per-cluster sums of
``(D'V_i e_ai)(D'V_i e_bi)'`` written here for the order-preserving cross pairs.
"""

from __future__ import annotations

import numpy as np
import pytest

from app.data.design import build_design
from app.estimation.covariance import variance_estimator
from app.estimation.projected_meats import projected_meats
from app.estimation.refit import design_moments
from app.spec import parse_claim
from tests.simulation import IvDesign, iv_claim, iv_sample

DESIGN = IvDesign(n_obs=500, first_stage=(0.5, 0.3), n_controls=2, heteroskedastic=True, n_clusters=25, cluster_effect=0.5)
CLAIMS = {
    "homoskedastic": {"covariance": "homoskedastic"},
    "robust": {"covariance": "robust"},
    "cluster": {"covariance": "cluster", "cluster": ["cluster"]},
    "two-way cluster": {"covariance": "cluster", "cluster": ["cluster", "region"]},
}


@pytest.fixture(scope="module", params=list(CLAIMS))
def estimator(request: pytest.FixtureRequest):
    frame = iv_sample(DESIGN, np.random.default_rng(19))
    spec = parse_claim(iv_claim(DESIGN, **CLAIMS[request.param]))
    design = build_design(frame, spec)
    moments = design_moments(design)
    return request.param, design, variance_estimator(spec.covariance, moments, design.data, design.clusters)


def test_equal_pairs_match_the_variance_estimator(estimator) -> None:
    _, design, variance = estimator
    rng = np.random.default_rng(0)
    width = design.data.shape[1]
    directions = rng.standard_normal((width - 1, 3))
    residuals = rng.standard_normal((width, 2))
    for n_params in (None, 7):
        blocks = projected_meats(variance, directions, residuals, n_params=n_params)
        for a in range(2):
            meat = variance.raw_meat(residuals[:, a]) if n_params is None else variance.meat(residuals[:, a], n_params=n_params)
            np.testing.assert_allclose(blocks[a, a], directions.T @ meat @ directions, rtol=1e-9, atol=1e-9)


def test_cross_pairs_keep_their_order(estimator) -> None:
    kind, design, variance = estimator
    rng = np.random.default_rng(1)
    data = design.data
    directions = rng.standard_normal((data.shape[1] - 1, 2))
    residuals = rng.standard_normal((data.shape[1], 2))
    errors = data @ residuals
    scores = [(data[:, 1:] @ directions) * errors[:, [a]] for a in range(2)]
    if kind == "homoskedastic":
        projected = directions.T @ data[:, 1:].T @ data[:, 1:] @ directions
        expected = errors[:, 0] @ errors[:, 1] / len(data) * projected
    elif kind == "robust":
        expected = scores[0].T @ scores[1]
    else:
        dimensions = [(1.0, codes) for codes in design.clusters]
        if kind == "two-way cluster":
            pairs = np.unique(np.column_stack(design.clusters), axis=0, return_inverse=True)[1].ravel()
            dimensions.append((-1.0, pairs))
        expected = np.zeros((2, 2))
        for sign, codes in dimensions:
            sums = [np.stack([s[codes == c].sum(axis=0) for c in np.unique(codes)]) for s in scores]
            expected += sign * sums[0].T @ sums[1]
    blocks = projected_meats(variance, directions, residuals, n_params=None)
    np.testing.assert_allclose(blocks[0, 1], expected, rtol=1e-9, atol=1e-9)
    np.testing.assert_allclose(blocks[1, 0], expected.T, rtol=1e-9, atol=1e-9)
