"""Demo case 1: daily walking and blood pressure, with one valid and one invalid instrument.

Invented data. A workplace health survey claims that walking more lowers
systolic blood pressure. Walking is not assigned: motivated people walk more
and also eat better, so an omitted common cause (health motivation, not in
the data) biases OLS. The authors instrument daily steps with two variables:

* ``device_lottery`` - winning a workplace lottery for a free step-counting
  wristband. Assigned by lot, it moves walking and nothing else: valid.
* ``walkability_index`` - how walkable the home neighbourhood is. It moves
  walking, but walkable neighbourhoods are also richer and quieter, which
  lowers blood pressure directly: invalid (it violates the exclusion
  restriction).

What the demo shows: OLS overstates the benefit; 2SLS with both instruments
overstates it too, and the over-identification test rejects; 2SLS with the
lottery alone recovers the true effect.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

SLUG = "walking_blood_pressure"
TITLE = "Daily walking and systolic blood pressure among office workers"
STORY = (
    "A workplace health survey of office workers reports that every additional 1,000 daily steps "
    "lowers systolic blood pressure. Steps are not assigned at random: motivated people walk more and "
    "also look after their health in other ways. The authors instrument steps with a lottery for a "
    "free step-counting wristband and with the walkability of the home neighbourhood. The lottery is "
    "valid; walkable neighbourhoods are also richer and quieter, which lowers blood pressure directly, "
    "so the walkability index is not."
)
SEED = 580_113
TRUE_EFFECT = {
    "term": "daily_steps_k",
    "value": -1.35,
    "unit": "mmHg of systolic blood pressure per 1,000 daily steps",
    "recovered_by": "2SLS with device_lottery as the only instrument",
}
N_WORKERS = 2_437
DIRECT_EFFECT_OF_WALKABILITY = -1.6
"""mmHg per unit of the index, through neighbourhood income and noise (the exclusion violation)."""


def generate(rng: np.random.Generator) -> pd.DataFrame:
    """Simulate the survey; health motivation is generated but not released."""
    n = N_WORKERS
    motivation = rng.standard_normal(n)
    age = rng.uniform(23, 64, n).round()
    female = rng.binomial(1, 0.53, n)
    bmi = (26.4 + 3.7 * rng.standard_normal(n) - 0.6 * motivation).round(1)
    device_lottery = rng.binomial(1, 0.41, n)
    walkability = rng.standard_normal(n).round(2)
    steps = (
        6.3
        + 1.3 * device_lottery
        + 0.6 * walkability
        + 0.95 * motivation
        - 0.021 * (age - 40)
        - 0.048 * (bmi - 26)
        + 1.55 * rng.standard_normal(n)
    ).clip(0.4, None).round(2)
    systolic = (
        127.5
        + TRUE_EFFECT["value"] * steps
        + 0.43 * (age - 40)
        + 0.88 * (bmi - 26)
        - 3.2 * female
        - 2.6 * motivation
        + DIRECT_EFFECT_OF_WALKABILITY * walkability
        + 9.1 * rng.standard_normal(n)
    ).round(1)
    bmi_missing = rng.random(n) < 0.017
    frame = pd.DataFrame(
        {
            "worker_id": np.arange(10_001, 10_001 + n),
            "age": age.astype(int),
            "female": female,
            "bmi": np.where(bmi_missing, np.nan, bmi),
            "device_lottery": device_lottery,
            "walkability_index": walkability,
            "daily_steps_k": steps,
            "systolic_bp": systolic,
        }
    )
    return frame


def claim() -> dict:
    """The model as the (fictional) manuscript states it, with its printed numbers."""
    return {
        "title": "Each 1,000 daily steps lowers systolic blood pressure (2SLS, two instruments)",
        "design": "iv",
        "outcome": "systolic_bp",
        "endogenous": ["daily_steps_k"],
        "instruments": ["device_lottery", "walkability_index"],
        "controls": ["age", "bmi", "female"],
        "covariance": "robust",
        "claimed": {
            "estimator": "2sls",
            "term": "daily_steps_k",
            "estimate": "-2.84",
            "std_error": "0.23",
            "n_obs": 2394,
            "first_stage_f": "297.5",
        },
    }
