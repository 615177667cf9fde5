"""Benchmark: the panel and selection refits against the matching single reference fit.

Two workloads, each timed in the same run on the same in-memory data frame:

* **panel** - 1,000,000 rows of 100,000 units (unbalanced, 4 to 16 rows per
  unit), 5 controls and period indicators, errors clustered by unit.
  (a) SecondStage's complete panel refit from the data frame: pooled OLS,
  within, random effects, the Mundlak and Hausman tests, the variance
  components and both sensitivity analyses; (b) one linearmodels
  RandomEffects fit, clustered by unit, on the same data (indexed by unit
  and period before timing).
* **selection** - 1,000,000 rows, 5 outcome regressors and 2 excluded
  selection covariates, about 60% selected. (a) SecondStage's complete
  selection refit: the probit, OLS on the selected rows, Heckman's two-step
  with the corrected covariance, the test of no selection and both
  sensitivity analyses; (b) one statsmodels Probit fit of the selection
  equation (the single most expensive step a reviewer would script).

Prints a/b for each; target a/b <= 3. Each timing is the best of
``--repeat`` runs.

Run: python tests/perf/bench_designs.py [--rows N] [--units G] [--repeat R]
"""

from __future__ import annotations

import argparse
import time
from collections.abc import Callable

import numpy as np
import pandas as pd
import statsmodels.api as sm
from linearmodels.panel import RandomEffects

from app.estimation.refit import refit
from app.spec import parse_claim

N_CONTROLS = 5


def simulate_panel(n_rows: int, n_units: int, seed: int = 2025) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    mean_rows = n_rows / n_units
    counts = rng.integers(int(mean_rows * 0.4), int(mean_rows * 1.6) + 1, n_units)
    counts = np.maximum(1, np.round(counts * n_rows / counts.sum()).astype(int))
    counts[-1] = max(1, counts[-1] + n_rows - int(counts.sum()))
    unit = np.repeat(np.arange(n_units), counts)
    period = np.concatenate([np.arange(c) for c in counts])
    n = unit.size
    effect = rng.standard_normal(n_units)
    controls = rng.standard_normal((n, N_CONTROLS))
    focal = 0.6 * effect[unit] + controls[:, 0] * 0.3 + rng.standard_normal(n)
    outcome = 0.5 * focal + controls @ np.linspace(-0.3, 0.3, N_CONTROLS) + effect[unit] + rng.standard_normal(n)
    columns = {"unit": unit, "period": period, "outcome": outcome, "focal": focal}
    columns.update({f"control_{j}": controls[:, j] for j in range(N_CONTROLS)})
    return pd.DataFrame(columns)


def simulate_selection(n_rows: int, seed: int = 2026) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    regressors = rng.standard_normal((n_rows, N_CONTROLS))
    excluded = rng.standard_normal((n_rows, 2))
    errors = rng.multivariate_normal([0, 0], [[1, 0.5], [0.5, 1]], size=n_rows)
    index = 0.25 + regressors @ np.linspace(0.1, 0.3, N_CONTROLS) + excluded @ np.array([0.5, -0.4])
    selected = (index + errors[:, 0] > 0).astype(int)
    outcome = 1.0 + regressors @ np.linspace(0.5, -0.5, N_CONTROLS) + errors[:, 1]
    columns = {"selected": selected, "outcome": np.where(selected == 1, outcome, np.nan)}
    columns.update({f"regressor_{j}": regressors[:, j] for j in range(N_CONTROLS)})
    columns.update({"excluded_0": excluded[:, 0], "excluded_1": excluded[:, 1]})
    return pd.DataFrame(columns)


def best_time(function: Callable[[], object], repeat: int) -> float:
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        function()
        times.append(time.perf_counter() - start)
    return min(times)


def bench_panel(n_rows: int, n_units: int, repeat: int) -> None:
    frame = simulate_panel(n_rows, n_units)
    controls = [f"control_{j}" for j in range(N_CONTROLS)]
    spec = parse_claim(
        {
            "design": "panel",
            "outcome": "outcome",
            "endogenous": ["focal"],
            "controls": controls,
            "unit": "unit",
            "time": "period",
            "covariance": "cluster",
            "cluster": ["unit"],
        }
    )
    indexed = frame.set_index(["unit", "period"])
    regressors = indexed[["focal", *controls]].assign(const=1.0)

    def engine() -> object:
        return refit(frame, spec)

    def reference() -> object:
        return RandomEffects(indexed["outcome"], regressors).fit(cov_type="clustered", cluster_entity=True, group_debias=True)

    findings = engine()
    ours = next(r for r in findings.estimates if r.estimator == "random_effects" and r.term == "focal")
    theirs = reference()
    assert abs(ours.estimate - theirs.params["focal"]) < 1e-8
    assert abs(ours.std_error / theirs.std_errors["focal"] - 1) < 1e-6
    time_engine = best_time(engine, repeat)
    time_reference = best_time(reference, repeat)
    print(f"panel: rows {len(frame):,}; units {frame['unit'].nunique():,}; controls {N_CONTROLS}; clustered by unit")
    print(f"  (a) SecondStage complete panel refit        {time_engine:8.3f} s  ({len(findings.estimates)} rows, {len(findings.diagnostics)} diagnostics)")
    print(f"  (b) linearmodels RandomEffects, clustered   {time_reference:8.3f} s")
    print(f"  a/b = {time_engine / time_reference:.2f}")


def bench_selection(n_rows: int, repeat: int) -> None:
    frame = simulate_selection(n_rows)
    regressors = [f"regressor_{j}" for j in range(N_CONTROLS)]
    spec = parse_claim(
        {
            "design": "selection",
            "outcome": "outcome",
            "endogenous": [regressors[0]],
            "controls": regressors[1:],
            "selected": "selected",
            "selection_covariates": ["excluded_0", "excluded_1"],
            "covariance": "robust",
        }
    )
    probit_regressors = sm.add_constant(frame[[*regressors, "excluded_0", "excluded_1"]])

    def engine() -> object:
        return refit(frame, spec)

    def reference() -> object:
        return sm.Probit(frame["selected"], probit_regressors).fit(disp=0)

    findings = engine()
    probit = reference()
    ours = {r["term"]: r["estimate"] for r in findings.diagnostics["selection"].details["selection_equation"]}
    assert abs(ours["excluded_0"] - probit.params["excluded_0"]) < 1e-6
    time_engine = best_time(engine, repeat)
    time_reference = best_time(reference, repeat)
    print(f"selection: rows {len(frame):,}; selected {int(frame['selected'].sum()):,}; outcome regressors {N_CONTROLS}; 2 excluded")
    print(f"  (a) SecondStage complete selection refit    {time_engine:8.3f} s  ({len(findings.estimates)} rows, {len(findings.diagnostics)} diagnostics)")
    print(f"  (b) statsmodels Probit of the selection     {time_reference:8.3f} s")
    print(f"  a/b = {time_engine / time_reference:.2f}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--units", type=int, default=100_000)
    parser.add_argument("--repeat", type=int, default=3)
    arguments = parser.parse_args()
    bench_panel(arguments.rows, arguments.units, arguments.repeat)
    bench_selection(arguments.rows, arguments.repeat)


if __name__ == "__main__":
    main()
