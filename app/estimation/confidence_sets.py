"""Confidence sets obtained by inverting a test: unions of intervals, their shape and its meaning.

A test of ``beta = b`` that stays valid with weak instruments does not give
``estimate +/- critical value x standard error``; its confidence set is every
``b`` the test does not reject, which can be a bounded interval, the union of
two rays, the whole line, or empty (Dufour 1997). Two ways of finding it are
here:

* :func:`quadratic_set` solves ``a2 b^2 + a1 b + a0 <= 0`` in closed form, for
  the Anderson-Rubin set with homoskedastic errors or one instrument;
* :func:`grid_inversion` evaluates an acceptance margin on a grid that covers
  the whole real line (uniform in ``arctan((b - center) / scale)``, plus points
  out to ``10^12`` scales) and refines every sign change with Brent's method.
  Boundaries are accurate to about ``1e-10`` relative; a piece of the set
  narrower than the grid spacing near it could be missed, and a set is called
  unbounded when it still accepts ``10^12`` scales away from the center.

References
----------
Dufour, J.-M. (1997). Some impossibility theorems in econometrics with
applications to structural and dynamic models. Econometrica 65(6), 1365-1387.
Mikusheva, A. (2010). Robust confidence sets in the presence of weak
instruments. Journal of Econometrics 157(2), 236-247.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import optimize

GRID_POINTS = 4001
FAR_SCALES = 10.0 ** np.arange(4, 13)
GRID_PRECISION = (
    f"grid of {GRID_POINTS} points uniform in arctan((b - center)/scale) plus points out to 1e12 scales, "
    "boundaries refined by Brent's method to about 1e-10 relative"
)

SHAPE_MEANINGS = {
    "bounded interval": "The data pin the effect down to this range.",
    "union of two rays": (
        "The data rule out the values between the two rays but not effects of any size beyond them, "
        "in either direction: the instruments identify the effect only weakly."
    ),
    "whole line": "No value of the effect can be ruled out: the instruments carry too little information about it.",
    "empty": (
        "Every value of the effect is rejected: the instruments disagree with each other or with the model, "
        "which questions their validity rather than pinning down an effect."
    ),
    "one ray": "The effect is bounded on one side only: the data rule out values beyond one end but not the other.",
    "several pieces": (
        "The set falls apart into several pieces: the data are compatible with separated ranges of the effect, "
        "typical of weak identification."
    ),
}


@dataclass(frozen=True)
class ConfidenceSet:
    """A union of disjoint closed intervals, with -inf/inf for unbounded ends.

    Attributes
    ----------
    intervals
        Sorted, disjoint ``(low, high)`` pairs.
    level
        Confidence level, e.g. 0.95.
    method
        How the set was found, in words (closed form, eigenvalue problem, grid).
    """

    intervals: list[tuple[float, float]]
    level: float
    method: str

    @property
    def shape(self) -> str:
        """The set's shape in words (a key of :data:`SHAPE_MEANINGS`)."""
        pieces = self.intervals
        if not pieces:
            return "empty"
        if len(pieces) == 1:
            low, high = pieces[0]
            if math.isinf(low) and math.isinf(high):
                return "whole line"
            if math.isinf(low) or math.isinf(high):
                return "one ray"
            return "bounded interval"
        if len(pieces) == 2 and math.isinf(pieces[0][0]) and math.isinf(pieces[1][1]):
            return "union of two rays"
        return "several pieces"

    def contains(self, value: float) -> bool:
        return any(low <= value <= high for low, high in self.intervals)

    def to_details(self) -> dict[str, Any]:
        """The JSON fields shared by every weak-instrument-robust test."""
        return {
            "confidence_level": self.level,
            "confidence_set": [[low, high] for low, high in self.intervals],
            "shape": self.shape,
            "shape_meaning": SHAPE_MEANINGS[self.shape],
            "inversion": self.method,
        }


