"""Panels and multilevel data: pooled OLS, fixed effects, random effects and the tests between them.

With unit i observed T_i times and ``A = [y, X, Z, W]`` stacked over rows:

* **pooled OLS** ignores the units: OLS on ``A``.
* **within** (fixed effects) subtracts each unit's means, ``A - A_bar_i``,
  and fits OLS; the N unit effects use N degrees of freedom. Regressors that
  do not vary within units (the intercept, sex, a region) are absorbed by the
  unit effects and reported as such, not as an error.
* **within_2sls**: 2SLS on the within-transformed data when instruments are given.
* **random effects** (Swamy & Arora 1972, in the form for unbalanced panels
  with the harmonic mean of T_i, as in linearmodels and Stata's default):
  ``sigma2_e = SSR_within / (n - N - k_w)``, the between regression of the unit
  means gives ``sigma2_u = max(0, SSR_b / (N - k_b) - sigma2_e / T_h)``; then
  ``theta_i = 1 - sqrt(sigma2_e / (T_i sigma2_u + sigma2_e))`` and OLS on the
  quasi-demeaned ``A - theta_i A_bar_i``. Consistent only if the unit effects
  are uncorrelated with the regressors.
* **Mundlak / correlated random effects** (Mundlak 1978; Wooldridge 2010,
  sec. 10.7.3): pooled OLS of y on the regressors and the unit means of the
  time-varying ones, with standard errors clustered by unit. The means'
  coefficients are zero when random effects are consistent; their
  cluster-robust Wald test is the robust test of random against fixed effects.
  The coefficients of the time-varying regressors equal the within estimates.
* **Hausman (1978)**: ``(b_FE - b_RE)' [V_FE - V_RE]^{-1} (b_FE - b_RE)`` with the
  classical variances; it assumes random effects are efficient
  (homoskedastic, serially uncorrelated errors). When ``V_FE - V_RE`` is not
  positive definite the statistic uses its positive part and says so.

Variances follow the engine's conventions (:mod:`app.estimation.covariance`)
with the unit effects counted in k, except that with cluster-robust errors and
units nested within the clusters the unit effects are not counted
(Cameron & Miller 2015, sec. VI; Stata's ``xtreg, fe``; linearmodels' rule).

References
----------
Swamy, P. A. V. B. and Arora, S. S. (1972). The exact finite sample
properties of the estimators of coefficients in the error components
regression models. Econometrica 40(2), 261-275.
Mundlak, Y. (1978). On the pooling of time series and cross section data.
Econometrica 46(1), 69-85.
Hausman, J. A. (1978). Specification tests in econometrics. Econometrica
46(6), 1251-1271.
Wooldridge, J. M. (2010). Econometric Analysis of Cross Section and Panel
Data, 2nd ed., ch. 10. MIT Press.
Cameron, A. C. and Miller, D. L. (2015). A practitioner's guide to
cluster-robust inference. Journal of Human Resources 50(2), 317-372.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from app.data.collinearity import check_columns
from app.data.design import INTERCEPT, DesignMatrices, build_design
from app.data.fixed_effects import nested_within
from app.errors import DesignError
from app.estimation.covariance import ClusterRobust, Homoskedastic, VarianceEstimator, variance_estimator
from app.estimation.findings import EstimateRow, EstimatorSummary, Findings, TestResult
from app.estimation.first_stage import first_stages
from app.estimation.fits import LinearFit, refuse_exact_fit
from app.estimation.inference import chi2_p, coefficient_rows, f_p
from app.estimation.kclass import kclass
from app.estimation.linalg import SingularMatrixError, inverse_pd
from app.estimation.moments import Layout, Moments
from app.estimation.sensitivity import benchmark_groups, sensitivity_diagnostics, with_analysed_fit
from app.spec import ClaimSpec, CovarianceKind, Design

ESTIMATORS: dict[str, tuple[str, str, str]] = {
    "pooled_ols": (
        "Pooled OLS",
        "OLS on all rows, ignoring the units: biased if unit effects correlate with the regressors.",
        "Wooldridge (2010), sec. 7.8",
    ),
    "within": (
        "Fixed effects (within)",
        "OLS on deviations from each unit's means: removes every time-invariant unit effect, "
        "but cannot estimate regressors that do not vary within units.",
        "Wooldridge (2010), sec. 10.5",
    ),
    "random_effects": (
        "Random effects (Swamy-Arora GLS)",
        "Feasible GLS on quasi-demeaned data: efficient if, and consistent only if, the unit effects "
        "are uncorrelated with every regressor.",
        "Swamy & Arora (1972); Wooldridge (2010), sec. 10.4",
    ),
    "within_2sls": (
        "Fixed effects 2SLS",
        "2SLS on deviations from each unit's means: instruments for the focal regressors within units.",
        "Wooldridge (2010), sec. 11.4",
    ),
}

MUNDLAK_SOURCE = "Mundlak (1978); Wooldridge (2010), sec. 10.7.3"
MUNDLAK_NULL = "the unit effects are uncorrelated with the regressors (random effects are consistent)"
HAUSMAN_SOURCE = "Hausman (1978); Wooldridge (2010), sec. 10.7.3"
HAUSMAN_NULL = "fixed and random effects estimate the same coefficients (random effects are consistent)"


@dataclass(frozen=True)
class PanelStructure:
    """Units (and periods) of the estimation sample, rows sorted by unit."""

    codes: np.ndarray
    starts: np.ndarray
    counts: np.ndarray
    n_periods: int | None

    @property
    def n_units(self) -> int:
        return int(self.counts.size)

    @property
    def balanced(self) -> bool:
        return bool(self.counts.min() == self.counts.max())

    def unit_sums(self, data: np.ndarray) -> np.ndarray:
        """Column sums per unit (rows must be sorted by unit)."""
        return np.add.reduceat(data, self.starts, axis=0)

    def to_dict(self, unit: str, time: str | None) -> dict[str, Any]:
        return {
            "unit": unit,
            "time": time,
            "n_units": self.n_units,
            "n_periods": self.n_periods,
            "balanced": self.balanced,
            "rows_per_unit": {
                "min": int(self.counts.min()),
                "median": float(np.median(self.counts)),
                "max": int(self.counts.max()),
            },
            "units_with_one_row": int(np.count_nonzero(self.counts == 1)),
        }


@dataclass(frozen=True)
class WithinColumns:
    """Which columns of ``[y, X, Z, W]`` the within transform keeps, and why others left."""

    keep: list[int]
    layout: Layout
    names: list[str]
    absorbed: list[str]
    collinear: list[dict[str, Any]]

    @property
    def terms(self) -> list[str]:
        """Coefficient names of the within fits: the kept focal regressors, then the kept controls."""
        layout = self.layout
        return [*self.names[1 : 1 + layout.n_endog], *self.names[1 + layout.n_endog + layout.n_instr :]]


def refit_panel(frame: pd.DataFrame, spec: ClaimSpec, provenance: dict[str, Any]) -> Findings:
    """The panel design: pooled OLS, within, random effects, FE-2SLS, Mundlak and Hausman."""
    design = build_design(frame, spec.model_copy(update={"design": Design.IV}))
    structure, design = sort_by_unit(frame, spec, design)
    warnings = list(design.sample.warnings) + panel_warnings(structure)
    terms = [*design.endogenous, *design.exogenous]
    fitted = PanelFits()

    pooled_moments = _moments(design.gram, design, absorbed_dof=0)
    pooled_variance = variance_estimator(spec.covariance, pooled_moments, design.data, design.clusters)
    pooled = kclass(pooled_moments, kappa=0.0, code="pooled_ols", terms=terms)
    refuse_exact_fit(design.data, pooled, outcome=design.outcome, model="pooled model")
    fitted.add(pooled, pooled_moments, pooled_variance)

    unit_means = structure.unit_sums(design.data) / structure.counts[:, None]
    within_all = design.data - unit_means[structure.codes]
    columns = within_columns(within_all.T @ within_all, design)
    within_data = np.ascontiguousarray(within_all[:, columns.keep])
    del within_all
    within_moments = Moments(
        gram=within_data.T @ within_data, n_obs=design.n_obs, layout=columns.layout, absorbed_dof=structure.n_units
    )
    within_df = design.n_obs - structure.n_units - len(columns.layout.regressors)
    effects_in_k = not _units_nested_in_clusters(spec, structure, design)
    diagnostics: dict[str, Any] = {}
    if columns.layout.n_endog == 0:
        fitted.unavailable["within"] = "every focal regressor is constant within units, so the unit effects absorb it"
    elif within_df <= 0:
        fitted.unavailable["within"] = (
            f"{design.n_obs:,} rows for {structure.n_units:,} unit effects and {len(columns.layout.regressors)} "
            "coefficients: no residual degrees of freedom are left within units"
        )
    else:
        within_variance = variance_estimator(spec.covariance, within_moments, within_data, design.clusters)
        fit = kclass(within_moments, kappa=0.0, code="within", terms=columns.terms)
        refuse_exact_fit(within_data, fit, outcome=design.outcome, model="fixed-effects (within) model")
        fitted.add(_count_effects(fit, effects_in_k), within_moments, within_variance)
        diagnostics |= within_iv(fitted, within_moments, within_variance, columns, design, effects_in_k)

    random = random_effects(design, structure, unit_means=unit_means, within_moments=within_moments, within_df=within_df)
    if isinstance(random, str):
        fitted.unavailable["random_effects"] = random
    else:
        re_moments = _moments(random.data.T @ random.data, design, absorbed_dof=0)
        re_variance = variance_estimator(spec.covariance, re_moments, random.data, design.clusters)
        fitted.add(kclass(re_moments, kappa=0.0, code="random_effects", terms=terms), re_moments, re_variance)

    if "within" not in fitted.fits and design.instruments:
        fitted.unavailable["within_2sls"] = "no within fit: " + fitted.unavailable["within"]
    diagnostics["variance_components"] = (
        TestResult.not_applicable("Random-effects variance components", random, source=ESTIMATORS["random_effects"][2])
        if isinstance(random, str)
        else random.summary()
    )
    diagnostics["mundlak"] = mundlak_test(design, structure, spec=spec, unit_means=unit_means, columns=columns)
    diagnostics["hausman_fe_re"] = hausman_test(fitted)
    diagnostics.update(_sensitivity(fitted, columns, spec))

    if columns.absorbed:
        warnings.append(
            "constant within units, so absorbed by the unit effects and estimated only by pooled OLS and "
            "random effects: " + ", ".join(columns.absorbed)
        )
    for entry in columns.collinear:
        warnings.append(
            f"'{entry['column']}' is collinear with {', '.join(entry['partners'])} once unit means are removed; "
            "the within fits leave it out"
        )
    sample = design.sample.to_dict()
    sample["panel"] = structure.to_dict(spec.unit or "", spec.time) | {
        "absorbed_by_unit_effects": columns.absorbed,
        "collinear_within_units": columns.collinear,
    }
    sample["columns"] = {
        "outcome": design.outcome,
        "endogenous": design.endogenous,
        "instruments": design.instruments,
        "exogenous": design.exogenous,
        "within": columns.terms,
    }
    return Findings(
        n_obs=design.n_obs,
        design=spec.design.value,
        outcome=design.outcome,
        focal=list(design.endogenous),
        sample=sample,
        covariance=_covariance_summary(pooled_variance, design, effects_in_k=effects_in_k),
        estimators=fitted.summaries(),
        estimates=fitted.rows(),
        diagnostics=diagnostics,
        warnings=warnings,
        claim=spec.model_dump(mode="json"),
        provenance=provenance,
    )


class PanelFits:
    """The fitted panel estimators in report order, each with its moments and variance estimator."""

    ORDER = ("pooled_ols", "within", "random_effects", "within_2sls")

    def __init__(self) -> None:
        self.fits: dict[str, LinearFit] = {}
        self.moments: dict[str, Moments] = {}
        self.variances: dict[str, VarianceEstimator] = {}
        self.unavailable: dict[str, str] = {}

    def add(self, fit: LinearFit, moments: Moments, variance: VarianceEstimator) -> None:
        self.fits[fit.code] = fit
        self.moments[fit.code] = moments
        self.variances[fit.code] = variance

    def _ordered(self) -> list[str]:
        return [code for code in self.ORDER if code in self.fits]

    def rows(self) -> list[EstimateRow]:
        rows: list[EstimateRow] = []
        for code in self._ordered():
            fit, variance = self.fits[code], self.variances[code]
            rows.extend(coefficient_rows(fit, variance.covariance(fit), df=variance.inference_df(fit.n_params)))
        return rows

    def summaries(self) -> list[EstimatorSummary]:
        summaries = []
        for code in self._ordered():
            moments, fit = self.moments[code], self.fits[code]
            df_resid = moments.n_obs - len(moments.layout.regressors) - moments.absorbed_dof
            name, description, source = ESTIMATORS[code]
            summaries.append(
                EstimatorSummary(
                    code=code,
                    name=name,
                    description=description,
                    n_params=len(moments.layout.regressors) + moments.absorbed_dof,
                    df_resid=df_resid,
                    residual_std=max(0.0, moments.quad(fit.residual, fit.residual) / df_resid) ** 0.5,
                    source=source,
                )
            )
        summaries += [
            EstimatorSummary.unavailable(code, *ESTIMATORS[code][:2], reason) for code, reason in self.unavailable.items()
        ]
        return summaries


def sort_by_unit(frame: pd.DataFrame, spec: ClaimSpec, design: DesignMatrices) -> tuple[PanelStructure, DesignMatrices]:
    """Order the rows by unit (stable) and describe the panel; refuse repeated unit-period pairs."""
    unit_values = frame[spec.unit].to_numpy()[design.rows]
    codes, _ = pd.factorize(unit_values, sort=True)
    order = np.argsort(codes, kind="stable")
    codes = codes[order].astype(np.int64)
    design = dataclasses.replace(
        design,
        data=np.ascontiguousarray(design.data[order]),
        rows=design.rows[order],
        clusters=[c[order] for c in design.clusters],
    )
    n_periods = None
    if spec.time:
        periods, _ = pd.factorize(frame[spec.time].to_numpy()[design.rows], sort=True)
        pairs = pd.DataFrame({"unit": codes, "period": periods})
        repeated = pairs.duplicated()
        if repeated.any():
            example = frame.iloc[design.rows[int(np.flatnonzero(repeated.to_numpy())[0])]]
            raise DesignError(
                f"{int(repeated.sum()):,} row(s) repeat a unit and period already seen (e.g. {spec.unit} = "
                f"{example[spec.unit]}, {spec.time} = {example[spec.time]}); a panel has one row per unit and period"
            )
        n_periods = int(periods.max()) + 1
    counts = np.bincount(codes)
    starts = np.concatenate([[0], np.cumsum(counts)[:-1]])
    return PanelStructure(codes=codes, starts=starts, counts=counts, n_periods=n_periods), design


def panel_warnings(structure: PanelStructure) -> list[str]:
    """What the reviewer should know about the panel's shape."""
    warnings = []
    if not structure.balanced:
        warnings.append(
            f"unbalanced panel: units have {int(structure.counts.min())} to {int(structure.counts.max())} rows; "
            "every estimator uses all rows, random effects with unit-specific quasi-demeaning"
        )
    singles = int(np.count_nonzero(structure.counts == 1))
    if singles:
        warnings.append(
            f"{singles:,} unit(s) have a single row: they carry no variation within units, so the within "
            "estimators learn nothing from them (pooled OLS and random effects still use them)"
        )
    return warnings


