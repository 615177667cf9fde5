"""Coefficient tables and Wald tests from an estimate and its covariance."""

from __future__ import annotations

import numpy as np
from scipy import stats

from app.estimation.findings import EstimateRow
from app.estimation.fits import LinearFit
from app.estimation.linalg import inverse_pd

CONFIDENCE_LEVEL = 0.95


def coefficient_rows(fit: LinearFit, covariance: np.ndarray, *, df: int | None) -> list[EstimateRow]:
    """Estimate, standard error, t (or z), two-sided p-value and 95% interval per term.

    With ``df`` given the reference distribution is Student's t with ``df``
    degrees of freedom, otherwise the standard normal.
    """
    std_errors = np.sqrt(np.clip(np.diag(covariance), 0.0, None))
    critical = critical_value(df)
    rows = []
    for term, estimate, std_error in zip(fit.terms, fit.params, std_errors):
        statistic = estimate / std_error if std_error > 0 else float("nan")
        rows.append(
            EstimateRow(
                estimator=fit.code,
                term=term,
                estimate=float(estimate),
                std_error=float(std_error),
                statistic=float(statistic),
                p_value=two_sided_p(statistic, df),
                ci_low=float(estimate - critical * std_error),
                ci_high=float(estimate + critical * std_error),
                df=df,
                distribution="t" if df is not None else "normal",
            )
        )
    return rows


def critical_value(df: int | None, level: float = CONFIDENCE_LEVEL) -> float:
    """Two-sided critical value of t(df), or of the normal when df is None."""
    upper = 0.5 + level / 2
    return float(stats.t.ppf(upper, df) if df is not None else stats.norm.ppf(upper))


def two_sided_p(statistic: float, df: int | None) -> float:
    """Two-sided p-value of a t (or z) statistic."""
    if not np.isfinite(statistic):
        return float("nan")
    tail = stats.t.sf(abs(statistic), df) if df is not None else stats.norm.sf(abs(statistic))
    return float(2 * tail)


def wald_statistic(estimate: np.ndarray, covariance: np.ndarray) -> float:
    """``b' V^{-1} b``; raises SingularMatrixError when V is not positive definite."""
    return float(estimate @ inverse_pd(covariance) @ estimate)


def chi2_p(statistic: float, df: float) -> float:
    """Upper-tail p-value of a chi-squared statistic."""
    return float(stats.chi2.sf(statistic, df))


def f_p(statistic: float, df_num: float, df_den: float) -> float:
    """Upper-tail p-value of an F statistic."""
    return float(stats.f.sf(statistic, df_num, df_den))

