"""Seeded generators of invented data with known effects, shared by every test (never copied).

The instrumental-variables generator follows the textbook linear model

    focal   = pi' instruments + gamma' controls + v
    outcome = effect * focal + delta' controls + direct' instruments + u
    corr(u, v) = endogeneity

so that OLS is biased when ``endogeneity != 0``, 2SLS is consistent when
``direct`` is zero, and an instrument with a non-zero ``direct`` entry is
invalid. With ``years`` set, an uncentred control ``year`` (whole calendar
years in that range) shifts both equations, as a survey wave or fiscal year
would.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd


@dataclass(frozen=True)
class IvDesign:
    """Parameters of a simulated instrumental-variables sample."""

    n_obs: int = 800
    effect: float = 0.5
    n_controls: int = 2
    first_stage: tuple[float, ...] = (0.6, 0.4)
    direct: tuple[float, ...] | None = None
    endogeneity: float = 0.5
    n_clusters: int | None = None
    cluster_effect: float = 0.0
    heteroskedastic: bool = False
    years: tuple[int, int] | None = None


def iv_sample(design: IvDesign, rng: np.random.Generator) -> pd.DataFrame:
    """Draw one sample: columns outcome, focal, z1.., w1.. and (when clustered) cluster, region, site."""
    n = design.n_obs
    q = len(design.first_stage)
    instruments = rng.standard_normal((n, q))
    controls = rng.standard_normal((n, design.n_controls))
    errors = rng.multivariate_normal([0.0, 0.0], [[1.0, design.endogeneity], [design.endogeneity, 1.0]], size=n)
    structural, first_stage_error = errors[:, 0], errors[:, 1]
    if design.heteroskedastic:
        structural = structural * np.sqrt(0.3 + instruments[:, 0] ** 2)
    columns: dict[str, np.ndarray] = {}
    if design.n_clusters:
        cluster = rng.integers(0, design.n_clusters, n)
        shock = rng.standard_normal(design.n_clusters)
        structural = structural + design.cluster_effect * shock[cluster]
        columns["cluster"] = cluster
        columns["region"] = rng.integers(0, 7, n)
        columns["site"] = rng.integers(0, 40, n)
    focal = instruments @ np.asarray(design.first_stage) + controls @ np.full(design.n_controls, 0.3) + first_stage_error
    outcome = 1.0 + design.effect * focal + controls @ np.linspace(0.5, -0.5, design.n_controls) + structural
    if design.direct is not None:
        outcome = outcome + instruments @ np.asarray(design.direct)
    if design.years is not None:
        first, last = design.years
        year = rng.integers(first, last + 1, n).astype(float)
        trend = 0.1 * (year - first)
        focal = focal + trend
        outcome = outcome + design.effect * trend + 0.5 * trend
        columns["year"] = year
    columns = {
        "outcome": outcome,
        "focal": focal,
        **{f"z{j + 1}": instruments[:, j] for j in range(q)},
        **{f"w{j + 1}": controls[:, j] for j in range(design.n_controls)},
        **columns,
    }
    return pd.DataFrame(columns)


def iv_claim(design: IvDesign, /, **fields: object) -> dict[str, object]:
    """The claim spec matching :func:`iv_sample`'s columns; extra fields override."""
    claim: dict[str, object] = {
        "outcome": "outcome",
        "endogenous": ["focal"],
        "instruments": [f"z{j + 1}" for j in range(len(design.first_stage))],
        "controls": [f"w{j + 1}" for j in range(design.n_controls)] + (["year"] if design.years else []),
        "covariance": "robust",
    }
    claim.update(fields)
    return claim
