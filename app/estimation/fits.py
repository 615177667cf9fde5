"""A fitted linear estimator in the form the variance estimators need."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


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
