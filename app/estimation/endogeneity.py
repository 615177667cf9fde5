"""Is the focal regressor endogenous? Durbin, Wu-Hausman and the control-function test.

Let e0 be the OLS residual (focal regressors treated as exogenous) and e the
2SLS residual. With ``P_[Zf,X]`` the projection on the instruments and the
focal regressors, and ``delta = e0'P_[Zf,X] e0 - e'P_Zf e``:

* Durbin (1954): ``delta / (e0'e0 / n)``, chi-squared with p degrees of freedom;
* Wu (1973) - Hausman (1978): ``(delta / p) / ((e0'e0 - delta) / (n - k - 2p))``,
  F(p, n - k - 2p), with k the exogenous regressors (and absorbed effects).

Both assume homoskedastic errors (formulas as in Baum, Schaffer & Stillman
2003 and linearmodels). The control-function (regression-based) test adds the
first-stage residuals ``v = X - P_Zf X`` to the OLS regression and tests their
coefficients with the claim's own variance estimator (Hausman 1978; Wooldridge
2010, sec. 6.3.1), so it is robust to heteroskedasticity or clustering; its
coefficient on v is the sign and size of the endogeneity. The residual
correlation ``corr(v_j, e)`` is reported per focal regressor.

References
----------
Durbin, J. (1954). Errors in variables. Review of the International
Statistical Institute 22, 23-32.
Wu, D.-M. (1973). Alternative tests of independence between stochastic
regressors and disturbances. Econometrica 41(4), 733-750.
Hausman, J. A. (1978). Specification tests in econometrics. Econometrica
46(6), 1251-1271.
Wooldridge, J. M. (2010). Econometric Analysis of Cross Section and Panel
Data, 2nd ed. MIT Press.
"""

from __future__ import annotations

import numpy as np

from app.estimation.covariance import VarianceEstimator
from app.estimation.findings import TestResult
from app.estimation.fits import LinearFit
from app.estimation.inference import chi2_p, f_p, wald_statistic
from app.estimation.linalg import SingularMatrixError
from app.estimation.moments import Moments

NULL = "the focal regressors are exogenous (OLS and 2SLS estimate the same effect)"
CONTROL_FUNCTION = "Control-function (regression-based) endogeneity test"
CONTROL_FUNCTION_SOURCE = "Hausman (1978); Wooldridge (2010), sec. 6.3.1"
COLLINEAR_RESIDUALS = (
    "the focal regressors' first-stage residuals are linearly dependent (one focal regressor equals "
    "another plus a combination of instruments), so their exogeneity cannot be tested separately"
)


def endogeneity_tests(
    moments: Moments, variance: VarianceEstimator, *, ols: LinearFit, tsls: LinearFit, names: list[str]
) -> dict[str, TestResult]:
    """Durbin, Wu-Hausman, the control-function test and the residual correlation."""
    results = durbin_wu_hausman(moments, ols=ols, tsls=tsls)
    try:
        results["control_function"] = control_function_test(moments, variance, names=names)
    except SingularMatrixError:
        results["control_function"] = TestResult.undefined(
            CONTROL_FUNCTION, COLLINEAR_RESIDUALS, source=CONTROL_FUNCTION_SOURCE, null_hypothesis=NULL
        )
    results["residual_correlation"] = residual_correlation(moments, tsls=tsls, names=names)
    return results