def within_columns(within_gram: np.ndarray, design: DesignMatrices) -> WithinColumns:
    """Drop the columns that the unit effects absorb or that are collinear once unit means are removed."""
    names = design.columns
    p, q = len(design.endogenous), len(design.instruments)
    endog = list(range(1, 1 + p))
    instr = list(range(1 + p, 1 + p + q))
    exog = list(range(1 + p + q, len(names)))
    spread = np.diag(within_gram).copy()
    scale = np.diag(design.gram).copy()

    def check(base: list[int], candidates: list[int]):
        return check_columns(within_gram, names, base=base, candidates=candidates, spread=spread, scale=scale)

    controls = check([], exog)
    focal = check(controls.kept, endog)
    instruments = check(controls.kept, instr)
    problems = controls.exact + focal.exact + instruments.exact
    absorbed = [c.name for c in problems if c.constant and c.name != INTERCEPT]
    collinear = [{"column": c.name, "partners": c.partners} for c in problems if not c.constant]
    kept_endog = [j for j in focal.kept if j in endog]
    kept_instr = [j for j in instruments.kept if j in instr]
    keep = [0, *kept_endog, *kept_instr, *controls.kept]
    layout = Layout(n_endog=len(kept_endog), n_instr=len(kept_instr), n_exog=len(controls.kept))
    return WithinColumns(
        keep=keep, layout=layout, names=[names[j] for j in keep], absorbed=absorbed, collinear=collinear
    )


