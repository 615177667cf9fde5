"""Benchmark: the engine's complete refit against one linearmodels fit and the numpy floor.

Simulates n = 1,000,000 rows with 20 controls, 1 endogenous regressor,
3 instruments and 1,000 clusters, then times in the same run, on the same
in-memory data frame:

(a) SecondStage's complete refit: all six estimator rows (OLS, 2SLS, LIML,
    Fuller 1 and 4, two-step GMM) with cluster-robust covariance plus every
    diagnostic, starting from the data frame;
(b) one clustered IV2SLS fit of linearmodels (the reference a reviewer would
    otherwise script by hand);
(c) the floor: stacking [y, X, Z, W] into one float64 array and computing its
    cross-product matrix with numpy.

It prints a/b, a/c and the peak memory that (a) allocates (tracemalloc, which
sees numpy's buffers) against the size of the stacked array. Each timing is
the best of ``--repeat`` runs. Targets: a/b <= 0.2 (0.3 with the
weak-instrument diagnostics), a/c <= 15 (20), peak < 2 x the stacked array.

Then, on the same rows, it redraws the cluster column with many clusters
(``--many-clusters``, by default 20,000 and 100,000: more clusters than rows
per column of the stacked array, where per-cluster cross-products would
outgrow the data and each residual costs one pass) and prints a/b for each.

Run: python tests/perf/bench_engine.py [--rows N] [--repeat R]
"""

from __future__ import annotations

import argparse
import time
import tracemalloc
from collections.abc import Callable

import numpy as np
import pandas as pd
from linearmodels.iv import IV2SLS

from app.estimation.refit import refit
from app.spec import parse_claim

N_CONTROLS = 20
N_INSTRUMENTS = 3
N_CLUSTERS = 1_000


def simulate(n_rows: int, seed: int = 2024) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    controls = rng.standard_normal((n_rows, N_CONTROLS))
    instruments = rng.standard_normal((n_rows, N_INSTRUMENTS))
    cluster = rng.integers(0, N_CLUSTERS, n_rows)
    common = rng.standard_normal(n_rows)
    focal = instruments @ np.array([0.3, 0.2, 0.1]) + controls[:, :5].sum(axis=1) * 0.1 + common + rng.standard_normal(n_rows)
    outcome = 0.4 * focal + controls @ np.linspace(-0.2, 0.2, N_CONTROLS) + common + rng.standard_normal(n_rows)
    columns = {"outcome": outcome, "focal": focal, "cluster": cluster}
    columns.update({f"instrument_{j}": instruments[:, j] for j in range(N_INSTRUMENTS)})
    columns.update({f"control_{j}": controls[:, j] for j in range(N_CONTROLS)})
    return pd.DataFrame(columns)


def claim() -> dict[str, object]:
    return {
        "outcome": "outcome",
        "endogenous": ["focal"],
        "instruments": [f"instrument_{j}" for j in range(N_INSTRUMENTS)],
        "controls": [f"control_{j}" for j in range(N_CONTROLS)],
        "covariance": "cluster",
        "cluster": ["cluster"],
    }


def best_time(function: Callable[[], object], repeat: int) -> float:
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        function()
        times.append(time.perf_counter() - start)
    return min(times)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--many-clusters", type=int, nargs="*", default=[20_000, 100_000])
    arguments = parser.parse_args()

    frame = simulate(arguments.rows)
    spec = parse_claim(claim())
    controls = frame[[f"control_{j}" for j in range(N_CONTROLS)]].assign(const=1.0)
    instruments = frame[[f"instrument_{j}" for j in range(N_INSTRUMENTS)]]
    stacked_columns = ["outcome", "focal", *instruments.columns, *controls.columns[:-1]]

    def engine() -> object:
        return refit(frame, spec)

    def reference() -> object:
        model = IV2SLS(frame["outcome"], controls, frame[["focal"]], instruments)
        return model.fit(cov_type="clustered", clusters=frame["cluster"], debiased=True)

    def floor() -> np.ndarray:
        stacked = np.empty((len(frame), len(stacked_columns) + 1))
        for j, name in enumerate(stacked_columns):
            stacked[:, j] = frame[name].to_numpy()
        stacked[:, -1] = 1.0
        return stacked.T @ stacked

    findings = engine()
    focal_2sls = next(r for r in findings.estimates if r.estimator == "2sls" and r.term == "focal")
    reference_fit = reference()
    assert abs(focal_2sls.estimate - reference_fit.params["focal"]) < 1e-8
    assert abs(focal_2sls.std_error / reference_fit.std_errors["focal"] - 1) < 1e-6

    time_engine = best_time(engine, arguments.repeat)
    time_reference = best_time(reference, arguments.repeat)
    time_floor = best_time(floor, arguments.repeat)

    tracemalloc.start()
    engine()
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    stacked_bytes = len(frame) * (len(stacked_columns) + 1) * 8

    print(f"rows {len(frame):,}; controls {N_CONTROLS}; instruments {N_INSTRUMENTS}; clusters {N_CLUSTERS:,}")
    print(f"diagnostics computed: {len(findings.diagnostics)} keys; estimator rows: {len(findings.estimates)}")
    print(f"(a) SecondStage complete refit      {time_engine:8.3f} s")
    print(f"(b) linearmodels IV2SLS, clustered  {time_reference:8.3f} s")
    print(f"(c) numpy stack + cross-product     {time_floor:8.3f} s")
    print(f"a/b = {time_engine / time_reference:.3f}   a/c = {time_engine / time_floor:.2f}")
    print(f"peak memory of (a): {peak / 2**20:,.0f} MiB = {peak / stacked_bytes:.2f} x the stacked array ({stacked_bytes / 2**20:,.0f} MiB)")

    for n_clusters in arguments.many_clusters:
        frame["cluster"] = np.random.default_rng(n_clusters).integers(0, n_clusters, len(frame))
        time_engine = best_time(engine, arguments.repeat)
        time_reference = best_time(reference, arguments.repeat)
        print(
            f"{n_clusters:,} clusters: (a) {time_engine:.3f} s  (b) {time_reference:.3f} s  "
            f"a/b = {time_engine / time_reference:.3f}"
        )


if __name__ == "__main__":
    main()
