"""Probit by Newton-Raphson, with a named reason when the maximum does not exist.

The log-likelihood of ``P(s = 1 | z) = Phi(z'g)`` is
``sum_i log Phi(q_i z_i'g)`` with ``q_i = 2 s_i - 1``. With the generalized
residual ``r_i = q_i phi(q_i t_i) / Phi(q_i t_i)`` at the index ``t_i = z_i'g``,
the score is ``sum_i r_i z_i`` and the Hessian
``-sum_i r_i (r_i + t_i) z_i z_i'`` (Greene 2003, sec. 21.3). Newton steps are
halved until the log-likelihood rises. The covariance is the inverse of the
negative Hessian at the maximum (as statsmodels reports it).

When some rows are predicted perfectly (complete or quasi-complete
separation) the likelihood has no finite maximum; a covariate that separates
the outcome on its own is named before fitting, and a fit that does not
converge is refused with the same kind of reason.

References
----------
Greene, W. H. (2003). Econometric Analysis, 5th ed., ch. 21. Prentice Hall.
Albert, A. and Anderson, J. A. (1984). On the existence of maximum likelihood
estimates in logistic regression models. Biometrika 71(1), 1-10.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import special

from app.errors import DesignError
from app.estimation.linalg import SingularMatrixError, inverse_pd

MAX_ITERATIONS = 100
TOLERANCE = 1e-10
CHUNK_ROWS = 262_144


@dataclass(frozen=True)
class ProbitFit:
    """Probit estimates at the maximum of the likelihood."""

    params: np.ndarray
    covariance: np.ndarray
    hessian: np.ndarray
    index: np.ndarray
    log_likelihood: float
    iterations: int

    def generalized_residual(self, outcome: np.ndarray) -> np.ndarray:
        """``q phi(q t) / Phi(q t)``: the score weight of each row (Gourieroux et al. 1987)."""
        sign = 2.0 * outcome - 1.0
        return sign * mills_ratio(sign * self.index)


def mills_ratio(index: np.ndarray) -> np.ndarray:
    """``phi(t) / Phi(t)``, computed on the log scale so that it stays finite far in the tails."""
    return np.exp(-0.5 * index * index - 0.5 * np.log(2 * np.pi) - special.log_ndtr(index))


def fit_probit(outcome: np.ndarray, regressors: np.ndarray, *, names: list[str], role: str) -> ProbitFit:
    """Maximum-likelihood probit of a 0/1 ``outcome`` on ``regressors`` (which include the intercept).

    Raises
    ------
    DesignError
        When a regressor separates the outcome, or the likelihood has no
        finite maximum (the message names ``role``, e.g. "the selection equation").
    """
    _refuse_single_variable_separation(outcome, regressors, names=names, role=role)
    sign = 2.0 * outcome - 1.0
    params = np.zeros(regressors.shape[1])
    log_likelihood = _log_likelihood(sign, regressors @ params)
    for iteration in range(1, MAX_ITERATIONS + 1):
        index = regressors @ params
        weight = sign * mills_ratio(sign * index)
        gradient = regressors.T @ weight
        hessian = -_weighted_cross(regressors, weight * (weight + index))
        try:
            step = inverse_pd(-hessian) @ gradient
        except SingularMatrixError:
            raise DesignError(
                f"{role} cannot be fitted: its covariates are collinear among the rows used, or some rows are "
                "predicted perfectly"
            ) from None
        new_params, new_ll = _halve_until_better(sign, regressors, params, step, log_likelihood)
        converged = np.max(np.abs(new_params - params)) <= TOLERANCE * (1.0 + np.max(np.abs(params)))
        params, log_likelihood = new_params, new_ll
        if converged:
            index = regressors @ params
            weight = sign * mills_ratio(sign * index)
            hessian = -_weighted_cross(regressors, weight * (weight + index))
            return ProbitFit(
                params=params,
                covariance=inverse_pd(-hessian),
                hessian=hessian,
                index=index,
                log_likelihood=log_likelihood,
                iterations=iteration,
            )
    certain = int(np.count_nonzero(sign * (regressors @ params) > 8.0))
    raise DesignError(
        f"{role} predicts the outcome perfectly for {certain:,} row(s) (perfect prediction): the probit "
        f"likelihood has no finite maximum after {MAX_ITERATIONS} Newton steps; remove or merge the covariate "
        "that separates them"
    )


def _halve_until_better(
    sign: np.ndarray, regressors: np.ndarray, params: np.ndarray, step: np.ndarray, current: float
) -> tuple[np.ndarray, float]:
    size = 1.0
    for _ in range(40):
        candidate = params + size * step
        value = _log_likelihood(sign, regressors @ candidate)
        if value >= current - 1e-12 * abs(current):
            return candidate, value
        size /= 2
    return params, current


def _log_likelihood(sign: np.ndarray, index: np.ndarray) -> float:
    return float(np.sum(special.log_ndtr(sign * index)))


def _weighted_cross(regressors: np.ndarray, weight: np.ndarray) -> np.ndarray:
    """``sum_i w_i z_i z_i'`` in row chunks (no n x k temporary for the whole sample)."""
    width = regressors.shape[1]
    total = np.zeros((width, width))
    for start in range(0, regressors.shape[0], CHUNK_ROWS):
        block = regressors[start : start + CHUNK_ROWS]
        total += block.T @ (block * weight[start : start + CHUNK_ROWS, None])
    return (total + total.T) / 2


def _refuse_single_variable_separation(outcome: np.ndarray, regressors: np.ndarray, *, names: list[str], role: str) -> None:
    """Name a covariate that on its own predicts the outcome perfectly for some of its values."""
    positive = outcome == 1
    for j, name in enumerate(names):
        column = regressors[:, j]
        low_ones, high_ones = column[positive].min(), column[positive].max()
        low_zeros, high_zeros = column[~positive].min(), column[~positive].max()
        if low_ones == high_ones == low_zeros == high_zeros:
            continue
        if high_zeros < low_ones or high_ones < low_zeros:
            raise DesignError(
                f"{role}: '{name}' separates the outcome completely (perfect prediction): every row on one side "
                "of a threshold has the same outcome, so the probit has no finite maximum"
            )
        low, high = min(low_ones, low_zeros), max(high_ones, high_zeros)
        if np.all((column == low) | (column == high)):
            for value in (low, high):
                rows = column == value
                if np.all(positive[rows]) or not np.any(positive[rows]):
                    outcome_value = 1 if np.all(positive[rows]) else 0
                    raise DesignError(
                        f"{role}: every row with '{name}' = {value:g} has outcome {outcome_value} (perfect "
                        "prediction), so the probit has no finite maximum; drop or merge that group"
                    )
