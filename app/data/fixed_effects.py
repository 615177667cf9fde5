"""Absorb one or two sets of fixed effects by partialling them out.

One-way effects are removed exactly by subtracting (weighted) group means.
Two-way effects are removed by the method of alternating projections
(Guimaraes & Portugal 2010; Gaure 2013): subtract the means of the first set,
then of the second, until no column changes by more than
:data:`TWO_WAY_TOLERANCE` times its scale. By the Frisch-Waugh-Lovell theorem
the slope estimates and residuals equal those of the regression with the
indicator columns included.

Degrees of freedom absorbed: the number of levels for one set; for two sets
``G1 + G2 - C`` where ``C`` is the number of connected components of the
bipartite graph of levels (Abowd, Creecy & Kramarz 2002), since one level per
component is redundant.

Singleton groups (a level with one observation) are dropped first, repeatedly
for two sets: they are fitted perfectly, carry no information about the
slopes, and would overstate the degrees of freedom (Correia 2015).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import sparse
from scipy.sparse.csgraph import connected_components

from app.errors import DesignError

TWO_WAY_TOLERANCE = 1e-10
MAX_ITERATIONS = 10_000


@dataclass(frozen=True)
class AbsorbedEffects:
    """What absorbing the fixed effects did."""

    names: list[str]
    levels: list[int]
    dof: int
    components: int
    iterations: int
    tolerance: float
    nested_dof: int = 0

    def to_dict(self) -> dict[str, object]:
        return {
            "columns": list(self.names),
            "levels": list(self.levels),
            "dof": self.dof,
            "dof_nested_in_clusters": self.nested_dof,
            "connected_components": self.components,
            "iterations": self.iterations,
            "tolerance": self.tolerance,
        }


def drop_singletons(codes: list[np.ndarray]) -> tuple[np.ndarray, int]:
    """Return the mask of rows outside singleton groups, and how many were dropped."""
    keep = np.ones(codes[0].size, dtype=bool)
    while True:
        changed = False
        for column in codes:
            counts = np.bincount(column[keep])
            single = keep & (counts[np.minimum(column, counts.size - 1)] == 1)
            if single.any():
                keep &= ~single
                changed = True
        if not changed or len(codes) == 1:
            break
    return keep, int(keep.size - keep.sum())


def absorb(
    data: np.ndarray, codes: list[np.ndarray], *, names: list[str], weights: np.ndarray | None
) -> AbsorbedEffects:
    """Partial the fixed effects out of every column of ``data`` in place."""
    levels = [int(c.max()) + 1 for c in codes]
    w = np.ones(data.shape[0]) if weights is None else weights
    if len(codes) == 1:
        _subtract_group_means(data, codes[0], levels[0], w)
        return AbsorbedEffects(names=names, levels=levels, dof=levels[0], components=1, iterations=1, tolerance=0.0)
    components = _count_components(codes, levels)
    iterations = _alternate(data, codes, levels, w)
    return AbsorbedEffects(
        names=names,
        levels=levels,
        dof=levels[0] + levels[1] - components,
        components=components,
        iterations=iterations,
        tolerance=TWO_WAY_TOLERANCE,
    )


@dataclass(frozen=True)
class _GroupMeans:
    """Weighted group means as one sparse product: ``means = summer @ data / totals``."""

    codes: np.ndarray
    summer: sparse.csr_matrix
    totals: np.ndarray

    @classmethod
    def build(cls, codes: np.ndarray, n_levels: int, weights: np.ndarray) -> _GroupMeans:
        summer = sparse.csr_matrix((weights, (codes, np.arange(codes.size))), shape=(n_levels, codes.size))
        return cls(codes=codes, summer=summer, totals=np.bincount(codes, weights=weights, minlength=n_levels))

    def subtract(self, data: np.ndarray) -> np.ndarray:
        means = (self.summer @ data) / self.totals[:, None]
        data -= means[self.codes]
        return means


def _subtract_group_means(data: np.ndarray, codes: np.ndarray, n_levels: int, weights: np.ndarray) -> None:
    _GroupMeans.build(codes, n_levels, weights).subtract(data)


def _alternate(data: np.ndarray, codes: list[np.ndarray], levels: list[int], weights: np.ndarray) -> int:
    groups = [_GroupMeans.build(c, n, weights) for c, n in zip(codes, levels)]
    scale = np.maximum(np.abs(data).max(axis=0), np.finfo(float).tiny)
    for iteration in range(1, MAX_ITERATIONS + 1):
        largest = 0.0
        for group in groups:
            means = group.subtract(data)
            largest = max(largest, float((np.abs(means).max(axis=0) / scale).max()))
        if largest < TWO_WAY_TOLERANCE:
            return iteration
    raise DesignError(
        f"absorbing two sets of fixed effects did not converge to {TWO_WAY_TOLERANCE:g} within "
        f"{MAX_ITERATIONS:,} alternating projections"
    )


def _count_components(codes: list[np.ndarray], levels: list[int]) -> int:
    first, second = codes
    edges = sparse.coo_matrix(
        (np.ones(first.size), (first, second + levels[0])), shape=(sum(levels), sum(levels))
    )
    count, _ = connected_components(edges, directed=False)
    return int(count)


def dof_nested_in_clusters(effects: AbsorbedEffects, codes: list[np.ndarray], clusters: list[np.ndarray]) -> int:
    """Degrees of freedom of the absorbed effects whose every level lies within one cluster (one-way clustering).

    A nested set counts all its levels; with two sets of which one is nested
    the other keeps the redundant level of each connected component. Two-way
    clustering counts none: an effect nested in one clustering variable is not
    nested in the intersections.
    """
    if len(clusters) != 1:
        return 0
    nested = [nested_within(column, clusters[0]) for column in codes]
    if all(nested):
        return effects.dof
    return sum(levels for levels, inside in zip(effects.levels, nested) if inside)


def nested_within(inner: np.ndarray, outer: np.ndarray) -> bool:
    """True when every level of ``inner`` lies within a single level of ``outer``."""
    order = np.lexsort((outer, inner))
    inner_sorted, outer_sorted = inner[order], outer[order]
    same_inner = inner_sorted[1:] == inner_sorted[:-1]
    return bool(np.all(outer_sorted[1:][same_inner] == outer_sorted[:-1][same_inner]))
