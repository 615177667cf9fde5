"""The Anderson-Rubin test of the focal coefficient and its confidence set.

Under ``beta = b`` the excluded instruments have no effect on ``y - X b``, so
the test regresses ``y - X b`` on ``[Z, W]`` and tests the q coefficients of Z
(Anderson & Rubin 1949). Its size does not depend on the strength of the
instruments. From the reduced-form system (:mod:`app.estimation.reduced_form_system`)

    g(b) = pi_y - Pi_X b,    V(b) = Cov(g(b)) = sum_ab w_a w_b Cov(pi_a, pi_b),  w = (1, -b),
    AR(b) = g(b)' V(b)^{-1} g(b) / q,

referred to F(q, df) with df = n - L, or G - 1 when clustered. V(b) uses the
claim's variance estimator, so the statistic is the homoskedastic F of
Anderson and Rubin, or its heteroskedasticity- or cluster-robust Wald form
(Chernozhukov & Hansen 2008). At ``b = 0`` it is the reduced-form F test.

Confidence set ``{b : AR(b) <= F_crit}``, inverted exactly:

* homoskedastic errors, or one instrument: ``V(b)`` is a scalar quadratic in b
  times a fixed matrix, so the set solves a quadratic inequality;
* robust or cluster errors with several instruments: the boundaries are the
  real b where ``det [[V(b), g(b)], [g(b)', q F_crit]] = 0``, a quadratic
  eigenvalue problem solved through its companion linearisation; each root is
  then polished with Brent's method and the pieces between roots are
  classified by evaluating the statistic.

With several focal regressors only the joint test of ``beta = 0`` is reported.

References
----------
Anderson, T. W. and Rubin, H. (1949). Estimation of the parameters of a single
equation in a complete system of stochastic equations. Annals of Mathematical
Statistics 20(1), 46-63.
Chernozhukov, V. and Hansen, C. (2008). The reduced form: a simple approach to
inference with weak instruments. Economics Letters 100(1), 68-71.
Tisseur, F. and Meerbergen, K. (2001). The quadratic eigenvalue problem. SIAM
Review 43(2), 235-286.
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np
from scipy import linalg, optimize, stats

from app.estimation.confidence_sets import ConfidenceSet, quadratic_set
from app.estimation.findings import TestResult
from app.estimation.inference import CONFIDENCE_LEVEL
from app.estimation.linalg import is_positive_definite, quadratic_form_inverse
from app.estimation.reduced_form_system import ReducedFormSystem

NAME = "Anderson-Rubin test"
SOURCE = "Anderson & Rubin (1949); robust Wald form: Chernozhukov & Hansen (2008)"
NULL_ONE = "the focal regressor has no effect (beta = 0); valid however weak the instruments are"
NULL_JOINT = "none of the focal regressors has an effect (all beta = 0); valid however weak the instruments are"
SINGULAR = (
    "the covariance of the reduced-form coefficients is singular (for example fewer clusters than instruments), "
    "so the Anderson-Rubin statistic is undefined"
)
DISTRIBUTION_NOTE = (
    "referred to F(q, df), the exact distribution of Anderson and Rubin's statistic with normal homoskedastic "
    "errors (and its usual small-sample form otherwise); the K and CLR tests use their chi-squared (asymptotic) "
    "reference, so with few degrees of freedom the Anderson-Rubin set is somewhat wider even where the three "
    "tests coincide (one instrument)"
)
CLOSED_FORM = "closed form: roots of a quadratic inequality in b"
EIGENVALUE = (
    "exact: boundaries are the real eigenvalues of a quadratic eigenvalue problem, polished by Brent's method "
    "to about 1e-12 relative"
)


def anderson_rubin(system: ReducedFormSystem, *, level: float = CONFIDENCE_LEVEL) -> TestResult:
    """Anderson-Rubin test of no effect and, with one focal regressor, its confidence set."""
    q, p = system.n_instruments, system.n_endog
    df = system.inference_df
    weights = np.zeros(1 + p)
    weights[0] = 1.0
    covariance = system.combination_covariance(weights)
    if not is_positive_definite(covariance):
        return TestResult.undefined(NAME, SINGULAR, source=SOURCE, null_hypothesis=NULL_ONE if p == 1 else NULL_JOINT)
    statistic = quadratic_form_inverse(system.coefficients[:, 0], covariance) / q
    details: dict[str, object] = {"tested_value": 0.0, "statistic_chi2": statistic * q}
    if p == 1:
        first_stage = system.combination_covariance(np.array([0.0, 1.0]))
        if is_positive_definite(first_stage):
            details["statistic_at_infinity"] = quadratic_form_inverse(system.coefficients[:, 1], first_stage) / q
        if system.kronecker or q == 1 or is_positive_definite(_joint_covariance(system)):
            details.update(anderson_rubin_set(system, level=level).to_details())
        else:
            details["confidence_set"] = None
            details["confidence_set_note"] = (
                "the joint covariance of the reduced-form and first-stage coefficients is singular (for example "
                "fewer clusters than twice the number of instruments), so the set cannot be inverted"
            )
    else:
        details["confidence_set"] = None
        details["confidence_set_note"] = (
            "with several focal regressors the Anderson-Rubin confidence set is a region in "
            f"{p} dimensions; only the joint test of no effect is reported"
        )
    return TestResult(
        name=NAME,
        statistic=statistic,
        p_value=float(stats.f.sf(statistic, q, df)),
        df=[q, df],
        distribution="F",
        null_hypothesis=NULL_ONE if p == 1 else NULL_JOINT,
        source=SOURCE,
        details={**details, "distribution_note": DISTRIBUTION_NOTE},
    )


def anderson_rubin_statistic(system: ReducedFormSystem, values: np.ndarray) -> np.ndarray:
    """``AR(b) * q`` (chi-squared form) for every ``b`` in ``values`` (one focal regressor).

    Uses the weights ``(1, -b) / sqrt(1 + b^2)``, to which the statistic is
    invariant, so that very large |b| stays accurate.
    """
    norm = np.sqrt(1.0 + values**2)
    w = np.stack([1.0 / norm, -values / norm], axis=1)
    g = w @ system.coefficients.T
    q = system.n_instruments
    weights = (w[:, :, None] * w[:, None, :]).reshape(len(values), -1)
    v = (weights @ system.covariance.reshape(-1, q * q)).reshape(len(values), q, q)
    return np.einsum("ni,ni->n", g, np.linalg.solve(v, g[:, :, None])[:, :, 0])


def anderson_rubin_set(system: ReducedFormSystem, *, level: float) -> ConfidenceSet:
    """``{b : AR(b) <= F_crit(q, df)}`` by exact inversion."""
    q = system.n_instruments
    critical = q * float(stats.f.ppf(level, q, system.inference_df))
    pi = system.coefficients
    if system.kronecker or q == 1:
        metric, omega = _scalar_structure(system)
        a2 = pi[:, 1] @ metric @ pi[:, 1] - critical * omega[1, 1]
        a1 = -2.0 * (pi[:, 1] @ metric @ pi[:, 0]) + 2.0 * critical * omega[0, 1]
        a0 = pi[:, 0] @ metric @ pi[:, 0] - critical * omega[0, 0]
        return quadratic_set(a2, a1, a0, level=level, method=CLOSED_FORM)
    return _eigenvalue_set(system, critical=critical, level=level)


def _joint_covariance(system: ReducedFormSystem) -> np.ndarray:
    """Covariance of ``(pi_y, pi_x)`` stacked, for one focal regressor."""
    joint = system.stacked_covariance([0, 1])
    return (joint + joint.T) / 2


def _scalar_structure(system: ReducedFormSystem) -> tuple[np.ndarray, np.ndarray]:
    """``(H, omega)`` with ``Cov(pi_a, pi_b) = omega_ab H^{-1}``."""
    if system.kronecker:
        omega = system.residual_cross / (system.n_obs - system.n_params)
        return system.instrument_gram, omega
    return np.ones((1, 1)), system.covariance[:, :, 0, 0]


def _eigenvalue_set(system: ReducedFormSystem, *, critical: float, level: float) -> ConfidenceSet:
    """Boundaries from ``det(M0 + b M1 + b^2 M2) = 0``; pieces classified by the statistic."""
    q = system.n_instruments
    pi, cov = system.coefficients, system.covariance
    size = q + 1
    m0 = np.zeros((size, size))
    m1 = np.zeros((size, size))
    m2 = np.zeros((size, size))
    m0[:q, :q], m0[:q, q], m0[q, :q], m0[q, q] = cov[0, 0], pi[:, 0], pi[:, 0], critical
    m1[:q, :q], m1[:q, q], m1[q, :q] = -(cov[0, 1] + cov[1, 0]), -pi[:, 1], -pi[:, 1]
    m2[:q, :q] = cov[1, 1]
    identity, zero = np.eye(size), np.zeros((size, size))
    companion = np.block([[zero, identity], [-m0, -m1]])
    leading = np.block([[identity, zero], [zero, m2]])
    with np.errstate(divide="ignore", invalid="ignore"):
        eigenvalues = linalg.eigvals(companion, leading)
    finite = eigenvalues[np.isfinite(eigenvalues)]
    real = np.sort(finite.real[np.abs(finite.imag) <= 1e-8 * (1.0 + np.abs(finite.real))])

    def margin(values: np.ndarray) -> np.ndarray:
        return critical - anderson_rubin_statistic(system, values)

    roots = _polish(margin, real)
    if not roots:
        inside = margin(np.array([_probe(system)]))[0] >= 0
        return ConfidenceSet([(-math.inf, math.inf)] if inside else [], level, EIGENVALUE)
    probes = [roots[0] - max(1.0, abs(roots[0]))]
    probes += [(a + b) / 2 for a, b in zip(roots[:-1], roots[1:])]
    probes += [roots[-1] + max(1.0, abs(roots[-1]))]
    inside = margin(np.array(probes)) >= 0
    edges = [-math.inf, *roots, math.inf]
    pieces: list[tuple[float, float]] = []
    for k, accepted in enumerate(inside):
        if not accepted:
            continue
        if pieces and pieces[-1][1] == edges[k]:
            pieces[-1] = (pieces[-1][0], edges[k + 1])
        else:
            pieces.append((edges[k], edges[k + 1]))
    return ConfidenceSet(pieces, level, EIGENVALUE)


def _polish(margin: Callable[[np.ndarray], np.ndarray], candidates: np.ndarray) -> list[float]:
    """Keep candidates where the margin changes sign; refine each with Brent's method."""
    roots: list[float] = []
    for root in candidates:
        step = 1e-7 * max(1.0, abs(root))
        left, right = root - step, root + step
        values = margin(np.array([left, right]))
        if values[0] * values[1] > 0:
            continue
        refined = float(
            optimize.brentq(
                lambda b: float(margin(np.array([b]))[0]), left, right, xtol=1e-14 * max(1.0, abs(root)), rtol=1e-14
            )
        )
        if not roots or refined - roots[-1] > 1e-12 * max(1.0, abs(refined)):
            roots.append(refined)
    return roots


def _probe(system: ReducedFormSystem) -> float:
    """A finite point to classify a set without boundaries: the 2SLS estimate from the system."""
    pi = system.coefficients
    metric = system.instrument_gram
    denominator = pi[:, 1] @ metric @ pi[:, 1]
    if denominator <= 0:
        return 0.0
    return float(pi[:, 1] @ metric @ pi[:, 0] / denominator)

