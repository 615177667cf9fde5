"""Balance of pre-treatment covariates across the instruments.

A valid instrument is as good as randomly assigned given the controls, so it
should not predict characteristics that were fixed before treatment (age at
entry, prior scores, baseline health). Each covariate the reviewer marks as
pre-treatment is regressed on the excluded instruments and on the controls
that are not themselves under check (and the claim's fixed effects and
weights); the q instrument coefficients are tested jointly with the claim's
variance estimator (Wald F, F(q, df)). A joint test over all covariates uses
the cross-equation covariance of the coefficients (the covariance of the
stacked coefficients, as in a seemingly unrelated system), F(m q, df).

Rows with a missing covariate are left out of the balance regressions (listwise,
reported); with absorbed fixed effects this is refused, because the
instruments were partialled on the full sample.

References
----------
Angrist, J. D. and Pischke, J.-S. (2009). Mostly Harmless Econometrics.
Princeton University Press.
Imbens, G. W. and Rubin, D. B. (2015). Causal Inference for Statistics,
Social, and Biomedical Sciences. Cambridge University Press.
"""

from __future__ import annotations

import dataclasses
from typing import Any

import numpy as np
import pandas as pd

from app.data.design import DesignMatrices, numeric_values
from app.data.fixed_effects import absorb
from app.errors import DesignError
from app.estimation.covariance import variance_estimator
from app.estimation.findings import TestResult
from app.estimation.inference import f_p
from app.estimation.linalg import SingularMatrixError, quadratic_form_inverse
from app.estimation.moments import Layout, Moments
from app.estimation.reduced_form_system import ReducedFormSystem, reduced_form_system
from app.spec import ClaimSpec

NAME = "Balance of pre-treatment covariates across the instruments"
SOURCE = "Imbens & Rubin (2015); Angrist & Pischke (2009)"
NULL = "the instruments do not predict any pre-treatment covariate (as random assignment would imply)"
READING = (
    "a small p-value says the instruments predict a characteristic fixed before treatment, which an as-good-as-random "
    "instrument would not; it is a reason to ask the authors, not proof that the instrument is invalid"
)


def instrument_balance(frame: pd.DataFrame, spec: ClaimSpec, design: DesignMatrices) -> TestResult:
    """Per-covariate and joint balance tests; not applicable when no covariate is marked pre-treatment."""
    if not spec.pre_treatment:
        return TestResult.not_applicable(
            NAME,
            "the claim marks no covariates as determined before treatment (field 'pre_treatment'), so balance "
            "cannot be checked",
            source=SOURCE,
            null_hypothesis=NULL,
        )
    skipped, values = _usable_covariates(frame, spec, design)
    if not values:
        return _with_details(
            TestResult.not_applicable(NAME, "none of the pre-treatment covariates can be used", source=SOURCE, null_hypothesis=NULL),
            {"skipped": skipped},
        )
    names = list(values)
    block = np.column_stack([values[name] for name in names])
    complete = ~np.isnan(block).any(axis=1)
    dropped = int((~complete).sum())
    if dropped and design.absorbed is not None:
        return _with_details(
            TestResult.undefined(
                NAME,
                f"{dropped:,} rows of the estimation sample lack a pre-treatment covariate; with absorbed fixed effects "
                "the balance regressions need them observed on every row (filter those rows out in the claim)",
                source=SOURCE,
                null_hypothesis=NULL,
            ),
            {"skipped": skipped},
        )
    try:
        data = _balance_array(block, names, frame, spec, design)
    except DesignError as error:
        return TestResult.undefined(NAME, str(error), source=SOURCE, null_hypothesis=NULL)
    data = np.ascontiguousarray(data[complete])
    clusters = [pd.factorize(codes[complete])[0].astype(np.int64) for codes in design.clusters]
    controls = [name for name in design.exogenous if name not in names]
    layout = Layout(n_endog=len(names) - 1, n_instr=len(design.instruments), n_exog=len(controls))
    moments = Moments(gram=data.T @ data, n_obs=data.shape[0], layout=layout, absorbed_dof=design.absorbed_dof)
    variance = variance_estimator(spec.covariance, moments, data, clusters)
    try:
        system = reduced_form_system(moments, variance)
    except SingularMatrixError:
        return TestResult.undefined(
            NAME, "the instruments and controls are collinear on the rows with observed covariates", source=SOURCE, null_hypothesis=NULL
        )
    q, m = system.n_instruments, len(names)
    df = system.inference_df
    entries = [_covariate_entry(system, j, name, design.instruments) for j, name in enumerate(names)]
    details: dict[str, Any] = {
        "by_covariate": entries,
        "skipped": skipped,
        "n_obs": int(data.shape[0]),
        "rows_without_covariates": dropped,
        "conditioning": ["instruments", *controls] + (["fixed effects"] if design.absorbed else []),
        "variance": variance.kind.value,
        "reading": READING,
    }
    try:
        wald = quadratic_form_inverse(system.coefficients.ravel(order="F"), system.stacked_covariance(list(range(m))))
    except SingularMatrixError:
        return _with_details(
            TestResult.undefined(
                NAME,
                "the joint covariance of the balance coefficients is singular (for example fewer clusters than "
                "covariates times instruments); see the per-covariate tests",
                source=SOURCE,
                null_hypothesis=NULL,
            ),
            details,
        )
    statistic = wald / (m * q)
    return TestResult(
        name=NAME,
        statistic=statistic,
        p_value=f_p(statistic, m * q, df),
        df=[m * q, df],
        distribution="F",
        null_hypothesis=NULL,
        source=SOURCE,
        details=details,
    )


