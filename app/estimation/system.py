"""The structural equation and the first stages as one system: 3SLS and the disturbance correlation.

The IV model is the triangular system

    y   = X beta + W gamma + u                (structural equation)
    x_j = Z pi_j + W phi_j + v_j,  j = 1..p   (first stages)

whose disturbances ``(u, v_1..v_p)`` are correlated exactly when an omitted
common cause drives both the focal regressors and the outcome: the
correlation ``corr(u, v_j)`` is the statistical trace of the confounding that
OLS ignores. Three-stage least squares (Zellner & Theil 1962) estimates all
equations jointly with the common instruments ``[Z, W]``:

    delta = [Xh' (Sigma^{-1} (x) I) Xh]^{-1} Xh' (Sigma^{-1} (x) I) y,    Xh_i = P_[Z,W] R_i,

with Sigma estimated from the 2SLS (structural) and OLS (first-stage)
residuals divided by n, as linearmodels' IV3SLS does by default. Every block
is a quadratic form in the moment matrix. Because the first stages are
exactly identified, the structural coefficients equal 2SLS (Narayanan 1969).

The disturbance correlation ``rho_j = s_uv / sqrt(s_uu s_vv)`` (3SLS
residuals) gets a delta-method interval from its influence function, which
accounts for the estimated structural coefficients (the sample covariance of
u with v moves with beta because X is correlated with v):

    psi_uv = u v - s_uv - (R'v/n)' IF_delta,    psi_uu = u^2 - s_uu - 2 (R'u/n)' IF_delta,
    psi_vv = v^2 - s_vv,
    psi_rho = psi_uv / sqrt(s_uu s_vv) - rho/2 (psi_uu/s_uu + psi_vv/s_vv),

with ``IF_delta`` the 2SLS influence function. Its variance sums ``psi_rho``
over rows, or over clusters (with G/(G-1)) when the claim clusters; the
interval is formed on Fisher's z scale so that it stays inside (-1, 1). The
first-stage coefficients do not enter because the instruments are
uncorrelated with u and v. One pass over the data computes the sums.

References
----------
Zellner, A. and Theil, H. (1962). Three-stage least squares: simultaneous
estimation of simultaneous equations. Econometrica 30(1), 54-78.
Narayanan, R. (1969). Computation of Zellner-Theil's three stage least
squares estimates. Econometrica 37(2), 298-306.
Hampel, F. R. (1974). The influence curve and its role in robust estimation.
JASA 69(346), 383-393.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import stats

from app.estimation.covariance import ClusterRobust, VarianceEstimator
from app.estimation.findings import TestResult
from app.estimation.fits import LinearFit
from app.estimation.inference import CONFIDENCE_LEVEL
from app.estimation.linalg import SingularMatrixError, inverse_pd
from app.estimation.moments import Moments

NAME = "Disturbance correlation (3SLS system)"
SOURCE = "Zellner & Theil (1962) three-stage least squares; influence-function interval"
NULL = "the structural and first-stage disturbances are uncorrelated (no omitted common cause)"
CHUNK_ROWS = 262_144


@dataclass(frozen=True)
class SystemFit:
    """3SLS estimates of the structural equation and the first stages.

    Attributes
    ----------
    equations
        Equation labels: the structural equation, then one first stage per focal regressor.
    params
        Coefficients per equation: ``[X, W]`` for the structural one, ``[Z, W]`` for first stages.
    residuals
        ``width x (1 + p)`` residual vectors over the stacked array.
    sigma
        Disturbance covariance ``E'E / n`` at the 3SLS residuals.
    first_step_sigma
        The covariance used for the GLS step (2SLS and OLS residuals, divided by n).
    """

    equations: list[str]
    params: list[np.ndarray]
    residuals: np.ndarray
    sigma: np.ndarray
    first_step_sigma: np.ndarray


def three_stage_least_squares(moments: Moments, *, tsls: LinearFit, first_stage_residuals: np.ndarray, names: list[str]) -> SystemFit:
    """3SLS of the structural equation and every first stage, from the moment matrix."""
    layout = moments.layout
    gram = moments.gram
    instruments = layout.instruments
    regressors = [layout.regressors] + [instruments] * layout.n_endog
    dependents = [0, *layout.endog]
    zz_inverse = inverse_pd(gram[np.ix_(instruments, instruments)])
    first_step = np.column_stack([tsls.residual, first_stage_residuals])
    sigma_first = first_step.T @ gram @ first_step / moments.n_obs
    sigma_inverse = inverse_pd((sigma_first + sigma_first.T) / 2)
    projected = [gram[np.ix_(columns, instruments)] @ zz_inverse for columns in regressors]
    sizes = [len(columns) for columns in regressors]
    offsets = np.concatenate([[0], np.cumsum(sizes)])
    hessian = np.zeros((offsets[-1], offsets[-1]))
    score = np.zeros(offsets[-1])
    for i, left in enumerate(projected):
        rows = slice(offsets[i], offsets[i + 1])
        for j, right_columns in enumerate(regressors):
            hessian[rows, offsets[j] : offsets[j + 1]] = sigma_inverse[i, j] * left @ gram[np.ix_(instruments, right_columns)]
            score[rows] += sigma_inverse[i, j] * left @ gram[instruments, dependents[j]]
    estimates = inverse_pd((hessian + hessian.T) / 2) @ score
    params = [estimates[offsets[i] : offsets[i + 1]] for i in range(len(regressors))]
    residuals = np.column_stack(
        [
            moments.residual_vector(moments.column(dependent), layout.selector(columns), coefficients)
            for dependent, columns, coefficients in zip(dependents, regressors, params)
        ]
    )
    sigma = residuals.T @ gram @ residuals / moments.n_obs
    return SystemFit(
        equations=["structural", *(f"first stage: {name}" for name in names)],
        params=params,
        residuals=residuals,
        sigma=(sigma + sigma.T) / 2,
        first_step_sigma=(sigma_first + sigma_first.T) / 2,
    )


def disturbance_correlation(
    moments: Moments,
    variance: VarianceEstimator,
    data: np.ndarray,
    *,
    tsls: LinearFit,
    first_stage_residuals: np.ndarray,
    names: list[str],
    level: float = CONFIDENCE_LEVEL,
) -> TestResult:
    """``corr(u, v_j)`` from the 3SLS system, with influence-function intervals."""
    try:
        fit = three_stage_least_squares(moments, tsls=tsls, first_stage_residuals=first_stage_residuals, names=names)
    except SingularMatrixError:
        return TestResult.undefined(
            NAME,
            "the disturbance covariance of the system is singular (a first stage fits exactly)",
            source=SOURCE,
            null_hypothesis=NULL,
        )
    p = moments.layout.n_endog
    sigma = fit.sigma
    if np.any(np.diag(sigma) <= 0):
        return TestResult.undefined(NAME, "a disturbance of the system has zero variance", source=SOURCE, null_hypothesis=NULL)
    correlations = sigma[0, 1:] / np.sqrt(sigma[0, 0] * np.diag(sigma)[1:])
    variances = _influence_variances(moments, variance, data, fit=fit, tsls=tsls, correlations=correlations)
    critical = float(stats.norm.ppf(0.5 + level / 2))
    entries = []
    for j, name in enumerate(names):
        rho = float(correlations[j])
        std_error = float(np.sqrt(max(variances[j], 0.0)))
        if abs(rho) >= 1 or std_error == 0:
            entries.append(
                {"regressor": name, "correlation": rho, "std_error": std_error, "ci_low": None, "ci_high": None, "p_value": None}
            )
            continue
        center = np.arctanh(rho)
        half = critical * std_error / (1 - rho * rho)
        entries.append(
            {
                "regressor": name,
                "correlation": rho,
                "std_error": std_error,
                "ci_low": float(np.tanh(center - half)),
                "ci_high": float(np.tanh(center + half)),
                "p_value": float(2 * stats.norm.sf(abs(rho) / std_error)),
            }
        )
    return TestResult(
        name=NAME,
        statistic=entries[0]["correlation"] if p == 1 else None,
        p_value=entries[0]["p_value"] if p == 1 else None,
        df=None,
        distribution="normal" if p == 1 else None,
        null_hypothesis=NULL,
        source=SOURCE,
        details={
            "by_regressor": entries,
            "confidence_level": level,
            "estimator": "3SLS",
            "equations": fit.equations,
            "disturbance_covariance": fit.sigma,
            "variance": variance.kind.value,
            "reading": (
                "a correlation away from zero is the trace of an omitted common cause of the focal regressor and the "
                "outcome, the bias OLS ignores; its sign says in which direction OLS errs. It relies on valid "
                "instruments and is unreliable when they are weak"
            ),
        },
    )


def _influence_variances(
    moments: Moments,
    variance: VarianceEstimator,
    data: np.ndarray,
    *,
    fit: SystemFit,
    tsls: LinearFit,
    correlations: np.ndarray,
) -> np.ndarray:
    """Variance of each ``rho_j`` from its influence function, summed by row or by cluster."""
    layout = moments.layout
    gram = moments.gram
    n = moments.n_obs
    p = layout.n_endog
    sigma = fit.sigma
    structural = fit.residuals[:, 0]
    effect = tsls.score_map @ tsls.bread
    cross_u = gram[layout.regressors, :] @ structural
    shifts = [np.concatenate([[0.0], -2.0 * effect @ cross_u])]
    for j in range(p):
        cross_v = gram[layout.regressors, :] @ fit.residuals[:, 1 + j]
        shifts.append(np.concatenate([[0.0], -effect @ cross_v]))
    combinations = np.column_stack([fit.residuals, *shifts])
    variances_v = np.diag(sigma)[1:, None]
    groups = _GroupSums(variance, n_columns=p)
    for start in range(0, n, CHUNK_ROWS):
        values = combinations.T @ data[start : start + CHUNK_ROWS].T
        u, v, shift_u, shift_v = values[0], values[1 : 1 + p], values[1 + p], values[2 + p :]
        psi_uu = u * u - sigma[0, 0] + shift_u * u
        psi_uv = u * v - sigma[0, 1:, None] + shift_v * u
        psi_vv = v * v - variances_v
        spread = psi_uu / sigma[0, 0] + psi_vv / variances_v
        influence = psi_uv / np.sqrt(sigma[0, 0] * variances_v) - correlations[:, None] / 2 * spread
        groups.add(influence, start=start)
    return groups.sum_of_squares() / n**2


class _GroupSums:
    """``sum_g (sum_{i in g} psi_i)^2`` per column, accumulated chunk by chunk.

    By row for the homoskedastic and robust estimators; by cluster (with
    G/(G-1), two-way as S_1 + S_2 - S_12) for the cluster estimator.
    """

    def __init__(self, variance: VarianceEstimator, *, n_columns: int) -> None:
        self.dimensions = list(zip(variance.signs, variance.dimensions)) if isinstance(variance, ClusterRobust) else []
        self.sums = [np.zeros((n_columns, dimension.n_clusters)) for _, dimension in self.dimensions]
        self.squares = np.zeros(n_columns)

    def add(self, values: np.ndarray, *, start: int) -> None:
        """Add the ``columns x rows`` block of values for rows ``start, start + 1, ...``."""
        if not self.dimensions:
            self.squares += np.einsum("jn,jn->j", values, values)
            return
        for sums, (_, dimension) in zip(self.sums, self.dimensions):
            codes = dimension.codes[start : start + values.shape[1]]
            for j, column in enumerate(values):
                sums[j] += np.bincount(codes, weights=column, minlength=dimension.n_clusters)

    def sum_of_squares(self) -> np.ndarray:
        if not self.dimensions:
            return self.squares
        total = np.zeros(self.squares.shape)
        for sums, (sign, dimension) in zip(self.sums, self.dimensions):
            g = dimension.n_clusters
            total += sign * g / (g - 1) * np.einsum("jg,jg->j", sums, sums)
        return total
