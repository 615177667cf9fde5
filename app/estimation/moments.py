"""The stacked moment matrix and linear regressions computed from it.

With ``A = [y, X, Z, W]`` (outcome, focal regressors, excluded instruments,
included exogenous regressors) and its cross-product ``G = A'A``, every
least-squares quantity of a linear IV model is a function of ``G``
(Davidson & MacKinnon 2004, ch. 8): coefficients, residual sums of squares,
projections on the instruments. Residuals are represented by coefficient
vectors ``c`` over the columns of ``A`` (``e = A c``), so that
``e1'e2 = c1' G c2`` needs no pass over the data.

Regressors are linear maps ``T`` of ``V = [X, Z, W]`` (the columns of ``A``
after ``y``): OLS uses the columns of ``[X, W]``, 2SLS the first-stage fitted
values ``[Z, W] Pi``, the control-function regression ``[X, W, X - [Z, W] Pi]``.
The score of observation i is ``T' V_i e_i``, which is what the variance
estimators in :mod:`app.estimation.covariance` sum.

References
----------
Davidson, R. and MacKinnon, J. G. (2004). Econometric Theory and Methods.
Oxford University Press.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from functools import cached_property

import numpy as np

from app.estimation.linalg import inverse_pd, whitening


@dataclass(frozen=True)
class Layout:
    """Column positions of ``[y, X, Z, W]`` with p focal, q instruments, k exogenous."""

    n_endog: int
    n_instr: int
    n_exog: int

    @property
    def width(self) -> int:
        return 1 + self.n_endog + self.n_instr + self.n_exog

    @property
    def endog(self) -> list[int]:
        return list(range(1, 1 + self.n_endog))

    @property
    def instr(self) -> list[int]:
        return list(range(1 + self.n_endog, 1 + self.n_endog + self.n_instr))

    @property
    def exog(self) -> list[int]:
        return list(range(1 + self.n_endog + self.n_instr, self.width))

    @property
    def regressors(self) -> list[int]:
        """Columns of the structural equation, ``R = [X, W]``."""
        return self.endog + self.exog

    @property
    def instruments(self) -> list[int]:
        """All instruments including the included exogenous regressors, ``[Z, W]``."""
        return self.instr + self.exog

    def selector(self, columns: list[int]) -> np.ndarray:
        """Map from V-space (columns 1.. of A) to the named columns of A: ``V @ S = A[:, columns]``."""
        selector = np.zeros((self.width - 1, len(columns)))
        for j, column in enumerate(columns):
            selector[column - 1, j] = 1.0
        return selector


@dataclass(frozen=True)
class Moments:
    """Cross-product matrix of the stacked array and the sample facts estimators need.

    Attributes
    ----------
    gram
        ``A'A`` for the weighted, fixed-effect-partialled array.
    n_obs
        Number of rows.
    absorbed_dof
        Degrees of freedom used by absorbed fixed effects; counted in every
        residual degrees-of-freedom figure.
    nested_dof
        The part of ``absorbed_dof`` that belongs to effects nested within the
        clusters; the cluster-robust small-sample factor leaves it out of k.
    """

    gram: np.ndarray
    n_obs: int
    layout: Layout
    absorbed_dof: int = 0
    nested_dof: int = 0

    def quad(self, left: np.ndarray, right: np.ndarray) -> float:
        """``(A left)'(A right)`` for residual or combination vectors over the columns of A."""
        return float(left @ self.gram @ right)

    @property
    def vv(self) -> np.ndarray:
        """Cross-products of the regressor space ``V = [X, Z, W]``."""
        return self.gram[1:, 1:]

    def regress(self, target: np.ndarray, score_map: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Least squares of ``A target`` on ``V score_map``; returns (coefficients, (T'V'VT)^-1)."""
        cross = score_map.T @ self.vv @ score_map
        bread = inverse_pd(cross)
        return bread @ (score_map.T @ self.gram[1:, :] @ target), bread

    def column(self, position: int) -> np.ndarray:
        """Vector over A selecting one column."""
        vector = np.zeros(self.layout.width)
        vector[position] = 1.0
        return vector

    def residual_vector(self, dependent: np.ndarray, score_map: np.ndarray, params: np.ndarray) -> np.ndarray:
        """Residual ``A dependent - V score_map params`` as a vector over A."""
        return dependent - np.concatenate([[0.0], score_map @ params])

    @cached_property
    def first_stage_map(self) -> np.ndarray:
        """``T`` with ``V T = P_[Z,W] [X, W]``: the first-stage fitted regressors."""
        layout = self.layout
        zz = self.gram[np.ix_(layout.instruments, layout.instruments)]
        zr = self.gram[np.ix_(layout.instruments, layout.regressors)]
        return layout.selector(layout.instruments) @ (inverse_pd(zz) @ zr)

    def projected_ss(self, vector: np.ndarray, columns: list[int]) -> float:
        """``e' P_C e`` for ``e = A vector`` and the projection on the named columns of A."""
        cross = self.gram[columns, :] @ vector
        return float(cross @ inverse_pd(self.gram[np.ix_(columns, columns)]) @ cross)

    def residual_ss(self, vector: np.ndarray, columns: list[int]) -> float:
        """``e' M_C e``: the sum of squares of ``A vector`` left after projecting on ``columns``."""
        total = self.quad(vector, vector)
        return total - self.projected_ss(vector, columns) if columns else total


def conditioned(moments: Moments) -> tuple[Moments, np.ndarray]:
    """The same model in a well-conditioned basis: ``(moments of A P, P)``.

    ``P`` partials the included exogenous regressors W out of the focal
    regressors and the excluded instruments (``X - W Pi_X``, ``Z - W Pi_Z``)
    and whitens W (``W U`` with ``U'W'WU = I``); the outcome is unchanged. The
    new columns span the same regressor space ``[X, W]`` and instrument space
    ``[Z, W]``, so every estimator that is invariant to a nonsingular change
    of basis (two-step GMM, Hansen's J, the C statistics) gives the same
    focal estimates and statistics, while ``P'GP`` has no near-collinearity
    between a control such as a calendar year and the intercept. In raw
    coordinates such a control makes ``[Z, W]'[Z, W]`` and the moment
    covariance ill-conditioned (condition number of order mean^2 / variance),
    and products of their inverses lose digits; here only the one rounding
    of ``P'GP`` (relative error of order machine epsilon times that
    condition number) remains, as for 2SLS.
    """
    layout = moments.layout
    basis = np.eye(layout.width)
    exog = layout.exog
    if exog:
        gram = moments.gram
        partialled = layout.endog + layout.instr
        basis[np.ix_(exog, partialled)] = -inverse_pd(gram[np.ix_(exog, exog)]) @ gram[np.ix_(exog, partialled)]
        basis[np.ix_(exog, exog)] = whitening(gram[np.ix_(exog, exog)])
    gram = basis.T @ moments.gram @ basis
    return dataclasses.replace(moments, gram=(gram + gram.T) / 2), basis