def durbin_wu_hausman(moments: Moments, *, ols: LinearFit, tsls: LinearFit) -> dict[str, TestResult]:
    """The two homoskedastic tests, from the OLS and 2SLS residuals' projections."""
    layout = moments.layout
    p = layout.n_endog
    n = moments.n_obs
    try:
        projected_ols = moments.projected_ss(ols.residual, layout.instruments + layout.endog)
    except SingularMatrixError:
        return {
            key: TestResult.undefined(name, COLLINEAR_RESIDUALS, source=source, null_hypothesis=NULL)
            for key, name, source in (
                ("durbin", "Durbin endogeneity test", "Durbin (1954)"),
                ("wu_hausman", "Wu-Hausman endogeneity test", "Wu (1973); Hausman (1978)"),
            )
        }
    projected_iv = moments.projected_ss(tsls.residual, layout.instruments)
    delta = projected_ols - projected_iv
    total_ols = moments.quad(ols.residual, ols.residual)
    durbin = delta / (total_ols / n)
    df_den = n - len(layout.exog) - moments.absorbed_dof - 2 * p
    wu = (delta / p) / ((total_ols - delta) / df_den)
    homoskedastic = "assumes homoskedastic errors"
    return {
        "durbin": TestResult(
            name="Durbin endogeneity test",
            statistic=durbin,
            p_value=chi2_p(durbin, p),
            df=p,
            distribution="chi2",
            null_hypothesis=NULL,
            source="Durbin (1954)",
            details={"assumption": homoskedastic},
        ),
        "wu_hausman": TestResult(
            name="Wu-Hausman endogeneity test",
            statistic=wu,
            p_value=f_p(wu, p, df_den),
            df=[p, df_den],
            distribution="F",
            null_hypothesis=NULL,
            source="Wu (1973); Hausman (1978)",
            details={"assumption": homoskedastic},
        ),
    }


def control_function_test(moments: Moments, variance: VarianceEstimator, *, names: list[str]) -> TestResult:
    """Wald test of the first-stage residuals added to the OLS regression."""
    layout = moments.layout
    p = layout.n_endog
    select_r = layout.selector(layout.regressors)
    first_stage_residuals = layout.selector(layout.endog) - moments.first_stage_map[:, :p]
    score_map = np.hstack([select_r, first_stage_residuals])
    params, bread = moments.regress(moments.column(0), score_map)
    fit = LinearFit(
        code="control_function_regression",
        terms=[*names, *(f"first-stage residual of {x}" for x in names[:p])],
        params=params,
        bread=bread,
        score_map=score_map,
        residual=moments.residual_vector(moments.column(0), score_map, params),
        n_params=score_map.shape[1] + moments.absorbed_dof,
    )
    covariance = variance.covariance(fit)
    tested = slice(len(layout.regressors), len(layout.regressors) + p)
    name = CONTROL_FUNCTION
    source = CONTROL_FUNCTION_SOURCE
    try:
        wald = wald_statistic(params[tested], covariance[tested, tested])
    except SingularMatrixError:
        return TestResult.undefined(name, "the covariance of the residual coefficients is singular", source=source, null_hypothesis=NULL)
    std_errors = np.sqrt(np.diag(covariance)[tested])
    return TestResult(
        name=name,
        statistic=wald,
        p_value=chi2_p(wald, p),
        df=p,
        distribution="chi2",
        null_hypothesis=NULL,
        source=source,
        details={
            "variance": variance.kind.value,
            "residual_coefficients": [
                {"regressor": x, "estimate": float(b), "std_error": float(s)}
                for x, b, s in zip(names[:p], params[tested], std_errors)
            ],
        },
    )


def residual_correlation(moments: Moments, *, tsls: LinearFit, names: list[str]) -> TestResult:
    """``corr(v_j, e)`` between each first-stage residual and the 2SLS residual."""
    layout = moments.layout
    p = layout.n_endog
    structural = tsls.residual
    entries = []
    for j, position in enumerate(layout.endog):
        fitted = moments.first_stage_map[:, j]
        first_stage = moments.column(position) - np.concatenate([[0.0], fitted])
        covariance = moments.quad(first_stage, structural)
        correlation = covariance / np.sqrt(moments.quad(first_stage, first_stage) * moments.quad(structural, structural))
        entries.append({"regressor": names[j], "correlation": float(correlation)})
    return TestResult(
        name="Correlation of first-stage and structural residuals",
        statistic=entries[0]["correlation"] if p == 1 else None,
        p_value=None,
        df=None,
        distribution=None,
        null_hypothesis="",
        source="Wooldridge (2010), sec. 6.3.1 (the control-function reading of endogeneity)",
        details={"by_regressor": entries},
    )
