"""How strong would an omitted common cause have to be? Cinelli & Hazlett (2020).

Take the OLS regression of the outcome y on the focal regressor D and the
controls X, with ``df = n - k`` residual degrees of freedom (k counts every
coefficient and absorbed fixed effect) and classical t statistic ``t``. An
omitted cause Z is described by two partial R^2 values: ``R2_{D~Z|X}`` (how
much of D's residual variation it explains) and ``R2_{Y~Z|D,X}`` (how much of
y's). Cinelli & Hazlett (2020) show:

* partial R^2 of D with y: ``R2_{Y~D|X} = t^2 / (t^2 + df)``;
* bias of the estimate: ``|bias| = se * sqrt(df) * sqrt(R2_{Y~Z|D,X} R2_{D~Z|X} / (1 - R2_{D~Z|X}))``
  (their eq. 4 with ``se sqrt(df) = sd(y resid) / sd(D resid)``);
* adjusted standard error: ``se * sqrt((1 - R2_{Y~Z|D,X}) / (1 - R2_{D~Z|X})) * sqrt(df / (df - 1))``;
* robustness value (their eq. 17 and sec. 4.2): with ``f_q = q |t| / sqrt(df)``,
  ``RV_q = (sqrt(f_q^4 + 4 f_q^2) - f_q^2) / 2``, the strength (equal on both
  partial R^2) an omitted cause needs to move the estimate by 100q percent.
  ``RV_{q,alpha}`` replaces ``f_q`` by ``f_q - f*`` with
  ``f* = |t_{alpha/2, df-1}| / sqrt(df - 1)`` (0 when negative), and by
  ``(f_q^2 - f*^2) / (1 + f_q^2)`` when ``f_q > 1/f*`` (where the bound on
  ``R2_{D~Z|X}`` alone suffices; as in the authors' sensemakr software);
* bounds from a benchmark control X_j (their sec. 6.1): an omitted cause k
  times as strong as X_j has
  ``R2_{D~Z|X} = k R2_{D~Xj|X-j} / (1 - R2_{D~Xj|X-j})`` and
  ``R2_{Y~Z|D,X} <= ((sqrt(k) + sqrt(g)) / sqrt(1 - g))^2 R2_{Y~Xj|D,X-j} / (1 - R2_{Y~Xj|D,X-j})``
  with ``g = k R2_{D~Xj|X-j}^2 / ((1 - k R2_{D~Xj|X-j})(1 - R2_{D~Xj|X-j}))``,
  capped at 1. A categorical benchmark is the group of its indicators (group
  partial R^2).

Everything is computed from the moment matrix with the classical
(homoskedastic) standard error, as in the paper, whatever the claim's own
variance estimator. The adjusted estimate is moved towards zero; its interval
uses Student's t with ``df - 1`` degrees of freedom (the omitted cause is one
more parameter).

References
----------
Cinelli, C. and Hazlett, C. (2020). Making sense of sensitivity: extending
omitted variable bias. Journal of the Royal Statistical Society, Series B
82(1), 39-67.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np
from scipy import stats

from app.estimation.findings import TestResult
from app.estimation.moments import Moments
from app.estimation.proportional_selection import partialled_slope, proportional_selection
from app.spec import SensitivityOptions

SOURCE = "Cinelli & Hazlett (2020), JRSS-B 82(1)"
NAME = "Sensitivity to an omitted common cause"
NULL = "an omitted common cause of the stated strength would not change the conclusion"
CONTOUR_POINTS = 26
CONTOUR_MIN_LIMIT = 0.4
CONTOUR_MAX_LIMIT = 0.99


@dataclass(frozen=True)
class FocalRegression:
    """The OLS regression of y on every regressor, seen from one focal regressor D."""

    estimate: float
    std_error: float
    df: int
    outcome_ss: float
    focal_ss: float

    @property
    def t_statistic(self) -> float:
        return self.estimate / self.std_error

    def bias(self, r2dz: float, r2yz: float) -> float:
        """Absolute bias of an omitted cause with the two partial R^2 values."""
        return self.std_error * math.sqrt(self.df) * math.sqrt(r2yz * r2dz / (1.0 - r2dz))

    def adjusted(self, r2dz: float, r2yz: float, *, alpha: float) -> dict[str, float]:
        """Estimate moved towards zero by the bias, its standard error, t and interval."""
        estimate = math.copysign(1.0, self.estimate) * (abs(self.estimate) - self.bias(r2dz, r2yz))
        std_error = self.std_error * math.sqrt((1.0 - r2yz) / (1.0 - r2dz)) * math.sqrt(self.df / (self.df - 1))
        critical = float(stats.t.ppf(1.0 - alpha / 2, self.df - 1))
        return {
            "adjusted_estimate": estimate,
            "adjusted_std_error": std_error,
            "adjusted_t": estimate / std_error if std_error > 0 else math.nan,
            "adjusted_ci_low": estimate - critical * std_error,
            "adjusted_ci_high": estimate + critical * std_error,
        }


def sensitivity_diagnostics(
    moments: Moments,
    *,
    columns: list[str],
    focal: list[str],
    baseline: list[str],
    benchmarks: dict[str, list[str]],
    options: SensitivityOptions,
) -> dict[str, list[TestResult]]:
    """Both omitted-cause analyses of the OLS fit, keyed as in the findings JSON.

    Parameters
    ----------
    moments
        Moments of ``[y, X, Z, W]``; the OLS regression is y on ``[X, W]``.
    columns
        Names of the stacked array's columns, in order.
    focal
        The focal regressors (each analysed with the others as controls).
    baseline
        Columns kept in the uncontrolled regression of Oster (2019): the
        intercept when the model has one.
    benchmarks
        Benchmark name -> the columns that make it up (one control, or the
        indicators of a categorical control).
    options
        The claim's sensitivity settings.
    """
    return {
        "omitted_cause_sensitivity": [
            omitted_cause_sensitivity(moments, columns=columns, regressor=name, benchmarks=benchmarks, options=options)
            for name in focal
        ],
        "proportional_selection": [
            proportional_selection(moments, columns=columns, regressor=name, baseline=baseline, options=options)
            for name in focal
        ],
    }


def benchmark_groups(benchmarks: list[str], columns: list[str]) -> dict[str, list[str]]:
    """Map each benchmark to its column, or to the indicator columns of a categorical control."""
    return {
        name: [name] if name in columns else [c for c in columns if c.startswith(f"{name}=")] for name in benchmarks
    }


def omitted_cause_sensitivity(
    moments: Moments,
    *,
    columns: list[str],
    regressor: str,
    benchmarks: dict[str, list[str]],
    options: SensitivityOptions,
) -> TestResult:
    """Partial R^2, robustness values, benchmark bounds and contour data for one focal regressor."""
    layout = moments.layout
    position = columns.index(regressor)
    regressors = layout.regressors
    others = [c for c in regressors if c != position]
    df = moments.n_obs - len(regressors) - moments.absorbed_dof
    if df < 2:
        return TestResult.undefined(NAME, "fewer than two residual degrees of freedom", source=SOURCE, null_hypothesis=NULL)
    regression = focal_regression(moments, position=position, others=others, df=df)
    if regression.std_error <= 0 or not math.isfinite(regression.std_error):
        return TestResult.undefined(
            NAME, "the OLS fit leaves no residual variation, so no standard error exists", source=SOURCE, null_hypothesis=NULL
        )
    t = regression.t_statistic
    alpha = options.alpha
    bounds = [
        bound
        for name, members in benchmarks.items()
        for bound in benchmark_bounds(
            moments,
            regression,
            name=name,
            members=[columns.index(c) for c in members],
            position=position,
            others=others,
            options=options,
        )
    ]
    details = {
        "regressor": regressor,
        "estimate": regression.estimate,
        "std_error": regression.std_error,
        "t_statistic": t,
        "dof": df,
        "partial_r2_outcome": t * t / (t * t + df),
        "robustness_value": robustness_value(t, df, q=1.0),
        "robustness_value_alpha": robustness_value(t, df, q=1.0, alpha=alpha),
        "q": options.q,
        "alpha": alpha,
        "robustness_value_q": robustness_value(t, df, q=options.q),
        "robustness_value_q_alpha": robustness_value(t, df, q=options.q, alpha=alpha),
        "benchmark_bounds": bounds,
        "contour": contour_grid(regression, bounds=bounds, alpha=alpha),
        "standard_error_kind": "classical (homoskedastic) OLS standard error, as in Cinelli & Hazlett (2020)",
        "reading": (
            "robustness_value is the share of the residual variation of both the focal regressor and the "
            "outcome that an omitted common cause would have to explain to bring the estimate to zero; "
            "robustness_value_alpha, to make it statistically insignificant at level alpha"
        ),
    }
    return TestResult(
        name=NAME,
        statistic=details["robustness_value"],
        p_value=None,
        df=df,
        distribution=None,
        null_hypothesis=NULL,
        source=SOURCE,
        details=details,
    )


def focal_regression(moments: Moments, *, position: int, others: list[int], df: int) -> FocalRegression:
    """OLS coefficient of column ``position`` and its classical standard error, by Frisch-Waugh-Lovell."""
    estimate, focal_ss, outcome_ss = partialled_slope(moments, position=position, others=others)
    std_error = math.sqrt(max(outcome_ss, 0.0) / df / focal_ss)
    return FocalRegression(estimate=estimate, std_error=std_error, df=df, outcome_ss=outcome_ss, focal_ss=focal_ss)


def robustness_value(t_statistic: float, df: int, *, q: float, alpha: float | None = None) -> float:
    """``RV_q`` (alpha None) or ``RV_{q,alpha}`` of Cinelli & Hazlett (2020), eq. 17 and sec. 4.2."""
    f_q = q * abs(t_statistic) / math.sqrt(df)
    if alpha is None:
        return 0.5 * (math.sqrt(f_q**4 + 4 * f_q**2) - f_q**2)
    f_critical = abs(float(stats.t.ppf(alpha / 2, df - 1))) / math.sqrt(df - 1)
    gap = f_q - f_critical
    if gap <= 0:
        return 0.0
    if f_q > 1.0 / f_critical:
        return (f_q**2 - f_critical**2) / (1 + f_q**2)
    return 0.5 * (math.sqrt(gap**4 + 4 * gap**2) - gap**2)


def benchmark_bounds(
    moments: Moments,
    regression: FocalRegression,
    *,
    name: str,
    members: list[int],
    position: int,
    others: list[int],
    options: SensitivityOptions,
) -> list[dict[str, object]]:
    """Bounds on the adjusted estimate for an omitted cause k times as strong as one benchmark."""
    if not members:
        reason = f"'{name}' is not among the regressors of this fit (absorbed or dropped)"
        return [{"benchmark": name, "multiplier": k, "available": False, "reason": reason} for k in options.multipliers]
    without = [c for c in others if c not in members]
    outcome, focal = moments.column(0), moments.column(position)
    outcome_full = regression.outcome_ss
    outcome_without = moments.residual_ss(outcome, [position, *without])
    r2y = 1.0 - outcome_full / outcome_without
    r2d = 1.0 - moments.residual_ss(focal, others) / moments.residual_ss(focal, without)
    bounds = []
    for k in options.multipliers:
        entry: dict[str, object] = {
            "benchmark": name,
            "multiplier": k,
            "benchmark_partial_r2_focal": r2d,
            "benchmark_partial_r2_outcome": r2y,
        }
        r2dz = k * r2d / (1.0 - r2d)
        strength = k * r2d**2 / ((1.0 - k * r2d) * (1.0 - r2d)) if k * r2d < 1 else math.inf
        if r2dz >= 1.0 or strength >= 1.0:
            entry.update(available=False, reason=f"an omitted cause {k:g} times as strong as '{name}' is impossible")
            bounds.append(entry)
            continue
        r2yz = ((math.sqrt(k) + math.sqrt(strength)) / math.sqrt(1.0 - strength)) ** 2 * r2y / (1.0 - r2y)
        capped = r2yz > 1.0
        r2yz = min(r2yz, 1.0)
        entry.update(available=True, r2dz_x=r2dz, r2yz_dx=r2yz, r2yz_dx_capped=capped)
        entry.update(regression.adjusted(r2dz, r2yz, alpha=options.alpha))
        bounds.append(entry)
    return bounds


def contour_grid(regression: FocalRegression, *, bounds: list[dict[str, object]], alpha: float) -> dict[str, object]:
    """Adjusted estimate and t over a grid of the two partial R^2 values (for a contour plot).

    ``adjusted_estimate[i][j]`` is at ``r2dz_x[i]`` and ``r2yz_dx[j]``.
    """
    strongest = [max(float(b["r2dz_x"]), float(b["r2yz_dx"])) for b in bounds if b.get("available")]
    limit = min(CONTOUR_MAX_LIMIT, max([CONTOUR_MIN_LIMIT, *(1.2 * s for s in strongest)]))
    axis = np.linspace(0.0, limit, CONTOUR_POINTS)
    r2dz, r2yz = np.meshgrid(axis, axis, indexing="ij")
    bias = regression.std_error * math.sqrt(regression.df) * np.sqrt(r2yz * r2dz / (1.0 - r2dz))
    estimates = math.copysign(1.0, regression.estimate) * (abs(regression.estimate) - bias)
    std_errors = regression.std_error * np.sqrt((1.0 - r2yz) / (1.0 - r2dz)) * math.sqrt(regression.df / (regression.df - 1))
    with np.errstate(divide="ignore", invalid="ignore"):
        t_values = np.where(std_errors > 0, estimates / std_errors, np.nan)
    return {
        "r2dz_x": axis,
        "r2yz_dx": axis,
        "adjusted_estimate": estimates,
        "adjusted_t": t_values,
        "critical_t": float(stats.t.ppf(1.0 - alpha / 2, regression.df - 1)),
    }


def with_analysed_fit(results: dict[str, list[TestResult]], code: str) -> dict[str, list[TestResult]]:
    """Omitted-cause analyses marked with the estimator whose regression they analyse (key ``estimator``).

    The checklist judges them only when that estimator is the claimed one, and
    names it in the evidence either way.
    """
    return {
        key: [dataclasses.replace(result, details={**result.details, "estimator": code}) for result in entries]
        for key, entries in results.items()
    }