def within_iv(
    fitted: PanelFits,
    moments: Moments,
    variance: VarianceEstimator,
    columns: WithinColumns,
    design: DesignMatrices,
    effects_in_k: bool,
) -> dict[str, Any]:
    """FE-2SLS and its first stage when the claim names instruments."""
    if not design.instruments:
        return {}
    layout = columns.layout
    if layout.n_instr < layout.n_endog:
        fitted.unavailable["within_2sls"] = (
            "fewer instruments vary within units than focal regressors, so the within 2SLS is not identified"
        )
        return {}
    fit = kclass(moments, kappa=1.0, code="within_2sls", terms=columns.terms)
    fitted.add(_count_effects(fit, effects_in_k), moments, variance)
    names = {
        "endogenous": columns.names[1 : 1 + layout.n_endog],
        "instruments": columns.names[1 + layout.n_endog : 1 + layout.n_endog + layout.n_instr],
        "exogenous": columns.terms[layout.n_endog :],
    }
    return {"first_stage": first_stages(moments, variance, names=names)}


@dataclass(frozen=True)
class RandomEffectsFit:
    """Quasi-demeaned data and the Swamy-Arora variance components."""

    data: np.ndarray
    sigma2_effects: float
    sigma2_idiosyncratic: float
    theta: np.ndarray
    harmonic_mean_rows: float
    df_within: int
    df_between: int

    def summary(self) -> TestResult:
        share = self.sigma2_effects / (self.sigma2_effects + self.sigma2_idiosyncratic)
        return TestResult(
            name="Random-effects variance components",
            statistic=share,
            p_value=None,
            df=None,
            distribution=None,
            null_hypothesis="",
            source="Swamy & Arora (1972), harmonic mean of rows per unit for unbalanced panels",
            details={
                "sigma2_effects": self.sigma2_effects,
                "sigma2_idiosyncratic": self.sigma2_idiosyncratic,
                "rho": share,
                "theta": {
                    "min": float(self.theta.min()),
                    "median": float(np.median(self.theta)),
                    "max": float(self.theta.max()),
                },
                "harmonic_mean_rows_per_unit": self.harmonic_mean_rows,
                "df_within": self.df_within,
                "df_between": self.df_between,
                "reading": "rho is the share of the error variance due to the unit effects; theta = 0 is pooled OLS, theta = 1 the within estimator",
            },
        )


