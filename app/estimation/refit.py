"""Refit a claim: build the design, fit every estimator, run every diagnostic.

This is the engine's single entry point, :func:`refit`. Designs other than
``iv`` and ``regression`` register their own refit function in
:data:`DESIGN_REFITS`.
"""

from __future__ import annotations

from collections.abc import Callable
import dataclasses
from dataclasses import dataclass
from typing import Any

import pandas as pd

from app.data.design import INTERCEPT, DesignMatrices, build_design
from app.errors import DesignError
from app.estimation.covariance import VarianceEstimator, variance_estimator
from app.estimation.endogeneity import endogeneity_tests
from app.estimation.findings import EstimateRow, EstimatorSummary, Findings, TestResult
from app.estimation.first_stage import first_stages, reduced_form
from app.estimation.fits import LinearFit, refuse_exact_fit
from app.estimation.gmm import GmmFit, two_step_gmm
from app.estimation.inference import coefficient_rows
from app.estimation.instrument_diagnostics import INSTRUMENT_DIAGNOSTIC_KEYS, instrument_diagnostics
from app.estimation.kclass import fuller_kappa, kclass, liml_kappa
from app.estimation.linalg import SingularMatrixError
from app.estimation.mediation import ESTIMATORS as MEDIATION_ESTIMATORS
from app.estimation.mediation import mediation_reading, treatment_adjusted_ols
from app.estimation.moments import Layout, Moments
from app.estimation.overidentification import overidentification_tests
from app.estimation.panel import ESTIMATORS as PANEL_ESTIMATORS
from app.estimation.panel import refit_panel
from app.estimation.selection import ESTIMATORS as SELECTION_ESTIMATORS
from app.estimation.selection import refit_selection
from app.estimation.sensitivity import benchmark_groups, sensitivity_diagnostics, with_analysed_fit
from app.spec import ClaimSpec, Design

ESTIMATORS: dict[str, tuple[str, str, str]] = {
    "ols": (
        "OLS",
        "Ordinary least squares: consistent only if the focal regressors are uncorrelated with the error.",
        "Gauss-Markov; Wooldridge (2020), ch. 3",
    ),
    "2sls": (
        "2SLS",
        "Two-stage least squares: uses only the variation in the focal regressors predicted by the instruments.",
        "Theil (1953); Basmann (1957)",
    ),
    "liml": (
        "LIML",
        "Limited-information maximum likelihood: less biased than 2SLS when instruments are many or weak.",
        "Anderson & Rubin (1949)",
    ),
    "fuller1": (
        "Fuller (alpha = 1)",
        "Fuller's modified LIML with alpha = 1: approximately unbiased, with finite moments.",
        "Fuller (1977)",
    ),
    "fuller4": (
        "Fuller (alpha = 4)",
        "Fuller's modified LIML with alpha = 4: approximately minimises the mean squared error.",
        "Fuller (1977)",
    ),
    "gmm": (
        "Two-step GMM",
        "Efficient two-step GMM: weights the instruments by the inverse covariance of the moment conditions.",
        "Hansen (1982)",
    ),
}
ESTIMATORS.update(PANEL_ESTIMATORS)
ESTIMATORS.update(SELECTION_ESTIMATORS)
ESTIMATORS.update(MEDIATION_ESTIMATORS)


def refit(frame: pd.DataFrame, spec: ClaimSpec, *, provenance: dict[str, Any] | None = None) -> Findings:
    """Refit ``spec`` on ``frame`` and return every estimate and diagnostic.

    Raises
    ------
    DesignError
        When the data and the claim do not give an estimable model; the
        message names the problem.
    """
    design_refit = DESIGN_REFITS[spec.design]
    try:
        return design_refit(frame, spec, provenance or {})
    except SingularMatrixError as error:
        raise DesignError(
            "the model cannot be estimated on these data: a cross-product matrix is singular "
            f"({error}); check for regressors or instruments without variation in the sample"
        ) from None


