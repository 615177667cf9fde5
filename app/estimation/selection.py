"""Samples and treatments that people select into: Heckman's two-step and the control function.

**Self-selected sample** (a ``selected`` indicator; the outcome is seen only
when it is 1). Heckman (1979): a probit of selection on ``z`` (the outcome
regressors plus the selection covariates) gives the index ``t = z'g`` and the
inverse Mills ratio ``lambda = phi(t)/Phi(t)``; OLS of y on ``[x, lambda]`` over
the selected rows estimates ``b`` and ``b_lambda = rho sigma``. With
``delta_i = lambda_i (lambda_i + t_i)``:

    sigma^2 = e'e / n_1 + b_lambda^2 mean(delta),   rho = b_lambda / sigma,
    V = sigma^2 (X*'X*)^{-1} [X*'(I - rho^2 D) X* + Q] (X*'X*)^{-1},
    Q = rho^2 (X*'D Z) V_g (Z'D X*),

with ``X* = [x, lambda]``, ``D = diag(delta)`` and ``V_g`` the probit covariance
(Heckman 1979; Greene 2003, sec. 22.4). The test of no selection is the t test
of ``b_lambda = 0`` with the claim's own variance estimator, valid under the
null where the generated-regressor correction vanishes (Wooldridge 2010,
sec. 19.6.1). Without a variable excluded from the outcome equation the model
is identified only by the probit's curvature; the findings warn.

**Self-selected binary treatment** (no ``selected`` column; ``instruments``
move the treatment). The control function of Heckman (1978) for the
endogenous-dummy model: a probit of the treatment D on the instruments and
controls, the generalized residual
``r = D phi(t)/Phi(t) - (1 - D) phi(t)/(1 - Phi(t))``, and OLS of y on
``[D, w, r]``; under joint normality ``E(u | D, z) = rho sigma r`` so the
coefficient of D is consistent (Wooldridge 2010, ch. 21). Its covariance is
the two-step sandwich of Newey (1984) / Murphy & Topel (1985) with the
corrected score ``psi_i = x_i e_i - G H^{-1} s_i`` (s the probit score, H its
Hessian, ``G = sum_i (e_i j - b_r x_i) dr_i/dg'`` with j selecting the
residual's row: the exact derivative of the second step's moments), summed by
row (HC1 factor) or by cluster as the claim states.

References
----------
Heckman, J. J. (1978). Dummy endogenous variables in a simultaneous equation
system. Econometrica 46(4), 931-959.
Heckman, J. J. (1979). Sample selection bias as a specification error.
Econometrica 47(1), 153-161.
Greene, W. H. (2003). Econometric Analysis, 5th ed., ch. 22. Prentice Hall.
Murphy, K. M. and Topel, R. H. (1985). Estimation and inference in two-step
econometric models. Journal of Business & Economic Statistics 3(4), 370-379.
Newey, W. K. (1984). A method of moments interpretation of sequential
estimators. Economics Letters 14(2-3), 201-206.
Wooldridge, J. M. (2010). Econometric Analysis of Cross Section and Panel
Data, 2nd ed., ch. 19 and 21. MIT Press.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from app.data.design import DesignMatrices, build_design, check_columns_exist, numeric_values
from app.errors import DesignError
from app.estimation.covariance import VarianceEstimator, variance_estimator
from app.estimation.findings import EstimateRow, EstimatorSummary, Findings, TestResult
from app.estimation.fits import LinearFit, refuse_exact_fit
from app.estimation.inference import coefficient_rows, critical_value, two_sided_p
from app.estimation.kclass import kclass
from app.estimation.moments import Layout, Moments
from app.estimation.probit import ProbitFit, fit_probit, mills_ratio
from app.estimation.sensitivity import benchmark_groups, sensitivity_diagnostics, with_analysed_fit
from app.spec import ClaimSpec, CovarianceKind, Design

ESTIMATORS: dict[str, tuple[str, str, str]] = {
    "heckman_two_step": (
        "Heckman two-step",
        "Adds the inverse Mills ratio of a selection probit to the outcome regression on the selected rows, "
        "with Heckman's corrected standard errors.",
        "Heckman (1979); Greene (2003), sec. 22.4",
    ),
    "control_function": (
        "Control function (probit first stage)",
        "Adds the generalized residual of a probit for the binary treatment to the outcome regression, "
        "with two-step corrected standard errors.",
        "Heckman (1978); Wooldridge (2010), ch. 21; Murphy & Topel (1985)",
    ),
}
NAIVE = {
    "sample": (
        "OLS on the selected rows",
        "OLS on the rows whose outcome is seen: biased when the choice to be seen depends on the outcome's error.",
        "Heckman (1979)",
    ),
    "treatment": (
        "OLS",
        "OLS with the treatment as if assigned at random: biased when people choose it for reasons tied to the outcome.",
        "Heckman (1978)",
    ),
}
MILLS = "inverse Mills ratio"
RESIDUAL = "generalized residual"
SELECTION_SOURCE = "Heckman (1979); Wooldridge (2010), sec. 19.6.1"
SELECTION_NULL = "the outcome's error is unrelated to selection (rho = 0): OLS on the selected rows is consistent"
TREATMENT_NULL = "the treatment is unrelated to the outcome's error (rho = 0): OLS is consistent"


@dataclass(frozen=True)
class SecondStep:
    """An OLS step on a stacked array, with its moments and the claim's variance estimator."""

    fit: LinearFit
    moments: Moments
    variance: VarianceEstimator
    data: np.ndarray