def random_effects(
    design: DesignMatrices,
    structure: PanelStructure,
    *,
    unit_means: np.ndarray,
    within_moments: Moments,
    within_df: int,
) -> RandomEffectsFit | str:
    """Swamy-Arora variance components and the quasi-demeaned array, or the reason they do not exist."""
    if within_df <= 0:
        return "no residual degrees of freedom within units, so the idiosyncratic variance cannot be estimated"
    layout = within_moments.layout
    sigma2_e = within_moments.residual_ss(within_moments.column(0), layout.regressors) / within_df
    regressors = [*range(1, 1 + len(design.endogenous)), *range(1 + len(design.endogenous) + len(design.instruments), len(design.columns))]
    between_x = unit_means[:, regressors]
    between_y = unit_means[:, 0]
    coefficients, _, rank, _ = np.linalg.lstsq(between_x, between_y, rcond=None)
    df_between = structure.n_units - int(rank)
    if df_between <= 0:
        return (
            f"{structure.n_units:,} units for {int(rank)} between-unit coefficients: the variance of the unit "
            "effects cannot be estimated"
        )
    between_residual = between_y - between_x @ coefficients
    harmonic = structure.n_units / float(np.sum(1.0 / structure.counts))
    sigma2_u = max(0.0, float(between_residual @ between_residual) / df_between - sigma2_e / harmonic)
    theta = 1.0 - np.sqrt(sigma2_e / (structure.counts * sigma2_u + sigma2_e))
    data = design.data - (theta[:, None] * unit_means)[structure.codes]
    return RandomEffectsFit(
        data=data,
        sigma2_effects=sigma2_u,
        sigma2_idiosyncratic=sigma2_e,
        theta=theta,
        harmonic_mean_rows=harmonic,
        df_within=within_df,
        df_between=df_between,
    )