def refit_instrumental(frame: pd.DataFrame, spec: ClaimSpec, provenance: dict[str, Any]) -> Findings:
    """The IV design (and the plain regression when no instruments are given)."""
    design = build_design(frame, spec)
    moments = design_moments(design)
    variance = variance_estimator(spec.covariance, moments, design.data, design.clusters)
    terms = [*design.endogenous, *design.exogenous]
    fitted = fit_estimators(moments, variance, terms=terms)
    fits = fitted.fits
    refuse_exact_fit(design.data, fits["ols"], outcome=design.outcome, model="claimed model")
    diagnostics = iv_diagnostics(moments, variance, fits=fits, gmm=fitted.gmm, design=design, frame=frame, spec=spec)
    analysed, analysed_code = moments, "ols"
    if spec.design is Design.MEDIATION:
        analysed, analysed_code = arms_as_controls(moments), "ols_with_treatment"
    sensitivity = sensitivity_diagnostics(
        analysed,
        columns=design.columns,
        focal=design.endogenous,
        baseline=[INTERCEPT] if INTERCEPT in design.exogenous else [],
        benchmarks=benchmark_groups(spec.benchmarks, design.columns),
        options=spec.sensitivity,
    )
    diagnostics.update(with_analysed_fit(sensitivity, analysed_code))
    if spec.design is Design.MEDIATION:
        fits["ols_with_treatment"] = treatment_adjusted_ols(moments, terms=[*design.endogenous, *design.instruments, *design.exogenous])
        diagnostics["mediation"] = mediation_reading(
            moments, variance, fits=fits, diagnostics=diagnostics, mediator=design.endogenous[0], arms=design.instruments
        )
    return Findings(
        n_obs=design.n_obs,
        design=spec.design.value,
        outcome=design.outcome,
        focal=list(design.endogenous),
        sample=sample_summary(design),
        covariance=covariance_summary(variance, design),
        estimators=[estimator_summary(moments, fit) for fit in fits.values()]
        + [EstimatorSummary.unavailable(code, *ESTIMATORS[code][:2], reason) for code, reason in fitted.unavailable.items()],
        estimates=estimate_rows(variance, fits.values()),
        diagnostics=diagnostics,
        warnings=list(design.sample.warnings),
        claim=spec.model_dump(mode="json"),
        provenance=provenance,
    )


def design_moments(design: DesignMatrices) -> Moments:
    """Moments of a built design."""
    layout = Layout(n_endog=len(design.endogenous), n_instr=len(design.instruments), n_exog=len(design.exogenous))
    return Moments(
        gram=design.gram,
        n_obs=design.n_obs,
        layout=layout,
        absorbed_dof=design.absorbed_dof,
        nested_dof=design.nested_dof,
    )


def arms_as_controls(moments: Moments) -> Moments:
    """The same moments with the excluded instruments (a mediator claim's randomized arms) among the controls.

    The mediator claim's regression holds the arms fixed (``ols_with_treatment``);
    its OLS is y on ``[X, Z, W]``, which is what the omitted-cause analyses must
    examine. The columns of ``A`` keep their order, so only the layout changes.
    """
    layout = moments.layout
    return dataclasses.replace(
        moments, layout=Layout(n_endog=layout.n_endog, n_instr=0, n_exog=layout.n_instr + layout.n_exog)
    )


@dataclass(frozen=True)
class EstimatorFits:
    """The fitted estimators, the GMM weight, and estimators that could not be computed (with why)."""

    fits: dict[str, LinearFit]
    gmm: GmmFit | None
    unavailable: dict[str, str]


def fit_estimators(moments: Moments, variance: VarianceEstimator, *, terms: list[str]) -> EstimatorFits:
    """OLS always; 2SLS, LIML, Fuller (1 and 4) and two-step GMM when there are instruments."""
    fits = {"ols": kclass(moments, kappa=0.0, code="ols", terms=terms)}
    if moments.layout.n_instr == 0:
        return EstimatorFits(fits=fits, gmm=None, unavailable={})
    fits["2sls"] = kclass(moments, kappa=1.0, code="2sls", terms=terms)
    unavailable: dict[str, str] = {}
    try:
        liml = liml_kappa(moments)
    except SingularMatrixError as error:
        for code in ("liml", "fuller1", "fuller4"):
            unavailable[code] = f"the LIML root is not defined: {error}"
    else:
        fits["liml"] = kclass(moments, kappa=liml, code="liml", terms=terms)
        for code, alpha in (("fuller1", 1.0), ("fuller4", 4.0)):
            kappa = fuller_kappa(moments, liml=liml, alpha=alpha)
            fits[code] = kclass(moments, kappa=kappa, code=code, terms=terms)
    try:
        gmm = two_step_gmm(moments, variance, first_step=fits["2sls"], terms=terms)
    except SingularMatrixError:
        unavailable["gmm"] = (
            "the estimated covariance of the moment conditions is singular (for example fewer clusters "
            "than instruments), so the efficient GMM weight does not exist"
        )
        return EstimatorFits(fits=fits, gmm=None, unavailable=unavailable)
    fits["gmm"] = gmm.fit
    return EstimatorFits(fits=fits, gmm=gmm, unavailable=unavailable)


