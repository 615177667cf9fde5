"""Instrument strength, weak-instrument-robust inference and instrument validity for one refit.

:func:`instrument_diagnostics` is called by :func:`app.estimation.refit.iv_diagnostics`
and returns the findings keys listed in :data:`INSTRUMENT_DIAGNOSTIC_KEYS`.
Every statistic uses the moment matrix, the fitted estimators and the claim's
variance estimator already built by the refit; the reduced-form system is
fitted once and shared.
"""

from __future__ import annotations

import dataclasses
from typing import Any

import numpy as np
import pandas as pd

from app.data.design import DesignMatrices
from app.estimation.anderson_rubin import anderson_rubin
from app.estimation.c_statistic import c_statistics
from app.estimation.conditional_tests import conditional_tests
from app.estimation.covariance import VarianceEstimator
from app.estimation.effective_f import effective_f
from app.estimation.findings import TestResult
from app.estimation.fits import LinearFit
from app.estimation.gmm import GmmFit
from app.estimation.instrument_balance import instrument_balance
from app.estimation.linalg import SingularMatrixError, is_positive_definite, quadratic_form_inverse
from app.estimation.moments import Moments
from app.estimation.plausibly_exogenous import plausibly_exogenous
from app.estimation.reduced_form_system import ReducedFormSystem, largest_instrument_leverage, reduced_form_system
from app.estimation.stock_yogo import stock_yogo
from app.estimation.strength import strength_statistics
from app.estimation.system import disturbance_correlation
from app.estimation.tf_procedure import tf_procedure
from app.estimation.wild_bootstrap import wild_cluster_bootstrap
from app.spec import ClaimSpec, CovarianceKind

INSTRUMENT_DIAGNOSTIC_KEYS = (
    "cragg_donald_f",
    "kleibergen_paap_rk_f",
    "kleibergen_paap_rk_lm",
    "sanderson_windmeijer_f",
    "effective_f",
    "stock_yogo",
    "anderson_rubin",
    "kleibergen_k",
    "clr",
    "tf",
    "c_statistic",
    "disturbance_correlation",
    "instrument_balance",
    "plausibly_exogenous",
    "wild_cluster_bootstrap",
)


def instrument_diagnostics(
    moments: Moments,
    variance: VarianceEstimator,
    *,
    fits: dict[str, LinearFit],
    gmm: GmmFit | None,
    design: DesignMatrices,
    frame: pd.DataFrame,
    spec: ClaimSpec,
) -> dict[str, Any]:
    """Every instrument diagnostic of issue "instruments", keyed as in :data:`INSTRUMENT_DIAGNOSTIC_KEYS`."""
    layout = moments.layout
    tsls = fits["2sls"]
    try:
        system = reduced_form_system(moments, variance)
    except SingularMatrixError:
        reason = "the instruments and controls are collinear, so the reduced form cannot be fitted"
        return {key: TestResult.undefined(key.replace("_", " "), reason) for key in INSTRUMENT_DIAGNOSTIC_KEYS}
    tsls_covariance = variance.covariance(tsls)
    tsls_se = float(np.sqrt(max(tsls_covariance[0, 0], 0.0)))
    results: dict[str, Any] = strength_statistics(moments, variance, system, names=design.endogenous)
    results["effective_f"] = effective_f(system)
    results["stock_yogo"] = stock_yogo(
        n_endog=layout.n_endog,
        n_instruments=layout.n_instr,
        statistic=results["cragg_donald_f"].statistic,
        covariance_kind=variance.kind.value,
    )
    results["anderson_rubin"] = anderson_rubin(system)
    results.update(conditional_tests(system))
    results["tf"] = tf_procedure(
        estimate=float(tsls.params[0]),
        std_error=tsls_se,
        first_stage_f=_first_stage_f(system),
        n_endog=layout.n_endog,
        n_instruments=layout.n_instr,
    )
    results["c_statistic"] = c_statistics(
        moments, gmm=gmm, instruments=design.instruments, subsets=[list(subset) for subset in spec.instrument_subsets]
    )
    results["disturbance_correlation"] = disturbance_correlation(
        moments,
        variance,
        design.data,
        tsls=tsls,
        first_stage_residuals=system.residuals[:, 1:],
        names=design.endogenous,
    )
    results["instrument_balance"] = instrument_balance(frame, spec, design)
    results["plausibly_exogenous"] = plausibly_exogenous(
        moments,
        variance,
        tsls=tsls,
        reduced_form=system.coefficients[:, 0],
        focal=design.endogenous,
        instruments=design.instruments,
        bound=spec.direct_effect_bound,
    )
    results["wild_cluster_bootstrap"] = wild_cluster_bootstrap(
        moments,
        variance,
        system=system,
        tsls=tsls,
        tsls_t=float(tsls.params[0]) / tsls_se if tsls_se > 0 else float("nan"),
        options=spec.bootstrap,
    )
    if variance.kind is not CovarianceKind.HOMOSKEDASTIC:
        caution = leverage_caution(moments, design)
        if caution:
            for key in ROBUST_WEAK_IV_KEYS:
                results[key] = dataclasses.replace(results[key], details={**results[key].details, "leverage_caution": caution})
    return results


ROBUST_WEAK_IV_KEYS = ("kleibergen_paap_rk_f", "kleibergen_paap_rk_lm", "effective_f", "anderson_rubin", "kleibergen_k", "clr", "tf")
HIGH_LEVERAGE = 0.9


def leverage_caution(moments: Moments, design: DesignMatrices) -> dict[str, Any] | None:
    """A caution for the robust weak-instrument statistics when one row's instrument leverage is near one.

    The threshold 0.9 is a convention of our own: with leverage h the robust
    variance treats that row's squared residual, of expected size
    (1 - h) sigma^2, as if it were sigma^2 (Chesher & Jewitt 1987).
    """
    try:
        leverage, row = largest_instrument_leverage(moments, design.data)
    except (SingularMatrixError, np.linalg.LinAlgError):
        return None
    if leverage <= HIGH_LEVERAGE:
        return None
    return {
        "reason": (
            f"one row (data row {int(design.rows[row]) + 1}) has leverage {leverage:.4f} in the projection on the "
            "instruments: it alone determines an instrument's coefficient and its residual is fitted almost "
            "exactly, so heteroskedasticity- and cluster-robust variances understate the uncertainty and these "
            "statistics can look far more decisive than the data allow; read the homoskedastic Cragg-Donald F "
            "beside them and ask whether the instrument varies on more than a handful of rows"
        ),
        "max_leverage": leverage,
        "threshold": HIGH_LEVERAGE,
        "source": "Chesher & Jewitt (1987); MacKinnon & White (1985)",
    }


def _first_stage_f(system: ReducedFormSystem) -> float | None:
    """The first-stage F of the (single) focal regressor with the claim's variance estimator."""
    covariance = system.covariance[1, 1]
    if not is_positive_definite(covariance):
        return None
    return quadratic_form_inverse(system.coefficients[:, 1], covariance) / system.n_instruments