def quadratic_set(a2: float, a1: float, a0: float, *, level: float, method: str) -> ConfidenceSet:
    """``{b : a2 b^2 + a1 b + a0 <= 0}`` in closed form.

    Notes
    -----
    With ``a2 > 0`` the set is a bounded interval (empty when the discriminant
    is negative); with ``a2 < 0`` it is the union of two rays (the whole line
    when the discriminant is not positive); with ``a2 = 0`` it is a ray or
    the whole line. Roots use the cancellation-free form
    ``t = -(a1 + sign(a1) sqrt(D)) / 2``, roots ``t / a2`` and ``a0 / t``.
    """
    if a2 == 0.0:
        if a1 == 0.0:
            return ConfidenceSet([(-math.inf, math.inf)] if a0 <= 0 else [], level, method)
        root = -a0 / a1
        return ConfidenceSet([(-math.inf, root)] if a1 > 0 else [(root, math.inf)], level, method)
    discriminant = a1 * a1 - 4.0 * a2 * a0
    if discriminant <= 0.0:
        return ConfidenceSet([] if a2 > 0 else [(-math.inf, math.inf)], level, method)
    t = -(a1 + math.copysign(math.sqrt(discriminant), a1)) / 2.0
    roots = sorted([t / a2, a0 / t]) if t != 0.0 else [0.0, 0.0]
    if a2 > 0:
        return ConfidenceSet([(roots[0], roots[1])], level, method)
    return ConfidenceSet([(-math.inf, roots[0]), (roots[1], math.inf)], level, method)


def inversion_grid(*, center: float, scale: float) -> np.ndarray:
    """Points covering the real line: dense near ``center``, sparse out to ``1e12 * scale``."""
    angles = -np.pi / 2 + (np.arange(GRID_POINTS) + 0.5) * np.pi / GRID_POINTS
    points = center + scale * np.tan(angles)
    far = np.concatenate([center - scale * FAR_SCALES, center + scale * FAR_SCALES])
    return np.unique(np.concatenate([points, far]))


def grid_inversion(
    margin: Callable[[np.ndarray], np.ndarray],
    *,
    center: float,
    scale: float,
    level: float,
    extra_points: tuple[float, ...] = (),
) -> ConfidenceSet:
    """Invert a test whose acceptance margin (>= 0 means not rejected) is vectorised in b.

    Parameters
    ----------
    margin
        ``margin(b)`` for an array of values ``b``; the set is ``{b : margin(b) >= 0}``.
    center, scale
        Where to put the dense part of the grid and how wide it is (e.g. the
        estimate and its standard error).
    extra_points
        Values to add to the grid (e.g. the point where the statistic is smallest).
    """
    scale = scale if np.isfinite(scale) and scale > 0 else max(1.0, abs(center))
    grid = np.unique(np.concatenate([inversion_grid(center=center, scale=scale), np.asarray(extra_points, dtype=float)]))
    grid = grid[np.isfinite(grid)]
    values = margin(grid)
    accepted = values >= 0
    boundaries: list[float] = []
    for i in np.flatnonzero(accepted[1:] != accepted[:-1]):
        boundaries.append(_refine(margin, grid[i], grid[i + 1]))
    intervals: list[tuple[float, float]] = []
    low = -math.inf if accepted[0] else None
    crossing = iter(boundaries)
    for i in range(len(grid) - 1):
        if accepted[i] == accepted[i + 1]:
            continue
        point = next(crossing)
        if accepted[i]:
            intervals.append((low, point))
            low = None
        else:
            low = point
    if low is not None:
        intervals.append((low, math.inf))
    return ConfidenceSet(intervals, level, GRID_PRECISION)


def _refine(margin: Callable[[np.ndarray], np.ndarray], left: float, right: float) -> float:
    def scalar(b: float) -> float:
        return float(margin(np.array([b]))[0])

    tolerance = 1e-12 * max(1.0, abs(left), abs(right))
    return float(optimize.brentq(scalar, left, right, xtol=tolerance, rtol=1e-12))