def refit_selection(frame: pd.DataFrame, spec: ClaimSpec, provenance: dict[str, Any]) -> Findings:
    """Heckman two-step when a ``selected`` column is named, else the control function for the treatment."""
    if spec.selected:
        return _refit_selected_sample(frame, spec, provenance)
    return _refit_selected_treatment(frame, spec, provenance)


def _refit_selected_sample(frame: pd.DataFrame, spec: ClaimSpec, provenance: dict[str, Any]) -> Findings:
    check_columns_exist(frame, [spec.outcome])
    outcome_regressors = [*spec.focal, *spec.controls]
    extra = [c for c in spec.selection_covariates if c not in outcome_regressors]
    probit_spec = spec.model_copy(
        update={"design": Design.IV, "outcome": spec.selected, "instruments": [], "controls": [*spec.controls, *extra], "benchmarks": []}
    )
    design = build_design(frame, probit_spec)
    selected = _indicator(design.data[:, 0], spec.selected)
    outcome = numeric_values(frame[spec.outcome], spec.outcome)[design.rows]
    if np.any(np.isinf(outcome[selected == 1])):
        raise DesignError(f"column '{spec.outcome}' holds infinite values in selected rows; recode them as missing")
    unusable = (selected == 1) & np.isnan(outcome)
    keep = ~unusable
    selected, outcome = selected[keep], outcome[keep]
    if not 0 < selected.sum() < selected.size:
        raise DesignError(
            f"selection indicator '{spec.selected}' is {int(selected[0])} in every usable row: "
            "there is no selection to model"
        )
    probit_names = design.columns[1:]
    probit_data = design.data[keep, 1:]
    probit = fit_probit(selected, probit_data, names=probit_names, role="the selection equation")
    chosen = selected == 1
    outcome_columns = [j for j, name in enumerate(probit_names) if name not in extra]
    index = probit.index[chosen]
    mills = mills_ratio(index)
    stacked = np.column_stack([outcome[chosen], probit_data[chosen][:, outcome_columns], mills])
    clusters = [pd.factorize(codes[keep][chosen])[0].astype(np.int64) for codes in design.clusters]
    p = len(design.endogenous)
    terms = [probit_names[j] for j in outcome_columns]
    naive = _ols_step(stacked[:, :-1], n_endog=p, terms=terms, code="ols", spec=spec, clusters=clusters)
    refuse_exact_fit(naive.data, naive.fit, outcome=spec.outcome, model="outcome equation on the selected rows")
    second = _ols_step(stacked, n_endog=p, terms=[*terms, MILLS], code="heckman_two_step", spec=spec, clusters=clusters)
    heckman = heckman_covariance(second, index=index, mills=mills, probit=probit, probit_regressors=probit_data[chosen])

    excluded = [name for name in probit_names if name in extra]
    warnings = list(design.sample.warnings)
    if not excluded:
        warnings.append(
            "no variable is excluded from the outcome equation: the selection correction is identified only "
            "through the curvature of the probit, and its estimates are fragile"
        )
    if unusable.any():
        warnings.append(f"{int(unusable.sum()):,} selected row(s) have no value of '{spec.outcome}' and were left out")
    diagnostics: dict[str, Any] = {
        "selection": selection_test(second, heckman, probit=probit, names=probit_names, excluded=excluded, n_rows=selected.size),
    }
    diagnostics |= _sensitivity(naive, spec)
    rows = _rows(naive) + coefficient_rows(second.fit, heckman.covariance, df=None)
    sample = design.sample.to_dict() | {
        "selection": {
            "indicator": spec.selected,
            "rows": int(selected.size),
            "selected": int(chosen.sum()),
            "selected_without_outcome": int(unusable.sum()),
            "selection_equation": probit_names,
            "excluded_from_outcome_equation": excluded,
        }
    }
    return _findings(
        spec,
        provenance,
        design=dataclasses.replace(design, clusters=clusters),
        n_obs=int(chosen.sum()),
        sample=sample,
        variance=naive.variance,
        estimators=[_summary(naive, *NAIVE["sample"]), _summary(second, *ESTIMATORS["heckman_two_step"])],
        rows=rows,
        diagnostics=diagnostics,
        warnings=warnings,
    )


