"""First-stage and reduced-form regressions and the strength of the excluded instruments.

For each focal regressor x_j the first stage regresses x_j on ``Zf = [Z, W]``.
Reported: the coefficients on the excluded instruments, the partial R^2 of the
excluded instruments, Shea's partial R^2, and the test that the excluded
coefficients are all zero.

The test statistic is the Wald statistic of the q excluded coefficients,
computed with the claim's own variance estimator (including its small-sample
factor), divided by q and compared with F(q, df): df is n - L (L instruments
including exogenous regressors and absorbed effects) or G - 1 when clustered.
Under the homoskedastic estimator it equals the classical F statistic
``[(RSS_W - RSS_Z)/q] / [RSS_Z/(n - L)]``. Under robust or cluster variances it
is a robust Wald F, not the classical F; the Stock-Yogo critical values assume
the classical one.

Shea's partial R^2 for regressor j (Shea 1997), in the form of Godfrey (1999):
``[(X~'X~)^{-1}]_jj / [(Xh~'Xh~)^{-1}]_jj`` with ``X~ = M_W X`` and
``Xh~ = M_W P_Zf X``; with one focal regressor it equals the partial R^2.

References
----------
Bound, J., Jaeger, D. A. and Baker, R. M. (1995). Problems with instrumental
variables estimation when the correlation between the instruments and the
endogenous explanatory variable is weak. JASA 90(430), 443-450.
Shea, J. (1997). Instrument relevance in multivariate linear models: a simple
measure. Review of Economics and Statistics 79(2), 348-352.
Godfrey, L. G. (1999). Instrument relevance in multivariate linear models.
Review of Economics and Statistics 81(3), 550-552.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from app.estimation.covariance import VarianceEstimator
from app.estimation.findings import TestResult
from app.estimation.fits import LinearFit
from app.estimation.inference import coefficient_rows, f_p, wald_statistic
from app.estimation.linalg import SingularMatrixError, inverse_pd
from app.estimation.moments import Moments

SOURCE_F = "Bound, Jaeger & Baker (1995); Wald form with the claim's variance estimator"
SOURCE_SHEA = "Shea (1997); Godfrey (1999)"


def instrument_regression(moments: Moments, *, dependent: int, code: str, terms: list[str]) -> LinearFit:
    """Regression of column ``dependent`` of the stacked array on all instruments ``[Z, W]``."""
    layout = moments.layout
    score_map = layout.selector(layout.instruments)
    params, bread = moments.regress(moments.column(dependent), score_map)
    return LinearFit(
        code=code,
        terms=terms,
        params=params,
        bread=bread,
        score_map=score_map,
        residual=moments.residual_vector(moments.column(dependent), score_map, params),
        n_params=len(layout.instruments) + moments.absorbed_dof,
    )


def excluded_wald(
    fit: LinearFit, variance: VarianceEstimator, *, n_excluded: int, name: str, null: str, source: str
) -> tuple[TestResult, np.ndarray]:
    """Wald F test that the coefficients on the excluded instruments are zero."""
    covariance = variance.covariance(fit)
    block = covariance[:n_excluded, :n_excluded]
    df_den = variance.inference_df(fit.n_params)
    try:
        wald = wald_statistic(fit.params[:n_excluded], block)
    except SingularMatrixError:
        return (
            TestResult.undefined(
                name,
                "the covariance of the instrument coefficients is singular (e.g. fewer clusters than "
                "instruments, or an instrument without variation in the sample)",
                source=source,
                null_hypothesis=null,
            ),
            covariance,
        )
    statistic = wald / n_excluded
    result = TestResult(
        name=name,
        statistic=statistic,
        p_value=f_p(statistic, n_excluded, df_den),
        df=[n_excluded, df_den],
        distribution="F",
        null_hypothesis=null,
        source=source,
        details={"wald_chi2": wald, "variance": variance.kind.value},
    )
    return result, covariance


def first_stages(moments: Moments, variance: VarianceEstimator, *, names: dict[str, list[str]]) -> list[TestResult]:
    """One first-stage result per focal regressor."""
    layout = moments.layout
    q = layout.n_instr
    shea = shea_partial_r2(moments)
    results = []
    for j, position in enumerate(layout.endog):
        regressor = names["endogenous"][j]
        fit = instrument_regression(
            moments, dependent=position, code=f"first_stage:{regressor}", terms=names["instruments"] + names["exogenous"]
        )
        test, covariance = excluded_wald(
            fit,
            variance,
            n_excluded=q,
            name=f"First-stage F for {regressor}",
            null=f"the excluded instruments do not predict {regressor}",
            source=SOURCE_F,
        )
        rows = coefficient_rows(fit, covariance, df=variance.inference_df(fit.n_params))[:q]
        partial = partial_r2(moments, position)
        details = dict(test.details)
        details.update(
            {
                "regressor": regressor,
                "partial_r2": partial,
                "shea_partial_r2": float(shea[j]),
                "coefficients": rows,
                "statistic_kind": _statistic_kind(variance),
                "source_shea": SOURCE_SHEA,
            }
        )
        results.append(dataclasses.replace(test, details=details))
    return results


def reduced_form(moments: Moments, variance: VarianceEstimator, *, names: dict[str, list[str]]) -> TestResult:
    """Regression of the outcome on all instruments; the joint test of the excluded ones."""
    q = moments.layout.n_instr
    fit = instrument_regression(moments, dependent=0, code="reduced_form", terms=names["instruments"] + names["exogenous"])
    test, covariance = excluded_wald(
        fit,
        variance,
        n_excluded=q,
        name="Reduced form: outcome on the instruments",
        null="the excluded instruments do not predict the outcome (no effect, if they are valid)",
        source="Chernozhukov & Hansen (2008); Angrist & Pischke (2009), sec. 4.1",
    )
    rows = coefficient_rows(fit, covariance, df=variance.inference_df(fit.n_params))[:q]
    details = dict(test.details)
    details["coefficients"] = rows
    return dataclasses.replace(test, details=details)


def partial_r2(moments: Moments, position: int) -> float:
    """Share of x's variation left by W that the excluded instruments explain."""
    layout = moments.layout
    column = moments.column(position)
    given_exog = moments.residual_ss(column, layout.exog)
    given_all = moments.residual_ss(column, layout.instruments)
    return float(1.0 - given_all / given_exog)


def shea_partial_r2(moments: Moments) -> np.ndarray:
    """Shea's partial R^2 for every focal regressor (Godfrey 1999 form)."""
    layout = moments.layout
    gram = moments.gram
    endog, exog, instruments = layout.endog, layout.exog, layout.instruments
    xx = gram[np.ix_(endog, endog)]
    x_on_w = _projection_cross(gram, endog, exog)
    x_on_z = _projection_cross(gram, endog, instruments)
    tilde = xx - x_on_w
    fitted_tilde = x_on_z - x_on_w
    return np.diag(inverse_pd(tilde)) / np.diag(inverse_pd(fitted_tilde))


def _projection_cross(gram: np.ndarray, columns: list[int], onto: list[int]) -> np.ndarray:
    if not onto:
        return np.zeros((len(columns), len(columns)))
    cross = gram[np.ix_(onto, columns)]
    return cross.T @ inverse_pd(gram[np.ix_(onto, onto)]) @ cross


def _statistic_kind(variance: VarianceEstimator) -> str:
    if variance.kind.value == "homoskedastic":
        return "classical F: [(RSS_W - RSS_Z)/q] / [RSS_Z/(n - L)]"
    return f"{variance.kind.value} Wald statistic divided by q, compared with F(q, df); not the classical F"
