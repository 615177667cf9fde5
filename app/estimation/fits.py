"""A fitted linear estimator in the form the variance estimators need."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from app.errors import DesignError


@dataclass(frozen=True)
class LinearFit:
    """Coefficients of a linear estimator and the pieces of its sandwich variance.

    Attributes
    ----------
    code
        Estimator code (``ols``, ``2sls``, ``liml``, ...).
    terms
        Coefficient names.
    params
        Coefficient estimates.
    bread
        Inverse of the estimator's Hessian on the sum scale (e.g.
        ``[R'(I - kappa M_Z)R]^{-1}`` for a k-class estimator).
    score_map
        ``T`` such that observation i's score is ``T' V_i e_i``.
    residual
        The residual as a vector over the stacked array's columns.
    n_params
        Coefficients plus absorbed fixed effects, for degrees of freedom.
    kappa
        The k-class parameter, when the estimator is one.
    """

    code: str
    terms: list[str]
    params: np.ndarray
    bread: np.ndarray
    score_map: np.ndarray
    residual: np.ndarray
    n_params: int
    kappa: float | None = None


EXACT_FIT_TOLERANCE = 1e-10
"""Share of the outcome's sum of squares about its mean below which a least-squares fit counts as exact."""


def refuse_exact_fit(data: np.ndarray, fit: LinearFit, *, outcome: str, model: str) -> None:
    """Raise a DesignError when ``fit`` (least squares on ``data = [y, ...]``) reproduces the outcome exactly.

    With zero residuals the residual variance, every standard error and every
    test is 0/0, and rounding leaves residual sums of squares of either sign.
    The residual ``e = A c`` is computed from the rows, not from the
    cross-product, because ``c' A'A c`` loses the digits that tell an exact
    fit from a close one. The fit counts as exact when ``e'e`` is at most
    :data:`EXACT_FIT_TOLERANCE` times the outcome's sum of squares about its
    mean (an R-squared within 1e-10 of one).
    """
    residual = data @ fit.residual
    outcome_values = data[:, 0]
    spread = float(np.sum((outcome_values - outcome_values.mean()) ** 2))
    if float(residual @ residual) > EXACT_FIT_TOLERANCE * spread:
        return
    regressors = ", ".join(term for term in fit.terms) or "no regressor"
    raise DesignError(
        f"'{outcome}' is an exact linear function of {regressors} in the {model}: the fit leaves "
        "no residual, so no standard error or test can be computed. Check for a control that copies or is "
        "computed from the outcome, or for too few rows"
    )