def iv_diagnostics(
    moments: Moments,
    variance: VarianceEstimator,
    *,
    fits: dict[str, LinearFit],
    gmm: GmmFit | None,
    design: DesignMatrices,
    frame: pd.DataFrame,
    spec: ClaimSpec,
) -> dict[str, Any]:
    """First stage, reduced form, over-identification, endogeneity and instrument diagnostics."""
    if moments.layout.n_instr == 0:
        reason = "the claim names no instruments: it is a plain regression, so only OLS applies"
        return {key: TestResult.not_applicable(key.replace("_", " "), reason) for key in IV_DIAGNOSTIC_KEYS}
    names = {"endogenous": design.endogenous, "instruments": design.instruments, "exogenous": design.exogenous}
    diagnostics: dict[str, Any] = {
        "first_stage": first_stages(moments, variance, names=names),
        "reduced_form": reduced_form(moments, variance, names=names),
    }
    diagnostics.update(overidentification_tests(moments, variance, tsls=fits["2sls"], gmm=gmm))
    diagnostics.update(
        endogeneity_tests(moments, variance, ols=fits["ols"], tsls=fits["2sls"], names=design.endogenous)
    )
    diagnostics.update(
        instrument_diagnostics(moments, variance, fits=fits, gmm=gmm, design=design, frame=frame, spec=spec)
    )
    return diagnostics


IV_DIAGNOSTIC_KEYS = (
    "first_stage",
    "reduced_form",
    "sargan",
    "basmann",
    "hansen_j",
    "durbin",
    "wu_hausman",
    "control_function",
    "residual_correlation",
    *INSTRUMENT_DIAGNOSTIC_KEYS,
)


def estimate_rows(variance: VarianceEstimator, fits: Any) -> list[EstimateRow]:
    """Coefficient rows of every estimator, in estimator order."""
    rows: list[EstimateRow] = []
    for fit in fits:
        covariance = variance.covariance(fit)
        rows.extend(coefficient_rows(fit, covariance, df=variance.inference_df(fit.n_params)))
    return rows


def estimator_summary(moments: Moments, fit: LinearFit) -> EstimatorSummary:
    """Name, description, kappa and degrees of freedom of one estimator."""
    name, description, source = ESTIMATORS[fit.code]
    df_resid = moments.n_obs - fit.n_params
    residual_std = max(0.0, moments.quad(fit.residual, fit.residual) / df_resid) ** 0.5
    kappa = fit.kappa if fit.code in ("liml", "fuller1", "fuller4") else None
    return EstimatorSummary(
        code=fit.code,
        name=name,
        description=description,
        n_params=fit.n_params,
        df_resid=df_resid,
        residual_std=residual_std,
        kappa=kappa,
        source=source,
    )


def covariance_summary(variance: VarianceEstimator, design: DesignMatrices) -> dict[str, Any]:
    """The variance estimator in words, with cluster counts."""
    summary = variance.summary()
    summary["inference"] = (
        "Student t with G - 1 degrees of freedom (G clusters)"
        if design.clusters
        else "Student t with n - k degrees of freedom"
    )
    summary["clusters"] = [
        {"column": name, "count": int(codes.max()) + 1} for name, codes in zip(design.cluster_names, design.clusters)
    ]
    return summary


def sample_summary(design: DesignMatrices) -> dict[str, Any]:
    """The sample report plus absorbed effects."""
    summary = design.sample.to_dict()
    summary["fixed_effects"] = design.absorbed.to_dict() if design.absorbed else None
    summary["columns"] = {
        "outcome": design.outcome,
        "endogenous": design.endogenous,
        "instruments": design.instruments,
        "exogenous": design.exogenous,
    }
    return summary


DESIGN_REFITS: dict[Design, Callable[[pd.DataFrame, ClaimSpec, dict[str, Any]], Findings]] = {
    Design.IV: refit_instrumental,
    Design.REGRESSION: refit_instrumental,
    Design.MEDIATION: refit_instrumental,
    Design.PANEL: refit_panel,
    Design.SELECTION: refit_selection,
}
