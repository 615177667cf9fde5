"""Instrument strength, weak-instrument-robust inference and instrument validity for one refit.

:func:`instrument_diagnostics` is called by :func:`app.estimation.refit.iv_diagnostics`
and returns the findings keys listed in :data:`INSTRUMENT_DIAGNOSTIC_KEYS`.
Every statistic uses the moment matrix, the fitted estimators and the claim's
variance estimator already built by the refit; the reduced-form system is
fitted once and shared.
"""

from __future__ import annotations

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
from app.estimation.reduced_form_system import ReducedFormSystem, reduced_form_system
from app.estimation.stock_yogo import stock_yogo
from app.estimation.strength import strength_statistics
from app.estimation.system import disturbance_correlation
from app.estimation.tf_procedure import tf_procedure
from app.estimation.wild_bootstrap import wild_cluster_bootstrap
from app.spec import ClaimSpec

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
    return results


def _first_stage_f(system: ReducedFormSystem) -> float | None:
    """The first-stage F of the (single) focal regressor with the claim's variance estimator."""
    covariance = system.covariance[1, 1]
    if not is_positive_definite(covariance):
        return None
    return quadratic_form_inverse(system.coefficients[:, 1], covariance) / system.n_instruments