def _refit_selected_treatment(frame: pd.DataFrame, spec: ClaimSpec, provenance: dict[str, Any]) -> Findings:
    if len(spec.focal) != 1:
        raise DesignError("the control function handles one binary focal treatment; the claim names several")
    design = build_design(frame, spec.model_copy(update={"design": Design.IV}))
    p, q = 1, len(design.instruments)
    treatment = _indicator(design.data[:, 1], design.endogenous[0])
    probit_data = design.data[:, 1 + p :]
    probit_names = design.columns[1 + p :]
    probit = fit_probit(treatment, probit_data, names=probit_names, role="the treatment equation")
    residual = probit.generalized_residual(treatment)
    exogenous = design.data[:, 1 + p + q :]
    stacked = np.column_stack([design.data[:, : 1 + p], exogenous, residual])
    terms = [*design.endogenous, *design.exogenous]
    naive = _ols_step(stacked[:, :-1], n_endog=p, terms=terms, code="ols", spec=spec, clusters=design.clusters)
    refuse_exact_fit(naive.data, naive.fit, outcome=spec.outcome, model="outcome equation")
    second = _ols_step(stacked, n_endog=p, terms=[*terms, RESIDUAL], code="control_function", spec=spec, clusters=design.clusters)
    covariance = control_function_covariance(
        second, treatment=treatment, probit=probit, probit_regressors=probit_data, clusters=design.clusters, kind=spec.covariance
    )
    diagnostics: dict[str, Any] = {"treatment_selection": treatment_test(second, probit=probit, names=probit_names)}
    diagnostics |= _sensitivity(naive, spec)
    sample = design.sample.to_dict() | {
        "treatment": {
            "column": design.endogenous[0],
            "treated": int(treatment.sum()),
            "rows": int(treatment.size),
            "treatment_equation": probit_names,
        }
    }
    return _findings(
        spec,
        provenance,
        design=design,
        n_obs=design.n_obs,
        sample=sample,
        variance=naive.variance,
        estimators=[_summary(naive, *NAIVE["treatment"]), _summary(second, *ESTIMATORS["control_function"])],
        rows=_rows(naive) + coefficient_rows(second.fit, covariance, df=second.variance.inference_df(second.fit.n_params)),
        diagnostics=diagnostics,
        warnings=list(design.sample.warnings),
    )


@dataclass(frozen=True)
class HeckmanCovariance:
    """Heckman's corrected covariance and the quantities it uses."""

    covariance: np.ndarray
    sigma: float
    rho: float
    mean_delta: float


def heckman_covariance(
    second: SecondStep, *, index: np.ndarray, mills: np.ndarray, probit: ProbitFit, probit_regressors: np.ndarray
) -> HeckmanCovariance:
    """Heckman (1979) corrected covariance of the second step (formula in the module docstring)."""
    regressors = second.data[:, 1:]
    n_selected = regressors.shape[0]
    delta = mills * (mills + index)
    coefficient = float(second.fit.params[-1])
    residual_ss = second.moments.quad(second.fit.residual, second.fit.residual)
    sigma2 = residual_ss / n_selected + coefficient**2 * float(delta.mean())
    rho2 = coefficient**2 / sigma2
    weighted = regressors * delta[:, None]
    cross_delta = regressors.T @ weighted
    cross_z = weighted.T @ probit_regressors
    bread = second.fit.bread
    middle = second.moments.vv - rho2 * cross_delta + rho2 * cross_z @ probit.covariance @ cross_z.T
    covariance = sigma2 * bread @ middle @ bread
    return HeckmanCovariance(
        covariance=(covariance + covariance.T) / 2,
        sigma=math.sqrt(sigma2),
        rho=coefficient / math.sqrt(sigma2),
        mean_delta=float(delta.mean()),
    )


