"""Variance estimators, kept in a registry keyed by the claim's ``covariance`` name.

Every estimator supplies the "meat" of the sandwich for any two residual
vectors over the stacked array: ``sum_g (V_g' e_g,left)(V_g' e_g,right)'``
with ``g`` an observation (robust) or a cluster, ``V = [X, Z, W]``. The
covariance of a linear estimator with bread ``B`` and score map ``T`` is
``B T' meat T B``. Because the meat is bilinear in the residual vectors,
tests that need the variance of many linear combinations (e.g. the
Anderson-Rubin residual ``y - X b0`` for every ``b0``) reuse a few meats.

Small-sample conventions (they equal linearmodels' ``debiased=True``):
homoskedastic ``s^2 = e'e/(n-k)``; robust HC1, ``n/(n-k)`` (MacKinnon & White
1985); cluster ``G/(G-1) (n-1)/(n-k)`` per clustering dimension, and two-way
``V_1 + V_2 - V_12`` (Cameron, Gelbach & Miller 2011). ``k`` counts the
coefficients plus the absorbed fixed effects, except in the cluster factor,
which leaves out effects nested within the clusters: the cluster-robust
variance is consistent as the number of clusters grows however many such
effects there are, and counting them would make the factor grow with their
number (Cameron & Miller 2015, sec. III.B). Coefficient tests use Student's
t with ``n-k`` degrees of freedom, or ``G-1`` when clustered (Cameron & Miller
2015, with ``G`` the smaller number of clusters in two-way clustering).

References
----------
MacKinnon, J. G. and White, H. (1985). Some heteroskedasticity-consistent
covariance matrix estimators with improved finite sample properties.
Journal of Econometrics 29(3), 305-325.
Cameron, A. C., Gelbach, J. B. and Miller, D. L. (2011). Robust inference with
multiway clustering. Journal of Business & Economic Statistics 29(2), 238-249.
Cameron, A. C. and Miller, D. L. (2015). A practitioner's guide to
cluster-robust inference. Journal of Human Resources 50(2), 317-372.
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from typing import ClassVar

import numpy as np
import pandas as pd
from scipy import sparse

from app.estimation.fits import LinearFit
from app.estimation.moments import Moments
from app.spec import CovarianceKind

CHUNK_ROWS = 65_536


class VarianceEstimator(ABC):
    """Meats and coefficient covariances for one kind of error structure."""

    kind: ClassVar[CovarianceKind]
    description: ClassVar[str]

    def __init__(self, moments: Moments, data: np.ndarray) -> None:
        self.moments = moments
        self.data = data
        self._cache: dict[tuple[bytes, bytes], np.ndarray] = {}

    @property
    @abstractmethod
    def small_sample(self) -> str:
        """The small-sample factor in words, for the report."""

    @abstractmethod
    def factor(self, n_params: int) -> float:
        """Small-sample factor applied to the raw meat."""

    @abstractmethod
    def _raw_meat(self, left: np.ndarray, right: np.ndarray) -> np.ndarray:
        """Unscaled meat over V for residuals ``A left`` and ``A right``."""

    def inference_df(self, n_params: int) -> int:
        """Degrees of freedom of the t (and F denominator) used with this estimator."""
        return self.moments.n_obs - n_params

    def raw_meat(self, left: np.ndarray, right: np.ndarray | None = None) -> np.ndarray:
        """Unscaled meat (no small-sample factor), cached per pair of residual vectors."""
        right = left if right is None else right
        key = (left.tobytes(), right.tobytes())
        if key not in self._cache:
            self._cache[key] = self._raw_meat(left, right)
        return self._cache[key]

    def meat(self, left: np.ndarray, right: np.ndarray | None = None, *, n_params: int) -> np.ndarray:
        """Meat with the small-sample factor for a model with ``n_params`` parameters."""
        return self.factor(n_params) * self.raw_meat(left, right)

    def covariance(self, fit: LinearFit) -> np.ndarray:
        """Covariance of a linear estimator's coefficients: ``B T' meat T B``."""
        meat = self.meat(fit.residual, n_params=fit.n_params)
        middle = fit.score_map.T @ meat @ fit.score_map
        cov = fit.bread @ middle @ fit.bread
        return (cov + cov.T) / 2

    def summary(self) -> dict[str, object]:
        """What the report prints about the variance estimator."""
        return {"kind": self.kind.value, "description": self.description, "small_sample": self.small_sample}


class Homoskedastic(VarianceEstimator):
    """Classical variance: errors with one common variance, independent across rows."""

    kind = CovarianceKind.HOMOSKEDASTIC
    description = "Classical standard errors: every error is assumed to have the same variance and to be independent."

    @property
    def small_sample(self) -> str:
        return "s^2 = e'e/(n-k)"

    def factor(self, n_params: int) -> float:
        return self.moments.n_obs / (self.moments.n_obs - n_params)

    def _raw_meat(self, left: np.ndarray, right: np.ndarray) -> np.ndarray:
        return self.moments.quad(left, right) / self.moments.n_obs * self.moments.vv

    def covariance(self, fit: LinearFit) -> np.ndarray:
        """``s^2 B``; for a k-class estimator ``B = [R'(I - kappa M_Z) R]^{-1}``."""
        sigma2 = self.moments.quad(fit.residual, fit.residual) / (self.moments.n_obs - fit.n_params)
        return sigma2 * fit.bread


class HeteroskedasticityRobust(VarianceEstimator):
    """White's heteroskedasticity-consistent variance with the HC1 factor."""

    kind = CovarianceKind.ROBUST
    description = (
        "Heteroskedasticity-robust (HC1) standard errors: errors may have different variances "
        "but are independent across rows."
    )

    @property
    def small_sample(self) -> str:
        return "n/(n-k) (HC1)"

    def factor(self, n_params: int) -> float:
        return self.moments.n_obs / (self.moments.n_obs - n_params)

    def _raw_meat(self, left: np.ndarray, right: np.ndarray) -> np.ndarray:
        d = self.data.shape[1] - 1
        meat = np.zeros((d, d))
        for start in range(0, self.data.shape[0], CHUNK_ROWS):
            block = self.data[start : start + CHUNK_ROWS]
            weight = (block @ left) * (block @ right)
            regressors = block[:, 1:]
            meat += regressors.T @ (regressors * weight[:, None])
        return (meat + meat.T) / 2


class ClusterSums:
    """Per-cluster score sums ``S_g(c) = V_g' A_g c`` for one clustering variable.

    When clusters are few relative to rows (``G * width <= n``) the per-cluster
    cross-product matrices ``A_g'A_g`` are computed once and every score sum is
    a small matrix product; otherwise each residual vector costs one pass,
    summing runs of equal codes over rows taken in cluster order with a
    sparse 0/1 matrix per chunk, built once (the design sorts rows by the
    first clustering variable; other orders are sorted once here).
    """

    def __init__(self, data: np.ndarray, codes: np.ndarray) -> None:
        self.data = data
        self.codes = codes
        self.n_clusters = int(codes.max()) + 1
        self._order: np.ndarray | None = None
        if not np.all(codes[1:] >= codes[:-1]):
            self._order = np.argsort(codes, kind="stable")
        self._sorted_codes = codes if self._order is None else codes[self._order]
        self._grams: np.ndarray | None = None
        self._scores: dict[bytes, np.ndarray] = {}
        self._chunk_summers: list[tuple[int, sparse.csr_matrix]] | None = None
        if self.n_clusters * data.shape[1] <= data.shape[0]:
            self._grams = self._cluster_grams()

    def _cluster_grams(self) -> np.ndarray:
        width = self.data.shape[1]
        grams = np.empty((self.n_clusters, width, width))
        bounds = np.searchsorted(self._sorted_codes, np.arange(self.n_clusters + 1))
        for g in range(self.n_clusters):
            block = self._rows(bounds[g], bounds[g + 1])
            grams[g] = block.T @ block
        return grams

    def _rows(self, start: int, stop: int) -> np.ndarray:
        """Rows ``start:stop`` in cluster order."""
        if self._order is None:
            return self.data[start:stop]
        return self.data[self._order[start:stop]]

    def cross_products(self) -> np.ndarray:
        """Per-cluster cross-products ``A_g'A_g`` (``G x width x width``), computed once."""
        if self._grams is None:
            self._grams = self._cluster_grams()
        return self._grams

    def scores(self, vector: np.ndarray) -> np.ndarray:
        """``G x d`` matrix of cluster score sums for the residual ``A vector``."""
        if self._grams is not None:
            return self._grams[:, 1:, :] @ vector
        key = vector.tobytes()
        if key not in self._scores:
            self._scores[key] = self._pass_scores(vector)
        return self._scores[key]

    def _pass_scores(self, vector: np.ndarray) -> np.ndarray:
        sums = np.zeros((self.n_clusters, self.data.shape[1] - 1))
        for start, (first, summer) in zip(range(0, self.data.shape[0], CHUNK_ROWS), self._summers()):
            block = self._rows(start, start + CHUNK_ROWS)
            # a cluster cut by the chunk boundary is added to in both chunks
            weighted = np.multiply(block[:, 1:], (block @ vector)[:, None], order="C")
            sums[first : first + summer.shape[0]] += summer @ weighted
        return sums

    def _summers(self) -> list[tuple[int, sparse.csr_matrix]]:
        """Per chunk of rows in cluster order: its first cluster and the 0/1 matrix summing its runs of equal codes.

        Codes are consecutive integers, so a chunk's clusters are a contiguous range.
        """
        if self._chunk_summers is None:
            self._chunk_summers = []
            for start in range(0, self.data.shape[0], CHUNK_ROWS):
                codes = self._sorted_codes[start : start + CHUNK_ROWS]
                runs = np.flatnonzero(np.concatenate([[True], codes[1:] != codes[:-1]]))
                summer = sparse.csr_matrix(
                    (np.ones(codes.size), np.arange(codes.size), np.append(runs, codes.size)),
                    shape=(runs.size, codes.size),
                )
                self._chunk_summers.append((int(codes[0]), summer))
        return self._chunk_summers

    def meat(self, left: np.ndarray, right: np.ndarray) -> np.ndarray:
        """``sum_g S_g(left) S_g(right)'``; symmetric only when the two residuals are the same."""
        scores_left = self.scores(left)
        if right is left or np.array_equal(right, left):
            meat = scores_left.T @ scores_left
            return (meat + meat.T) / 2
        return scores_left.T @ self.scores(right)


class ClusterRobust(VarianceEstimator):
    """Cluster-robust variance for one or two clustering variables."""

    kind = CovarianceKind.CLUSTER
    description = (
        "Cluster-robust standard errors: errors may be correlated within clusters and have any "
        "variance, but are independent across clusters."
    )

    def __init__(self, moments: Moments, data: np.ndarray, clusters: list[np.ndarray]) -> None:
        super().__init__(moments, data)
        dimensions = [ClusterSums(data, codes) for codes in clusters]
        self.signs = [1.0] * len(dimensions)
        if len(clusters) == 2:
            pairs, _ = pd.factorize(pd.MultiIndex.from_arrays(clusters))
            dimensions.append(ClusterSums(data, pairs.astype(np.int64)))
            self.signs.append(-1.0)
        self.dimensions = dimensions

    @property
    def n_clusters(self) -> list[int]:
        return [d.n_clusters for d in self.dimensions[:2]]

    @property
    def small_sample(self) -> str:
        if len(self.dimensions) == 1:
            text = "G/(G-1) * (n-1)/(n-k)"
        else:
            text = "G_d/(G_d-1) * (n-1)/(n-k) for each of the three terms V_1 + V_2 - V_12"
        nested = self.moments.nested_dof
        if nested:
            text += (
                f"; k leaves out the {nested:,} absorbed fixed effects nested within the clusters "
                "(Cameron & Miller 2015, sec. III.B)"
            )
        return text

    def factor(self, n_params: int) -> float:
        """The common factor ``(n-1)/(n-k)``, k without nested effects; ``G/(G-1)`` is applied in :meth:`meat`."""
        n = self.moments.n_obs
        return (n - 1) / (n - n_params + self.moments.nested_dof)

    def inference_df(self, n_params: int) -> int:
        return min(self.n_clusters) - 1

    def _raw_meat(self, left: np.ndarray, right: np.ndarray) -> np.ndarray:
        """``S_1 + S_2 - S_12`` (or ``S_1`` one-way) without any small-sample factor."""
        total = np.zeros((self.data.shape[1] - 1,) * 2)
        for sign, dimension in zip(self.signs, self.dimensions):
            total += sign * dimension.meat(left, right)
        return total

    def meat(self, left: np.ndarray, right: np.ndarray | None = None, *, n_params: int) -> np.ndarray:
        right = left if right is None else right
        total = np.zeros((self.data.shape[1] - 1,) * 2)
        for sign, dimension in zip(self.signs, self.dimensions):
            g = dimension.n_clusters
            total += sign * g / (g - 1) * dimension.meat(left, right)
        return self.factor(n_params) * total

    def summary(self) -> dict[str, object]:
        summary = super().summary()
        summary["n_clusters"] = self.n_clusters
        return summary


VARIANCE_ESTIMATORS: dict[CovarianceKind, type[VarianceEstimator]] = {
    CovarianceKind.HOMOSKEDASTIC: Homoskedastic,
    CovarianceKind.ROBUST: HeteroskedasticityRobust,
    CovarianceKind.CLUSTER: ClusterRobust,
}


def variance_estimator(
    kind: CovarianceKind, moments: Moments, data: np.ndarray, clusters: list[np.ndarray]
) -> VarianceEstimator:
    """Build the registered variance estimator for ``kind``."""
    estimator_class = VARIANCE_ESTIMATORS[kind]
    if estimator_class is ClusterRobust:
        return ClusterRobust(moments, data, clusters)
    return estimator_class(moments, data)