def _usable_covariates(
    frame: pd.DataFrame, spec: ClaimSpec, design: DesignMatrices
) -> tuple[list[dict[str, str]], dict[str, np.ndarray]]:
    roles = {design.outcome: "the outcome", **{x: "a focal regressor" for x in design.endogenous}}
    roles.update({z: "an instrument" for z in design.instruments})
    skipped: list[dict[str, str]] = []
    values: dict[str, np.ndarray] = {}
    for column in dict.fromkeys(spec.pre_treatment):
        if column in roles:
            reason = f"'{column}' is {roles[column]} of the claim, not a pre-treatment covariate"
            skipped.append({"covariate": column, "reason": reason})
            continue
        try:
            numbers = numeric_values(frame[column], column)[design.rows]
        except DesignError as error:
            skipped.append({"covariate": column, "reason": str(error)})
            continue
        if np.isinf(numbers).any():
            skipped.append({"covariate": column, "reason": f"'{column}' holds infinite values in the estimation sample"})
            continue
        values[column] = numbers
    return skipped, values


def _balance_array(
    block: np.ndarray, names: list[str], frame: pd.DataFrame, spec: ClaimSpec, design: DesignMatrices
) -> np.ndarray:
    """``[covariates, Z, controls not under check]`` on the design's rows, weighted and partialled like the design."""
    covariates = np.array(block, dtype=np.float64)
    if design.absorbed is not None:
        codes = [pd.factorize(frame[column].to_numpy()[design.rows], sort=True)[0].astype(np.int64) for column in spec.fixed_effects]
        absorb(covariates, codes, names=list(spec.fixed_effects), weights=design.weights)
    if design.weights is not None:
        covariates *= np.sqrt(design.weights)[:, None]
    start = 1 + len(design.endogenous)
    instruments = design.data[:, start : start + len(design.instruments)]
    exog_start = start + len(design.instruments)
    kept = [exog_start + k for k, name in enumerate(design.exogenous) if name not in names]
    return np.hstack([covariates, instruments, design.data[:, kept]])


def _covariate_entry(system: ReducedFormSystem, j: int, name: str, instruments: list[str]) -> dict[str, Any]:
    q = system.n_instruments
    coefficients = system.coefficients[:, j]
    covariance = system.covariance[j, j]
    std_errors = np.sqrt(np.clip(np.diag(covariance), 0.0, None))
    entry: dict[str, Any] = {
        "covariate": name,
        "coefficients": [
            {"instrument": z, "estimate": float(b), "std_error": float(s)} for z, b, s in zip(instruments, coefficients, std_errors)
        ],
    }
    try:
        wald = quadratic_form_inverse(coefficients, covariance)
    except SingularMatrixError:
        entry.update(
            {
                "statistic": None,
                "p_value": None,
                "reason": f"'{name}' does not vary once the controls and fixed effects are accounted for",
            }
        )
        return entry
    statistic = wald / q
    entry.update({"statistic": statistic, "p_value": f_p(statistic, q, system.inference_df), "df": [q, system.inference_df]})
    return entry


def _with_details(result: TestResult, details: dict[str, Any]) -> TestResult:
    return dataclasses.replace(result, details={**result.details, **details})
