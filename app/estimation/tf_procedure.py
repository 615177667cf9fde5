"""The tF procedure of Lee, McCrary, Moreira & Porter (2022): t-ratio inference that allows for the first-stage F.

With one focal regressor and one instrument, the usual 2SLS t-test uses the
critical value 1.96 and over-rejects when the first stage is weak. The tF
procedure keeps the t-ratio but replaces 1.96 by c(F), which depends on the
first-stage F computed with the same variance estimator as the 2SLS standard
error. The 5% critical values are the paper's Table 3, shipped with the
package (``app/estimation/tables/tf_critical_values_5pct.csv``) and
interpolated linearly in sqrt(F). For F >= 104.7, c(F) = 1.96. For F <= 3.84
no finite critical value exists: the tF confidence set is the whole line;
between 3.84 and 4.0 (below the table) the set is treated as the whole line
too, conservatively.

The tF interval is ``estimate +/- c(F) x standard error``. The procedure
gives a 5% decision, not a p-value.

References
----------
Lee, D. S., McCrary, J., Moreira, M. J. and Porter, J. (2022). Valid t-ratio
inference for IV. American Economic Review 112(10), 3260-3290.
"""

from __future__ import annotations

import csv
import math
from functools import lru_cache
from importlib import resources

import numpy as np

from app.estimation.confidence_sets import ConfidenceSet
from app.estimation.findings import TestResult

TABLE_FILE = "tf_critical_values_5pct.csv"
NAME = "tF procedure"
SOURCE = "Lee, McCrary, Moreira & Porter (2022), Table 3 (shipped in app/estimation/tables)"
NULL = "the focal regressor has no effect (beta = 0)"
LEVEL = 0.95
STRONG_F = 104.7
NORMAL_CRITICAL = 1.96
UNBOUNDED_F = 3.84
METHOD = "estimate +/- c(F) x standard error, c(F) interpolated linearly in sqrt(F) from the published table"


@lru_cache(maxsize=1)
def tf_table() -> tuple[np.ndarray, np.ndarray]:
    """``(sqrt(F) grid, c(F))`` from the shipped CSV."""
    text = resources.files("app.estimation").joinpath("tables", TABLE_FILE).read_text(encoding="utf-8")
    rows = list(csv.DictReader(text.splitlines()))
    return np.array([float(row["sqrt_F"]) for row in rows]), np.array([float(row["c_F_5pct"]) for row in rows])


def tf_critical_value(first_stage_f: float) -> float:
    """c(F) at the 5% level; ``inf`` where the tF set is unbounded (F below the table)."""
    roots, values = tf_table()
    if first_stage_f >= STRONG_F:
        return NORMAL_CRITICAL
    root = math.sqrt(max(first_stage_f, 0.0))
    if root < roots[0]:
        return math.inf
    return float(np.interp(root, roots, values))


def tf_procedure(*, estimate: float, std_error: float, first_stage_f: float | None, n_endog: int, n_instruments: int) -> TestResult:
    """The tF decision on no effect and the tF confidence interval."""
    if n_endog != 1 or n_instruments != 1:
        return TestResult.not_applicable(
            NAME,
            f"the tF procedure needs exactly one instrument and one focal regressor (the claim has {n_instruments} "
            f"instrument(s) and {n_endog} focal regressor(s)); read the Anderson-Rubin, K and CLR tests instead",
            source=SOURCE,
            null_hypothesis=NULL,
        )
    if first_stage_f is None or not math.isfinite(std_error) or std_error <= 0:
        return TestResult.undefined(
            NAME, "the first-stage F or the 2SLS standard error could not be computed", source=SOURCE, null_hypothesis=NULL
        )
    critical = tf_critical_value(first_stage_f)
    statistic = estimate / std_error
    if math.isinf(critical):
        interval = ConfidenceSet([(-math.inf, math.inf)], LEVEL, METHOD)
        decision = "does not reject: with a first-stage F this small no t-ratio is significant at 5%"
    else:
        interval = ConfidenceSet([(estimate - critical * std_error, estimate + critical * std_error)], LEVEL, METHOD)
        decision = "rejects no effect at 5%" if abs(statistic) > critical else "does not reject no effect at 5%"
    return TestResult(
        name=NAME,
        statistic=statistic,
        p_value=None,
        df=None,
        distribution="t-ratio compared with c(F)",
        null_hypothesis=NULL,
        source=SOURCE,
        details={
            "tested_value": 0.0,
            "first_stage_f": first_stage_f,
            "critical_value": critical,
            "decision_5pct": decision,
            "p_value_note": "the tF procedure gives a decision at the 5% level, not a p-value (only 5% values are tabulated)",
            "unbounded_below_f": UNBOUNDED_F,
            **interval.to_details(),
        },
    )