def mundlak_test(
    design: DesignMatrices,
    structure: PanelStructure,
    *,
    spec: ClaimSpec,
    unit_means: np.ndarray,
    columns: WithinColumns,
) -> TestResult:
    """Cluster-robust Wald test of the unit means of the time-varying regressors in the pooled regression."""
    name = "Mundlak test (correlated random effects)"
    p, q = len(design.endogenous), len(design.instruments)
    regressors = [*range(1, 1 + p), *range(1 + p + q, len(design.columns))]
    varying = [j for j in columns.keep[1:] if j in regressors]
    if not varying:
        return TestResult.not_applicable(
            name, "no regressor varies within units", source=MUNDLAK_SOURCE, null_hypothesis=MUNDLAK_NULL
        )
    if INTERCEPT not in design.exogenous:
        return TestResult.not_applicable(
            name, "the Mundlak regression needs an intercept", source=MUNDLAK_SOURCE, null_hypothesis=MUNDLAK_NULL
        )
    augmented = np.hstack([design.data[:, [0, *regressors]], unit_means[structure.codes][:, varying]])
    names = [design.columns[j] for j in [0, *regressors]] + [f"unit mean of {design.columns[j]}" for j in varying]
    gram = augmented.T @ augmented
    intercept = names.index(INTERCEPT)
    spread = np.diag(gram) - gram[intercept] ** 2 / gram[intercept, intercept]
    spread[intercept] = gram[intercept, intercept]
    base = list(range(1, 1 + len(regressors)))
    report = check_columns(gram, names, base=base, candidates=list(range(1 + len(regressors), len(names))), spread=spread, scale=np.diag(gram))
    means = [j for j in report.kept if j > len(regressors)]
    dropped = [c.name for c in report.exact]
    if not means:
        return TestResult.not_applicable(
            name,
            "every unit mean is collinear with the regressors (e.g. a balanced panel's period indicators)",
            source=MUNDLAK_SOURCE,
            null_hypothesis=MUNDLAK_NULL,
        )
    keep = [0, *base, *means]
    augmented = np.ascontiguousarray(augmented[:, keep])
    layout = Layout(n_endog=p, n_instr=0, n_exog=len(keep) - 1 - p)
    moments = Moments(gram=gram[np.ix_(keep, keep)], n_obs=design.n_obs, layout=layout)
    clusters, cluster_label = _mundlak_clusters(spec, structure, design)
    variance = ClusterRobust(moments, augmented, clusters)
    fit = kclass(moments, kappa=0.0, code="mundlak", terms=[names[j] for j in keep[1:]])
    covariance = variance.covariance(fit)
    m = len(means)
    tested = slice(len(keep) - 1 - m, len(keep) - 1)
    df_den = variance.inference_df(fit.n_params)
    try:
        wald = float(fit.params[tested] @ inverse_pd(covariance[tested, tested]) @ fit.params[tested])
    except SingularMatrixError:
        return TestResult.undefined(
            name,
            "the cluster-robust covariance of the unit-mean coefficients is singular (too few units?)",
            source=MUNDLAK_SOURCE,
            null_hypothesis=MUNDLAK_NULL,
        )
    statistic = wald / m
    rows = coefficient_rows(fit, covariance, df=df_den)
    return TestResult(
        name=name,
        statistic=statistic,
        p_value=f_p(statistic, m, df_den),
        df=[m, df_den],
        distribution="F",
        null_hypothesis=MUNDLAK_NULL,
        source=MUNDLAK_SOURCE,
        details={
            "wald_chi2": wald,
            "wald_chi2_p_value": chi2_p(wald, m),
            "clusters": cluster_label,
            "unit_mean_coefficients": rows[len(rows) - m :],
            "unit_means_dropped_as_collinear": dropped,
            "reading": (
                "a small p-value says the unit effects correlate with the regressors: random effects are "
                "then inconsistent and the within estimates should be preferred"
            ),
        },
    )


