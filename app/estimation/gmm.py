"""Efficient two-step GMM and Hansen's J statistic.

Step one is 2SLS. Step two weights the moment conditions ``Zf'e`` by the
inverse of their estimated covariance ``S`` at the 2SLS residuals (robust or
cluster sums, no small-sample factor):

    b = (R'Zf S^{-1} Zf'R)^{-1} R'Zf S^{-1} Zf'y        (Hansen 1982)

The coefficient covariance is the sandwich with the score covariance
re-estimated at the GMM residuals. Hansen's J is ``g' S^{-1} g`` with
``g = Zf' e_GMM``, chi-squared with ``L - K`` degrees of freedom.

With homoskedastic errors the efficient weight is ``(Zf'Zf)^{-1}`` and GMM
coincides with 2SLS.

Both are invariant to a nonsingular change of basis of the regressors
``R = [X, W]`` and of the instruments ``Zf = [Z, W]`` (Hayashi 2000, sec.
3.5), so they are computed in the basis of
:func:`app.estimation.moments.conditioned` (W partialled out of X and Z, W
whitened) and the coefficients mapped back: adding a constant to a control
such as a calendar year then leaves the focal estimates, their standard
errors and J unchanged to rounding, which products of inverses in raw
coordinates do not.

References
----------
Hansen, L. P. (1982). Large sample properties of generalized method of
moments estimators. Econometrica 50(4), 1029-1054.
Hayashi, F. (2000). Econometrics, ch. 3. Princeton University Press.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import linalg

from app.estimation.covariance import Homoskedastic, VarianceEstimator
from app.estimation.fits import LinearFit
from app.estimation.linalg import inverse_pd
from app.estimation.moments import Moments, conditioned


@dataclass(frozen=True)
class GmmFit:
    """The two-step GMM fit, and the conditioned moments and moment covariance J and C statistics reuse.

    Attributes
    ----------
    fit
        The GMM estimator in the claim's own coordinates.
    moments
        The moments in the conditioned basis (``A P``, same layout).
    moment_covariance
        ``S`` of the instruments ``[Z, W] P`` at the 2SLS residuals.
    """

    fit: LinearFit
    moments: Moments
    moment_covariance: np.ndarray


def two_step_gmm(
    moments: Moments, variance: VarianceEstimator, *, first_step: LinearFit, terms: list[str]
) -> GmmFit:
    """Efficient two-step GMM from the 2SLS first step, computed in the conditioned basis."""
    layout = moments.layout
    instruments, regressors = layout.instruments, layout.regressors
    basis_moments, basis = conditioned(moments)
    gram = basis_moments.gram
    if isinstance(variance, Homoskedastic):
        sigma2 = moments.quad(first_step.residual, first_step.residual) / moments.n_obs
        moment_cov = sigma2 * gram[np.ix_(instruments, instruments)]
        # the scale of the weight must not enter the homoskedastic bread s^2 B
        weight = inverse_pd(gram[np.ix_(instruments, instruments)])
    else:
        to_instruments = basis[1:, instruments]
        moment_cov = to_instruments.T @ variance.raw_meat(first_step.residual) @ to_instruments
        moment_cov = (moment_cov + moment_cov.T) / 2
        weight = inverse_pd(moment_cov)
    params, bread = _weighted_fit(gram, regressors, instruments, weight)
    score_map = layout.selector(instruments) @ weight @ gram[np.ix_(regressors, instruments)].T
    # back to the claim's coordinates: b = K b~, B = K B~ K', T = P_V T~ K^{-1}
    to_regressors = basis[np.ix_(regressors, regressors)]
    params = to_regressors @ params
    fit = LinearFit(
        code="gmm",
        terms=terms,
        params=params,
        bread=to_regressors @ bread @ to_regressors.T,
        score_map=linalg.solve(to_regressors.T, (basis[1:, 1:] @ score_map).T).T,
        residual=moments.residual_vector(moments.column(0), layout.selector(regressors), params),
        n_params=len(regressors) + moments.absorbed_dof,
    )
    return GmmFit(fit=fit, moments=basis_moments, moment_covariance=moment_cov)


def hansen_j(gmm: GmmFit) -> float:
    """``g' S^{-1} g`` with ``g = Zf' e_GMM`` and S the first-step moment covariance."""
    return j_statistic(gmm.moments, gmm.moments.layout.instruments, gmm.moment_covariance)


def j_statistic(moments: Moments, instruments: list[int], covariance: np.ndarray) -> float:
    """``g' S^{-1} g`` at the efficient GMM estimate that uses ``instruments`` (columns of A) with weight ``S^{-1}``."""
    weight = inverse_pd(covariance)
    params, _ = _weighted_fit(moments.gram, moments.layout.regressors, instruments, weight)
    residual = moments.residual_vector(moments.column(0), moments.layout.selector(moments.layout.regressors), params)
    moment = moments.gram[instruments, :] @ residual
    return float(moment @ weight @ moment)


def _weighted_fit(
    gram: np.ndarray, regressors: list[int], instruments: list[int], weight: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """``(b, B)`` with ``B = (R'Zf W Zf'R)^{-1}`` and ``b = B R'Zf W Zf'y``."""
    cross = gram[np.ix_(regressors, instruments)]
    bread = inverse_pd(cross @ weight @ cross.T)
    return bread @ (cross @ weight @ gram[instruments, 0]), bread
