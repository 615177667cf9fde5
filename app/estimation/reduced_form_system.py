"""The reduced-form system: outcome and focal regressors regressed on all instruments.

Every weak-instrument statistic of a linear IV model with focal regressors X,
excluded instruments Z and included exogenous regressors W is a function of
the coefficients of the excluded instruments in the regressions of
``Y = [y, X]`` on ``[Z, W]``,

    pi_a = (Z~'Z~)^{-1} Z~'a,        a in {y, x_1, ..., x_p},

(``Z~ = M_W Z``) and of their joint covariance ``Cov(pi_a, pi_b)``. Both come
from the moment matrix and the claim's variance estimator: the covariance
blocks are ``E' B T' meat(u_a, u_b) T B E`` (all pairs from
:func:`app.estimation.projected_meats.projected_meats`) with the reduced-form residuals
``u_a``, the common bread ``B = ([Z, W]'[Z, W])^{-1}`` and ``E`` selecting the
excluded coefficients. Under the homoskedastic estimator the blocks are
``omega_ab (Z~'Z~)^{-1}`` with ``omega_ab = u_a'u_b / (n - L)``, the Kronecker
structure that the classical formulas (Anderson-Rubin, Cragg-Donald, Moreira)
assume; under the robust and cluster estimators they carry the same
small-sample factors as the claim's standard errors.

References
----------
Andrews, D. W. K., Moreira, M. J. and Stock, J. H. (2006). Optimal two-sided
invariant similar tests for instrumental variables regression. Econometrica
74(3), 715-752.
Kleibergen, F. (2005). Testing parameters in GMM without assuming that they
are identified. Econometrica 73(4), 1103-1123.
Chesher, A. and Jewitt, I. (1987). The bias of a heteroskedasticity consistent
covariance matrix estimator. Econometrica 55(5), 1217-1222.
MacKinnon, J. G. and White, H. (1985). Journal of Econometrics 29(3), 305-325.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import linalg

from app.estimation.covariance import VarianceEstimator
from app.estimation.first_stage import instrument_regression
from app.estimation.linalg import solve_pd
from app.estimation.moments import Moments
from app.estimation.projected_meats import projected_meats
from app.spec import CovarianceKind

EXACT_FIT = 1e-10
LEVERAGE_CHUNK_ROWS = 262_144
EXACT_FIRST_STAGE = (
    "the instruments predict the focal regressor exactly (its first-stage residuals are zero up to rounding), "
    "so strength statistics are infinite rather than estimates and covariances that involve the first stage are "
    "singular; the focal regressor is itself a combination of instruments and controls"
)


@dataclass(frozen=True)
class ReducedFormSystem:
    """Excluded-instrument coefficients of ``[y, X]`` on ``[Z, W]`` and their joint covariance.

    Attributes
    ----------
    coefficients
        ``q x (1 + p)``: column 0 is ``pi_y`` (outcome), columns 1.. are ``Pi_X``.
    covariance
        ``(1 + p) x (1 + p) x q x q``: block ``[a, b]`` is ``Cov(pi_a, pi_b)``
        with the claim's variance estimator and its small-sample factor.
    residuals
        ``width x (1 + p)``: the reduced-form residuals as vectors over the stacked array.
    instrument_gram
        ``Z~'Z~``, the cross-products of the excluded instruments after partialling out W.
    residual_cross
        ``U'U`` for the reduced-form residuals ``U = M_[Z,W] [y, X]``.
    n_params
        Parameters of each reduced-form regression, ``L = q + k + absorbed``.
    n_obs
        Number of rows.
    inference_df
        Denominator degrees of freedom of F tests (n - L, or G - 1 when clustered).
    kronecker
        True for the homoskedastic estimator, whose covariance is ``Omega (x) (Z~'Z~)^{-1}``.
    exact_first_stage
        True when the instruments predict a focal regressor exactly: its
        first-stage residual sum of squares is at most :data:`EXACT_FIT` of its
        variation left by W (the same share the design calls exact collinearity).
        Strength statistics are then infinite rather than estimates, and
        covariances involving the first stage are singular for that reason.
    """

    coefficients: np.ndarray
    covariance: np.ndarray
    residuals: np.ndarray
    instrument_gram: np.ndarray
    residual_cross: np.ndarray
    n_params: int
    n_obs: int
    inference_df: int
    kronecker: bool
    exact_first_stage: bool = False

    @property
    def n_instruments(self) -> int:
        return self.coefficients.shape[0]

    @property
    def n_endog(self) -> int:
        return self.coefficients.shape[1] - 1

    def combination_covariance(self, left: np.ndarray, right: np.ndarray | None = None) -> np.ndarray:
        """``Cov(Pi left, Pi right)`` for weight vectors over ``[y, X]`` (length 1 + p)."""
        right = left if right is None else right
        return np.einsum("a,b,abij->ij", left, right, self.covariance)

    def stacked_covariance(self, targets: list[int]) -> np.ndarray:
        """Covariance of ``vec([pi_a for a in targets])`` (coefficients stacked target by target)."""
        blocks = self.covariance[np.ix_(targets, targets)]
        q = self.n_instruments
        return blocks.transpose(0, 2, 1, 3).reshape(len(targets) * q, len(targets) * q)


def reduced_form_system(moments: Moments, variance: VarianceEstimator) -> ReducedFormSystem:
    """Fit the reduced form of the outcome and of every focal regressor, with joint covariance.

    The regressions are those of :func:`app.estimation.first_stage.instrument_regression`;
    the covariance blocks of every pair come from one call to :func:`projected_meats`.
    """
    layout = moments.layout
    q = layout.n_instr
    targets = [0, *layout.endog]
    fits = [instrument_regression(moments, dependent=t, code=f"reduced_form:{t}", terms=[]) for t in targets]
    to_excluded = fits[0].score_map @ fits[0].bread[:, :q]
    n_params = fits[0].n_params
    residuals = np.column_stack([fit.residual for fit in fits])
    covariance = projected_meats(variance, to_excluded, residuals, n_params=n_params)
    residual_cross = residuals.T @ moments.gram @ residuals
    given_exog = np.diag(partialled_cross(moments, layout.endog))
    return ReducedFormSystem(
        coefficients=np.column_stack([fit.params[:q] for fit in fits]),
        covariance=covariance,
        residuals=residuals,
        instrument_gram=partialled_instrument_gram(moments),
        residual_cross=(residual_cross + residual_cross.T) / 2,
        n_params=n_params,
        n_obs=moments.n_obs,
        inference_df=variance.inference_df(n_params),
        kronecker=variance.kind is CovarianceKind.HOMOSKEDASTIC,
        exact_first_stage=bool(np.any(np.diag(residual_cross)[1:] <= EXACT_FIT * given_exog)),
    )


def partialled_instrument_gram(moments: Moments) -> np.ndarray:
    """``Z~'Z~`` with ``Z~ = M_W Z``: the inverse of the excluded block of ``([Z, W]'[Z, W])^{-1}``."""
    return partialled_cross(moments, moments.layout.instr)


def partialled_cross(moments: Moments, columns: list[int]) -> np.ndarray:
    """Cross-products of the named columns of A after partialling out the exogenous regressors W."""
    gram = moments.gram
    block = gram[np.ix_(columns, columns)]
    exog = moments.layout.exog
    if exog:
        cross = gram[np.ix_(exog, columns)]
        block = block - cross.T @ solve_pd(gram[np.ix_(exog, exog)], cross)
    return (block + block.T) / 2


def partialled_vector(moments: Moments, column: int) -> np.ndarray:
    """``M_W a`` for column ``column`` of A, as a vector over A's columns."""
    layout = moments.layout
    vector = moments.column(column)
    if layout.exog:
        gram = moments.gram
        coefficients = solve_pd(gram[np.ix_(layout.exog, layout.exog)], gram[layout.exog, column])
        vector[layout.exog] -= coefficients
    return vector


def largest_instrument_leverage(moments: Moments, data: np.ndarray) -> tuple[float, int]:
    """``(h_max, row)``: the largest leverage ``h_i = z~_i'(Z~'Z~)^{-1} z~_i`` of the partialled instruments.

    One pass over the rows in chunks. A leverage near one means one row
    alone determines an instrument's coefficient and its own residual is
    fitted almost exactly, so heteroskedasticity- and cluster-robust
    variances of the reduced-form and first-stage coefficients are biased
    towards zero there (Chesher & Jewitt 1987; MacKinnon & White 1985).
    """
    layout = moments.layout
    root = linalg.cholesky(partialled_instrument_gram(moments), lower=False)
    whiten = linalg.solve_triangular(root, np.eye(layout.n_instr))
    to_whitened = np.column_stack([partialled_vector(moments, column) for column in layout.instr]) @ whiten
    best, where = 0.0, 0
    for start in range(0, data.shape[0], LEVERAGE_CHUNK_ROWS):
        scores = data[start : start + LEVERAGE_CHUNK_ROWS] @ to_whitened
        leverage = np.einsum("ij,ij->i", scores, scores)
        top = int(np.argmax(leverage))
        if leverage[top] > best:
            best, where = float(leverage[top]), start + top
    return best, where