def hausman_test(fitted: PanelFits) -> TestResult:
    """Classical Hausman test of fixed against random effects on the coefficients both estimate."""
    name = "Hausman test, fixed against random effects"
    if "within" not in fitted.fits or "random_effects" not in fitted.fits:
        return TestResult.not_applicable(
            name,
            "needs both the within and the random-effects fit: " + "; ".join(fitted.unavailable.values()),
            source=HAUSMAN_SOURCE,
            null_hypothesis=HAUSMAN_NULL,
        )
    within, random = fitted.fits["within"], fitted.fits["random_effects"]
    within_moments, random_moments = fitted.moments["within"], fitted.moments["random_effects"]
    counted = dataclasses.replace(within, n_params=len(within.terms) + within_moments.absorbed_dof)
    v_within = Homoskedastic(within_moments, fitted.variances["within"].data).covariance(counted)
    v_random = Homoskedastic(random_moments, fitted.variances["random_effects"].data).covariance(random)
    common = [t for t in within.terms if t in random.terms]
    i = [within.terms.index(t) for t in common]
    j = [random.terms.index(t) for t in common]
    difference = within.params[i] - random.params[j]
    variance = v_within[np.ix_(i, i)] - v_random[np.ix_(j, j)]
    values, vectors = np.linalg.eigh((variance + variance.T) / 2)
    tolerance = 1e-10 * max(float(np.abs(values).max()), np.finfo(float).tiny)
    positive = values > tolerance
    details: dict[str, Any] = {
        "terms": common,
        "difference": difference,
        "variances": "classical (homoskedastic) variances of both estimators, as the test assumes",
    }
    if not positive.any():
        return TestResult.undefined(
            name,
            "the difference of the variances has no positive eigenvalue; read the Mundlak test instead",
            source=HAUSMAN_SOURCE,
            null_hypothesis=HAUSMAN_NULL,
        )
    rotated = vectors[:, positive].T @ difference
    statistic = float(np.sum(rotated**2 / values[positive]))
    df = int(positive.sum())
    if df < len(common):
        details["warning"] = (
            f"the variance difference is not positive definite ({len(common) - df} of {len(common)} eigenvalues "
            "are not positive): the statistic uses its positive part and the test is unreliable; read the "
            "Mundlak test instead"
        )
    return TestResult(
        name=name,
        statistic=statistic,
        p_value=chi2_p(statistic, df),
        df=df,
        distribution="chi2",
        null_hypothesis=HAUSMAN_NULL,
        source=HAUSMAN_SOURCE,
        details=details,
    )


