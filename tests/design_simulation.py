"""Seeded generators of invented data for the panel, selection and mediation designs (shared, never copied).

Each generator documents its true effect; tests, the benchmark script and
Monte Carlo checks draw from these and nothing else.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd


@dataclass(frozen=True)
class PanelDesign:
    """Unbalanced panel whose unit effects correlate with the focal regressor.

    ``outcome = effect * focal + 0.4 * control + 0.3 * steady + alpha_i + e``
    with ``focal = effect_link * alpha_i + 0.5 * control + v``; ``steady`` is
    constant within units. Random effects are biased when ``effect_link != 0``;
    the within estimator is not.
    """

    n_units: int = 300
    max_periods: int = 6
    effect: float = 0.7
    effect_link: float = 0.8
    unit_sd: float = 1.0
    balanced: bool = False
    heteroskedastic: bool = False
    instrument_strength: float = 0.0


def panel_sample(design: PanelDesign, rng: np.random.Generator) -> pd.DataFrame:
    """Columns: firm, period, outcome, focal, control, steady (and nudge, an instrument, when asked)."""
    if design.balanced:
        periods = np.full(design.n_units, design.max_periods)
    else:
        periods = rng.integers(1, design.max_periods + 1, design.n_units)
    unit = np.repeat(np.arange(design.n_units), periods)
    period = np.concatenate([rng.permutation(design.max_periods)[:t] for t in periods])
    n = unit.size
    alpha = design.unit_sd * rng.standard_normal(design.n_units)
    steady = rng.standard_normal(design.n_units)
    control = rng.standard_normal(n)
    nudge = rng.standard_normal(n)
    shock = rng.standard_normal(n)
    focal = design.effect_link * alpha[unit] + 0.5 * control + design.instrument_strength * nudge + shock
    noise = rng.standard_normal(n) * (np.sqrt(0.2 + control**2) if design.heteroskedastic else 1.0)
    if design.instrument_strength:
        noise = noise + 0.6 * shock
    outcome = design.effect * focal + 0.4 * control + 0.3 * steady[unit] + alpha[unit] + noise
    frame = pd.DataFrame(
        {
            "firm": unit + 1001,
            "period": period + 2011,
            "outcome": outcome,
            "focal": focal,
            "control": control,
            "steady": steady[unit],
        }
    )
    if design.instrument_strength:
        frame["nudge"] = nudge
    return frame


@dataclass(frozen=True)
class SelectionDesign:
    """Heckman's model: the outcome is seen only for rows that select in.

    ``selected = 1[0.3 + 0.8 * excluded + 0.5 * regressor + u > 0]`` and
    ``outcome = 1 + effect * regressor + e`` with ``corr(u, e) = rho`` and
    ``sd(e) = sigma``. OLS on the selected rows is biased when ``rho != 0``.
    """

    n_obs: int = 2_000
    effect: float = 0.6
    rho: float = 0.6
    sigma: float = 1.5
    exclusion: float = 0.8


def selection_sample(design: SelectionDesign, rng: np.random.Generator) -> pd.DataFrame:
    """Columns: selected, outcome (missing when not selected), regressor, excluded."""
    n = design.n_obs
    regressor = rng.standard_normal(n)
    excluded = rng.standard_normal(n)
    errors = rng.multivariate_normal(
        [0.0, 0.0], [[1.0, design.rho * design.sigma], [design.rho * design.sigma, design.sigma**2]], size=n
    )
    selected = (0.3 + design.exclusion * excluded + 0.5 * regressor + errors[:, 0] > 0).astype(int)
    outcome = 1.0 + design.effect * regressor + errors[:, 1]
    return pd.DataFrame(
        {
            "selected": selected,
            "outcome": np.where(selected == 1, outcome, np.nan),
            "regressor": regressor,
            "excluded": excluded,
        }
    )


@dataclass(frozen=True)
class TreatmentChoiceDesign:
    """A binary treatment people choose, with joint normal errors (the endogenous-dummy model).

    ``treated = 1[-0.2 + 0.9 * encouragement + 0.4 * control + v > 0]``,
    ``outcome = 2 + effect * treated + 0.5 * control + e``, ``corr(v, e) = rho``.
    """

    n_obs: int = 3_000
    effect: float = 1.1
    rho: float = 0.5


def treatment_choice_sample(design: TreatmentChoiceDesign, rng: np.random.Generator) -> pd.DataFrame:
    """Columns: outcome, treated, encouragement, control."""
    n = design.n_obs
    control = rng.standard_normal(n)
    encouragement = rng.standard_normal(n)
    errors = rng.multivariate_normal([0.0, 0.0], [[1.0, design.rho], [design.rho, 1.0]], size=n)
    treated = (-0.2 + 0.9 * encouragement + 0.4 * control + errors[:, 0] > 0).astype(int)
    outcome = 2.0 + design.effect * treated + 0.5 * control + errors[:, 1]
    return pd.DataFrame({"outcome": outcome, "treated": treated, "encouragement": encouragement, "control": control})


@dataclass(frozen=True)
class MediationDesign:
    """A randomized experiment whose mediator shares an unmeasured cause with the outcome.

    Arms ``arm_a``, ``arm_b`` (0/1, assigned at random) move the mediator:
    ``mediator = 0.8 * arm_a + 0.5 * arm_b + 0.9 * shared + v``;
    ``outcome = effect * mediator + direct * arm_a + 0.7 * shared + e``.
    OLS of outcome on mediator is biased by ``shared``; 2SLS with the arms as
    instruments is consistent when ``direct = 0`` and otherwise drifts by
    ``direct`` times the 2SLS weight of ``arm_a`` (the drift reported in the findings).
    """

    n_obs: int = 1_000
    effect: float = 0.45
    direct: float = 0.0


def mediation_sample(design: MediationDesign, rng: np.random.Generator) -> pd.DataFrame:
    """Columns: outcome, mediator, arm_a, arm_b, baseline."""
    n = design.n_obs
    arm = rng.integers(0, 3, n)
    arm_a, arm_b = (arm == 1).astype(float), (arm == 2).astype(float)
    shared = rng.standard_normal(n)
    baseline = rng.standard_normal(n)
    mediator = 0.8 * arm_a + 0.5 * arm_b + 0.9 * shared + 0.3 * baseline + rng.standard_normal(n)
    outcome = design.effect * mediator + design.direct * arm_a + 0.7 * shared + 0.2 * baseline + rng.standard_normal(n)
    return pd.DataFrame({"outcome": outcome, "mediator": mediator, "arm_a": arm_a, "arm_b": arm_b, "baseline": baseline})

