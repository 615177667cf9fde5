"""OLS, 2SLS, LIML and Fuller as members of the k-class, computed from the moment matrix.

The k-class estimator (Theil 1958) of ``y = R b + u`` with instruments
``Zf = [Z, W]`` is

    b(kappa) = [R'(I - kappa M_Z) R]^{-1} R'(I - kappa M_Z) y,

with ``M_Z = I - P_Z``. kappa = 0 gives OLS, kappa = 1 gives 2SLS. LIML sets
kappa to the smallest root lambda of ``det(Y'M_W Y - lambda Y'M_Z Y) = 0`` with
``Y = [y, X]`` (Anderson & Rubin 1949; Davidson & MacKinnon 2004, sec. 8.5).
Fuller's (1977) modification uses ``kappa = lambda - alpha / (n - L)``, with L
the number of instruments including the exogenous regressors (and, here, the
absorbed fixed effects); alpha = 1 is nearly unbiased, alpha = 4 minimises the
mean squared error.

For the robust and cluster variances the score regressors of every IV
member are the first-stage fitted values ``P_Z R`` (as in linearmodels); the
bread carries kappa.

References
----------
Theil, H. (1958). Economic Forecasts and Policy. North-Holland.
Anderson, T. W. and Rubin, H. (1949). Estimation of the parameters of a single
equation in a complete system of stochastic equations. Annals of Mathematical
Statistics 20(1), 46-63.
Fuller, W. A. (1977). Some properties of a modification of the limited
information estimator. Econometrica 45(4), 939-953.
"""

from __future__ import annotations

import numpy as np
from scipy import linalg

from app.estimation.fits import LinearFit
from app.estimation.linalg import SingularMatrixError, inverse_pd
from app.estimation.moments import Moments, conditioned


def kclass(moments: Moments, *, kappa: float, code: str, terms: list[str]) -> LinearFit:
    """Fit the k-class estimator with the given kappa.

    The normal equations are solved in the conditioned basis of
    :func:`app.estimation.moments.conditioned` (the k-class is invariant to a
    change of basis of ``[X, W]`` and ``[Z, W]``) and mapped back, so that a
    control far from zero, such as a calendar year, costs no accuracy in the
    coefficients or the residual.
    """
    layout = moments.layout
    regressors = layout.regressors
    basis_moments, basis = conditioned(moments)
    gram = basis_moments.gram
    select_r = layout.selector(regressors)
    if kappa == 0.0:
        score_map = select_r
        hessian = gram[np.ix_(regressors, regressors)]
        cross_y = gram[regressors, 0]
    else:
        fitted = basis_moments.first_stage_map
        projected = fitted.T @ basis_moments.vv @ fitted
        projected_y = fitted.T @ gram[1:, 0]
        hessian = (1.0 - kappa) * gram[np.ix_(regressors, regressors)] + kappa * projected
        cross_y = (1.0 - kappa) * gram[regressors, 0] + kappa * projected_y
        score_map = fitted
    bread = inverse_pd(hessian)
    # back to the claim's coordinates: b = K b~, B = K B~ K', T = P_V T~ K^{-1}
    to_regressors = basis[np.ix_(regressors, regressors)]
    params = to_regressors @ (bread @ cross_y)
    return LinearFit(
        code=code,
        terms=terms,
        params=params,
        bread=to_regressors @ bread @ to_regressors.T,
        score_map=linalg.solve(to_regressors.T, (basis[1:, 1:] @ score_map).T).T,
        residual=moments.residual_vector(moments.column(0), select_r, params),
        n_params=len(regressors) + moments.absorbed_dof,
        kappa=kappa,
    )


def liml_kappa(moments: Moments) -> float:
    """Smallest root of ``det(Y'M_W Y - lambda Y'M_Z Y) = 0`` with ``Y = [y, X]``."""
    layout = moments.layout
    outcome_and_endog = [0, *layout.endog]
    given_exog = _residual_cross(moments, outcome_and_endog, layout.exog)
    given_instruments = _residual_cross(moments, outcome_and_endog, layout.instruments)
    try:
        roots = linalg.eigh(given_exog, given_instruments, eigvals_only=True)
    except linalg.LinAlgError:
        raise SingularMatrixError(
            "the outcome and focal regressors are linearly dependent after projecting out the "
            "instruments (a focal regressor equals another plus a combination of instruments)"
        ) from None
    return float(roots.min())


def fuller_kappa(moments: Moments, *, liml: float, alpha: float) -> float:
    """``lambda - alpha / (n - L)`` (Fuller 1977), L counting instruments and absorbed effects."""
    n_instruments = len(moments.layout.instruments) + moments.absorbed_dof
    return liml - alpha / (moments.n_obs - n_instruments)


def _residual_cross(moments: Moments, columns: list[int], partial_out: list[int]) -> np.ndarray:
    gram = moments.gram
    block = gram[np.ix_(columns, columns)]
    if not partial_out:
        return block
    cross = gram[np.ix_(partial_out, columns)]
    return block - cross.T @ inverse_pd(gram[np.ix_(partial_out, partial_out)]) @ cross