def control_function_covariance(
    second: SecondStep,
    *,
    treatment: np.ndarray,
    probit: ProbitFit,
    probit_regressors: np.ndarray,
    clusters: list[np.ndarray],
    kind: CovarianceKind,
) -> np.ndarray:
    """Two-step sandwich with the probit's estimation error carried into the scores (Newey 1984)."""
    regressors = second.data[:, 1:]
    residual = second.data @ second.fit.residual
    sign = 2.0 * treatment - 1.0
    generalized = probit.generalized_residual(treatment)
    mills = sign * generalized
    slope = -mills * (sign * probit.index + mills)
    jacobian = -float(second.fit.params[-1]) * (regressors * slope[:, None]).T @ probit_regressors
    jacobian[-1] += (residual * slope) @ probit_regressors
    influence = jacobian @ np.linalg.solve(probit.hessian, (probit_regressors * generalized[:, None]).T)
    scores = regressors * residual[:, None] - influence.T
    n, k = regressors.shape
    if kind is CovarianceKind.CLUSTER and clusters:
        meat = np.zeros((k, k))
        signs = [1.0] * len(clusters)
        groups = list(clusters)
        if len(clusters) == 2:
            pairs, _ = pd.factorize(pd.MultiIndex.from_arrays(clusters))
            groups.append(pairs.astype(np.int64))
            signs.append(-1.0)
        for sign_g, codes in zip(signs, groups):
            g = int(codes.max()) + 1
            sums = np.zeros((g, k))
            np.add.at(sums, codes, scores)
            meat += sign_g * g / (g - 1) * sums.T @ sums
        meat *= (n - 1) / (n - k)
    else:
        meat = n / (n - k) * scores.T @ scores
    bread = second.fit.bread
    covariance = bread @ meat @ bread
    return (covariance + covariance.T) / 2


def selection_test(
    second: SecondStep, heckman: HeckmanCovariance, *, probit: ProbitFit, names: list[str], excluded: list[str], n_rows: int
) -> TestResult:
    """The t test of no selection, with rho, sigma and the selection equation."""
    fit, variance = second.fit, second.variance
    covariance = variance.covariance(fit)
    estimate = float(fit.params[-1])
    std_error = math.sqrt(covariance[-1, -1])
    df = variance.inference_df(fit.n_params)
    statistic = estimate / std_error
    details: dict[str, Any] = {
        "inverse_mills_coefficient": estimate,
        "inverse_mills_std_error_corrected": math.sqrt(heckman.covariance[-1, -1]),
        "inverse_mills_std_error_test": std_error,
        "rho": heckman.rho,
        "sigma": heckman.sigma,
        "excluded_from_outcome_equation": excluded,
        "selection_equation": probit_table(probit, names),
        "selection_log_likelihood": probit.log_likelihood,
        "selection_iterations": probit.iterations,
        "rows": n_rows,
        "selected": int(second.data.shape[0]),
        "reading": (
            "rho is the correlation between the errors of the selection and outcome equations; the test asks "
            "whether selection is ignorable (the t statistic uses the claim's variance estimator, valid under "
            "the null)"
        ),
    }
    if abs(heckman.rho) > 1:
        details["rho_note"] = "the two-step rho lies outside [-1, 1]: the model fits these data poorly"
    if not excluded:
        details["identification_warning"] = (
            "no selection covariate is excluded from the outcome equation: identification rests only on the "
            "normal distribution's curvature"
        )
    return TestResult(
        name="Test of no sample selection (inverse Mills ratio)",
        statistic=statistic,
        p_value=two_sided_p(statistic, df),
        df=df,
        distribution="t" if df is not None else "normal",
        null_hypothesis=SELECTION_NULL,
        source=SELECTION_SOURCE,
        details=details,
    )


def treatment_test(second: SecondStep, *, probit: ProbitFit, names: list[str]) -> TestResult:
    """The t test of the generalized residual's coefficient: is the treatment chosen for outcome-related reasons?"""
    fit, variance = second.fit, second.variance
    covariance = variance.covariance(fit)
    estimate = float(fit.params[-1])
    std_error = math.sqrt(covariance[-1, -1])
    df = variance.inference_df(fit.n_params)
    statistic = estimate / std_error
    return TestResult(
        name="Test of an exogenous treatment (generalized residual)",
        statistic=statistic,
        p_value=two_sided_p(statistic, df),
        df=df,
        distribution="t",
        null_hypothesis=TREATMENT_NULL,
        source="Heckman (1978); Wooldridge (2010), ch. 21",
        details={
            "generalized_residual_coefficient": estimate,
            "generalized_residual_std_error": std_error,
            "treatment_equation": probit_table(probit, names),
            "treatment_log_likelihood": probit.log_likelihood,
            "reading": "the coefficient estimates rho * sigma: its sign tells whether those who choose the treatment "
            "would have had higher (positive) or lower outcomes anyway",
        },
    )


