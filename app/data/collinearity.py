"""Detect exactly and nearly collinear regressors from a cross-product matrix.

Each candidate column is regressed on the columns kept before it (through
the cross-product matrix, no pass over the data). Its share of variation
left unexplained, ``1 - R^2``, decides: below :data:`EXACT_TOLERANCE` it is an
exact linear combination (an error for the claim), below
:data:`NEAR_TOLERANCE` it is nearly collinear (a warning: a variance
inflation factor above 100,000 makes the estimate numerically fragile).

A column is constant when its spread (sum of squares around the model's
baseline) is negligible against its raw sum of squares at the precision the
spread was computed to: :data:`SUMMED_SPREAD_TOLERANCE` when the spread is
summed from exactly centred rows, whose rounding leaves a constant column a
relative spread of order machine epsilon squared, so that an amount near
1e6 that varies by units (relative spread 1e-12) is not constant;
:data:`CONSTANT_TOLERANCE` when it comes from cancellation in cross-products
or from an iterative absorption.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import linalg

EXACT_TOLERANCE = 1e-10
NEAR_TOLERANCE = 1e-5
CONSTANT_TOLERANCE = 1e-12
SUMMED_SPREAD_TOLERANCE = (1024 * np.finfo(float).eps) ** 2


@dataclass(frozen=True)
class CollinearColumn:
    """A column explained (almost) entirely by earlier columns."""

    name: str
    partners: list[str]
    r_squared: float
    constant: bool


@dataclass(frozen=True)
class CollinearityReport:
    kept: list[int]
    exact: list[CollinearColumn]
    near: list[CollinearColumn]


def check_columns(
    gram: np.ndarray,
    names: list[str],
    *,
    base: list[int],
    candidates: list[int],
    spread: np.ndarray,
    scale: np.ndarray,
    constant_tolerance: float = CONSTANT_TOLERANCE,
) -> CollinearityReport:
    """Check ``candidates`` one by one against ``base`` plus the candidates kept so far.

    Parameters
    ----------
    gram
        Cross-product matrix of all columns.
    names
        Column names (same order as ``gram``).
    base
        Positions already accepted (e.g. the controls when checking instruments).
    candidates
        Positions to check, in order.
    spread
        Each column's sum of squares around the model's baseline (its weighted
        centred sum of squares when the model has an intercept or absorbed
        effects, its raw sum of squares otherwise). ``1 - R^2`` is measured
        against it.
    scale
        Each column's raw sum of squares before any absorption; a column whose
        spread is at most ``constant_tolerance`` times it is reported as constant.
    constant_tolerance
        The relative precision of ``spread`` (see the module notes).
    """
    kept = list(base)
    exact: list[CollinearColumn] = []
    near: list[CollinearColumn] = []
    for j in candidates:
        if spread[j] <= constant_tolerance * max(scale[j], np.finfo(float).tiny):
            exact.append(CollinearColumn(name=names[j], partners=[], r_squared=1.0, constant=True))
            continue
        unexplained, coefficients = _residual_share(gram, kept, j, spread[j])
        if unexplained < EXACT_TOLERANCE or unexplained < NEAR_TOLERANCE:
            partners = _main_partners(gram, kept, coefficients, names)
            problem = CollinearColumn(
                name=names[j], partners=partners, r_squared=1.0 - unexplained, constant=False
            )
            if unexplained < EXACT_TOLERANCE:
                exact.append(problem)
                continue
            near.append(problem)
        kept.append(j)
    return CollinearityReport(kept=kept, exact=exact, near=near)


def _residual_share(gram: np.ndarray, kept: list[int], j: int, spread: float) -> tuple[float, np.ndarray]:
    if not kept:
        return gram[j, j] / spread, np.empty(0)
    block = gram[np.ix_(kept, kept)]
    cross = gram[kept, j]
    diag = np.sqrt(np.diag(block))
    scaled = block / np.outer(diag, diag)
    coefficients = linalg.solve(scaled, cross / diag, assume_a="pos") / diag
    residual = gram[j, j] - cross @ coefficients
    return max(residual, 0.0) / spread, coefficients


def _main_partners(gram: np.ndarray, kept: list[int], coefficients: np.ndarray, names: list[str]) -> list[str]:
    """Names of the earlier columns that carry the linear combination, largest first."""
    if not kept:
        return []
    weight = np.abs(coefficients) * np.sqrt(np.diag(gram)[kept])
    order = np.argsort(-weight)
    top = [kept[i] for i in order if weight[i] > 1e-8 * weight.max()][:6]
    return [names[i] for i in top]