def _sensitivity(fitted: PanelFits, columns: WithinColumns, spec: ClaimSpec) -> dict[str, Any]:
    """The omitted-cause analyses on the within fit: the cause they describe varies within units."""
    if "within" not in fitted.fits:
        reason = "the sensitivity analyses use the within fit, which is not available: " + fitted.unavailable["within"]
        return {
            "omitted_cause_sensitivity": [TestResult.not_applicable("Sensitivity to an omitted common cause", reason)],
            "proportional_selection": [TestResult.not_applicable("Bias-adjusted estimate under proportional selection", reason)],
        }
    results = sensitivity_diagnostics(
        fitted.moments["within"],
        columns=columns.names,
        focal=columns.names[1 : 1 + columns.layout.n_endog],
        baseline=[],
        benchmarks=benchmark_groups(spec.benchmarks, columns.names),
        options=spec.sensitivity,
    )
    return with_analysed_fit(results, "within")


def _moments(gram: np.ndarray, design: DesignMatrices, *, absorbed_dof: int) -> Moments:
    layout = Layout(n_endog=len(design.endogenous), n_instr=len(design.instruments), n_exog=len(design.exogenous))
    return Moments(gram=gram, n_obs=design.n_obs, layout=layout, absorbed_dof=absorbed_dof)


def _count_effects(fit: LinearFit, effects_in_k: bool) -> LinearFit:
    """Leave the unit effects out of k when they are nested in the clusters."""
    return fit if effects_in_k else dataclasses.replace(fit, n_params=len(fit.terms))


def _units_nested_in_clusters(spec: ClaimSpec, structure: PanelStructure, design: DesignMatrices) -> bool:
    return (
        spec.covariance is CovarianceKind.CLUSTER
        and len(design.clusters) == 1
        and nested_within(structure.codes, design.clusters[0])
    )


def _mundlak_clusters(spec: ClaimSpec, structure: PanelStructure, design: DesignMatrices) -> tuple[list[np.ndarray], str]:
    if _units_nested_in_clusters(spec, structure, design):
        return list(design.clusters), f"the claim's clusters ({spec.cluster[0]}), which contain the units"
    return [structure.codes], f"units ({spec.unit})"


def _covariance_summary(variance: VarianceEstimator, design: DesignMatrices, *, effects_in_k: bool) -> dict[str, Any]:
    summary = variance.summary()
    summary["inference"] = (
        "Student t with G - 1 degrees of freedom (G clusters)" if design.clusters else "Student t with n - k degrees of freedom"
    )
    summary["clusters"] = [
        {"column": name, "count": int(codes.max()) + 1} for name, codes in zip(design.cluster_names, design.clusters)
    ]
    summary["unit_effects_in_k"] = (
        "the within estimators count the unit effects in k"
        if effects_in_k
        else "the units are nested in the clusters, so the within estimators do not count the unit effects in k"
    )
    return summary