def probit_table(probit: ProbitFit, names: list[str]) -> list[dict[str, Any]]:
    """Probit coefficients with z statistics and 95% intervals (normal reference)."""
    critical = critical_value(None)
    table = []
    for name, estimate, variance in zip(names, probit.params, np.diag(probit.covariance)):
        std_error = math.sqrt(variance)
        statistic = estimate / std_error
        table.append(
            {
                "term": name,
                "estimate": float(estimate),
                "std_error": std_error,
                "statistic": statistic,
                "p_value": two_sided_p(statistic, None),
                "ci_low": float(estimate - critical * std_error),
                "ci_high": float(estimate + critical * std_error),
            }
        )
    return table


def _indicator(values: np.ndarray, column: str) -> np.ndarray:
    """The column as 0/1, or a DesignError naming the other values found."""
    valid = (values == 0) | (values == 1)
    if not valid.all():
        others = ", ".join(f"{v:g}" for v in np.unique(values[~valid])[:5])
        raise DesignError(f"'{column}' must be a 0/1 indicator; it also holds {others}")
    return values.astype(np.float64)


def _ols_step(
    stacked: np.ndarray, *, n_endog: int, terms: list[str], code: str, spec: ClaimSpec, clusters: list[np.ndarray]
) -> SecondStep:
    data = np.ascontiguousarray(stacked)
    layout = Layout(n_endog=n_endog, n_instr=0, n_exog=data.shape[1] - 1 - n_endog)
    moments = Moments(gram=data.T @ data, n_obs=data.shape[0], layout=layout)
    if data.shape[0] <= layout.width - 1:
        raise DesignError(f"{data.shape[0]:,} rows for {layout.width - 1} coefficients in the outcome equation")
    variance = variance_estimator(spec.covariance, moments, data, clusters)
    return SecondStep(fit=kclass(moments, kappa=0.0, code=code, terms=terms), moments=moments, variance=variance, data=data)


def _rows(step: SecondStep) -> list[EstimateRow]:
    return coefficient_rows(step.fit, step.variance.covariance(step.fit), df=step.variance.inference_df(step.fit.n_params))


def _summary(step: SecondStep, name: str, description: str, source: str) -> EstimatorSummary:
    df_resid = step.moments.n_obs - step.fit.n_params
    return EstimatorSummary(
        code=step.fit.code,
        name=name,
        description=description,
        n_params=step.fit.n_params,
        df_resid=df_resid,
        residual_std=max(0.0, step.moments.quad(step.fit.residual, step.fit.residual) / df_resid) ** 0.5,
        source=source,
    )


def _sensitivity(naive: SecondStep, spec: ClaimSpec) -> dict[str, Any]:
    """The omitted-cause analyses of the naive OLS fit (the fit a claim without correction rests on)."""
    columns = [spec.outcome, *naive.fit.terms]
    baseline = ["(intercept)"] if "(intercept)" in columns else []
    results = sensitivity_diagnostics(
        naive.moments,
        columns=columns,
        focal=list(spec.focal),
        baseline=baseline,
        benchmarks=benchmark_groups(spec.benchmarks, columns),
        options=spec.sensitivity,
    )
    return with_analysed_fit(results, naive.fit.code)


def _findings(
    spec: ClaimSpec,
    provenance: dict[str, Any],
    *,
    design: DesignMatrices,
    n_obs: int,
    sample: dict[str, Any],
    variance: VarianceEstimator,
    estimators: list[EstimatorSummary],
    rows: list[EstimateRow],
    diagnostics: dict[str, Any],
    warnings: list[str],
) -> Findings:
    covariance = variance.summary() | {
        "inference": "Student t with G - 1 degrees of freedom (G clusters)" if design.clusters else "Student t with n - k degrees of freedom",
        "clusters": [{"column": n, "count": int(c.max()) + 1} for n, c in zip(design.cluster_names, design.clusters)],
        "two_step": (
            "heckman_two_step uses Heckman's (1979) corrected covariance with normal inference; the other rows "
            "use the claim's variance estimator"
            if spec.selected
            else "control_function uses the two-step corrected sandwich (Newey 1984) summed by row or cluster"
        ),
    }
    return Findings(
        n_obs=n_obs,
        design=spec.design.value,
        outcome=spec.outcome,
        focal=list(spec.focal),
        sample=sample,
        covariance=covariance,
        estimators=estimators,
        estimates=rows,
        diagnostics=diagnostics,
        warnings=warnings,
        claim=spec.model_dump(mode="json"),
        provenance=provenance,
    )
