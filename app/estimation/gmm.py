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

References
----------
Hansen, L. P. (1982). Large sample properties of generalized method of
moments estimators. Econometrica 50(4), 1029-1054.
Hayashi, F. (2000). Econometrics, ch. 3. Princeton University Press.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from app.estimation.covariance import Homoskedastic, VarianceEstimator
from app.estimation.fits import LinearFit
from app.estimation.linalg import inverse_pd
from app.estimation.moments import Moments


@dataclass(frozen=True)
class GmmFit:
    """The two-step GMM fit and the weight it used."""

    fit: LinearFit
    weight: np.ndarray
    moment_covariance: np.ndarray


def two_step_gmm(
    moments: Moments, variance: VarianceEstimator, *, first_step: LinearFit, terms: list[str]
) -> GmmFit:
    """Efficient two-step GMM from the 2SLS first step."""
    layout = moments.layout
    gram = moments.gram
    instruments = layout.instruments
    regressors = layout.regressors
    in_v = [c - 1 for c in instruments]
    if isinstance(variance, Homoskedastic):
        sigma2 = moments.quad(first_step.residual, first_step.residual) / moments.n_obs
        moment_cov = sigma2 * gram[np.ix_(instruments, instruments)]
        # the scale of the weight must not enter the homoskedastic bread s^2 B
        weight = inverse_pd(gram[np.ix_(instruments, instruments)])
    else:
        moment_cov = variance.raw_meat(first_step.residual)[np.ix_(in_v, in_v)]
        weight = inverse_pd(moment_cov)
    cross_rz = gram[np.ix_(regressors, instruments)]
    bread = inverse_pd(cross_rz @ weight @ cross_rz.T)
    params = bread @ (cross_rz @ weight @ gram[instruments, 0])
    score_map = layout.selector(instruments) @ weight @ cross_rz.T
    residual = moments.residual_vector(moments.column(0), layout.selector(regressors), params)
    fit = LinearFit(
        code="gmm",
        terms=terms,
        params=params,
        bread=bread,
        score_map=score_map,
        residual=residual,
        n_params=len(regressors) + moments.absorbed_dof,
    )
    return GmmFit(fit=fit, weight=weight, moment_covariance=moment_cov)


def hansen_j(moments: Moments, gmm: GmmFit) -> float:
    """``g' S^{-1} g`` with ``g = Zf' e_GMM`` and S the first-step moment covariance."""
    instruments = moments.layout.instruments
    g = moments.gram[instruments, :] @ gmm.fit.residual
    return float(g @ inverse_pd(gmm.moment_covariance) @ g)
