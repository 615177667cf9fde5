"""Meats for many residual vectors at once, projected on a few score directions.

Weak-instrument statistics need ``D' meat(e_a, e_b) D`` for every pair of a
handful of residual vectors ``e_a = A c_a`` and a few directions ``D`` in the
regressor space (for example the map to the excluded-instrument coefficients).
Asking the variance estimator for each full ``d x d`` meat costs one pass over
the rows per pair when errors are heteroskedasticity-robust; here all pairs
come from one pass, because only the projected scores ``D' V_i e_ai`` are
summed:

* homoskedastic: ``(e_a'e_b / n) D' V'V D`` (no pass);
* robust: ``sum_i (D'V_i e_ai)(D'V_i e_bi)'`` (one pass for all pairs);
* cluster: ``sum_g S_ga' S_gb`` with ``S_ga = D' V_g' e_ga`` from the per-cluster
  cross-products (two-way: ``S_1 + S_2 - S_12``).

With ``n_params`` the claim's small-sample factor is applied exactly as
:meth:`app.estimation.covariance.VarianceEstimator.cross_meat` does;
without it the raw sums are returned (what LM statistics use). Blocks are not
symmetrised: block ``[a, b]`` is the covariance-type product of ``a`` with ``b``.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from app.estimation.covariance import ClusterRobust, HeteroskedasticityRobust, Homoskedastic, VarianceEstimator

CHUNK_ROWS = 262_144


def projected_meats(
    variance: VarianceEstimator, directions: np.ndarray, residuals: np.ndarray, *, n_params: int | None
) -> np.ndarray:
    """``(r, r, s, s)`` array: block ``[a, b] = D' meat(c_a, c_b) D``.

    Parameters
    ----------
    directions
        ``D``, ``d x s`` in the regressor space ``V = [X, Z, W]``.
    residuals
        ``width x r``: residual vectors over the stacked array's columns.
    n_params
        Parameters of the model the residuals belong to, for the small-sample
        factor; None for the raw sums.
    """
    compute = PROJECTED_MEATS[type(variance)]
    return compute(variance, directions, residuals, n_params)


def _homoskedastic(variance: Homoskedastic, directions: np.ndarray, residuals: np.ndarray, n_params: int | None) -> np.ndarray:
    moments = variance.moments
    cross = residuals.T @ moments.gram @ residuals / moments.n_obs
    projected = directions.T @ moments.vv @ directions
    factor = 1.0 if n_params is None else variance.factor(n_params)
    return factor * cross[:, :, None, None] * projected[None, None, :, :]


def _row_sums(
    variance: HeteroskedasticityRobust, directions: np.ndarray, residuals: np.ndarray, n_params: int | None
) -> np.ndarray:
    data = variance.data
    r, s = residuals.shape[1], directions.shape[1]
    lifted = np.vstack([np.zeros((1, s)), directions])
    total = np.zeros((r * s, r * s))
    for start in range(0, data.shape[0], CHUNK_ROWS):
        block_t = data[start : start + CHUNK_ROWS].T
        errors = residuals.T @ block_t
        scores = lifted.T @ block_t
        stacked = (errors[:, None, :] * scores[None, :, :]).reshape(r * s, -1)
        total += stacked @ stacked.T
    factor = 1.0 if n_params is None else variance.factor(n_params)
    return factor * total.reshape(r, s, r, s).transpose(0, 2, 1, 3)


def _cluster_sums(variance: ClusterRobust, directions: np.ndarray, residuals: np.ndarray, n_params: int | None) -> np.ndarray:
    r, s = residuals.shape[1], directions.shape[1]
    total = np.zeros((r * s, r * s))
    for sign, dimension in zip(variance.signs, variance.dimensions):
        stacked = np.hstack([dimension.scores(residuals[:, a]) @ directions for a in range(r)])
        g = dimension.n_clusters
        weight = 1.0 if n_params is None else g / (g - 1)
        total += sign * weight * stacked.T @ stacked
    factor = 1.0 if n_params is None else variance.factor(n_params)
    return factor * total.reshape(r, s, r, s).transpose(0, 2, 1, 3)


PROJECTED_MEATS: dict[type, Callable[..., np.ndarray]] = {
    Homoskedastic: _homoskedastic,
    HeteroskedasticityRobust: _row_sums,
    ClusterRobust: _cluster_sums,
}
