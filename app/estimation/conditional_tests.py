"""Kleibergen's K (score) test and Moreira's conditional likelihood ratio (CLR) test.

Both test ``beta = b`` for one focal regressor with correct size however
weak the instruments are, and both have more power than the Anderson-Rubin
test when the model is over-identified. With the reduced-form coefficients
``pi_y, pi_x`` and their joint covariance from
:mod:`app.estimation.reduced_form_system` (the claim's variance estimator):

    g = pi_y - b pi_x,                      V_gg = Cov(g),   V_xg = Cov(pi_x, g)
    D = pi_x - V_xg V_gg^{-1} g,            V_dd = Cov(pi_x) - V_xg V_gg^{-1} V_xg'
    AR = g' V_gg^{-1} g                     (chi-squared form)
    K  = (D' V_gg^{-1} g)^2 / (D' V_gg^{-1} D)          ~ chi2(1)
    r  = D' V_dd^{-1} D                     (conditioning statistic)
    LR = (AR - r + sqrt((AR + r)^2 - 4 r (AR - K))) / 2

D is the first-stage coefficient made independent of g under the null, so r
measures instrument strength without using the tested value. With
homoskedastic errors these are Moreira's (2003) statistics in the notation
of Andrews, Moreira & Stock (2006): AR = S'S, K = (S'T)^2 / T'T, r = T'T.
With robust or cluster errors they are Kleibergen's (2005, 2007) GMM forms.

The CLR p-value is conditional on r. With ``Q_1 ~ chi2(1)`` and
``Q_{q-1} ~ chi2(q-1)`` independent, LR is the positive root of
``x^2 - (Q_1 + Q_{q-1} - r) x - r Q_1 = 0``, so LR <= m exactly when
``(m + r) Q_1 + m Q_{q-1} <= m (m + r)``, i.e. ``Q_1 <= m (1 - Q_{q-1} / (m + r))``:

    P(LR <= m | r) = integral_0^U erf( sqrt(m (U - u) / (2U)) ) f_{q-1}(u) du,   U = m + r,

with ``f_{q-1}`` the chi2(q-1) density. The integrand is ``(U - u)^{1/2} u^{(q-3)/2}``
times a smooth function, so a Gauss-Jacobi rule with exactly those weights
(64 nodes) gives the integral to about 1e-12; when U lies beyond the
chi2(q-1) quantile of 1 - 1e-16 the integral stops there, where the
integrand is smooth. With one instrument LR = K = AR ~ chi2(1).

Confidence sets: by inverting each test on a grid that covers the real line
(:func:`app.estimation.confidence_sets.grid_inversion`).

References
----------
Kleibergen, F. (2002). Pivotal statistics for testing structural parameters
in instrumental variables regression. Econometrica 70(5), 1781-1803.
Kleibergen, F. (2005). Testing parameters in GMM without assuming that they
are identified. Econometrica 73(4), 1103-1123.
Kleibergen, F. (2007). Generalizing weak instrument robust IV statistics
towards multiple parameters, unrestricted covariance matrices and
identification statistics. Journal of Econometrics 139(1), 181-216.
Moreira, M. J. (2003). A conditional likelihood ratio test for structural
models. Econometrica 71(4), 1027-1048.
Andrews, D. W. K., Moreira, M. J. and Stock, J. H. (2006). Optimal two-sided
invariant similar tests for instrumental variables regression. Econometrica
74(3), 715-752.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy import special, stats

from app.estimation.confidence_sets import grid_inversion
from app.estimation.findings import TestResult
from app.estimation.inference import CONFIDENCE_LEVEL
from app.estimation.linalg import is_positive_definite
from app.estimation.reduced_form_system import EXACT_FIRST_STAGE, ReducedFormSystem

QUADRATURE_NODES = 64
NULL = "the focal regressor has no effect (beta = 0); valid however weak the instruments are"
SOURCE_K = "Kleibergen (2002, 2005)"
SOURCE_CLR = "Moreira (2003); Andrews, Moreira & Stock (2006); robust form: Kleibergen (2005, 2007)"
NAMES = {"kleibergen_k": "Kleibergen K (score) test", "clr": "Conditional likelihood ratio (CLR) test"}
SOURCES = {"kleibergen_k": SOURCE_K, "clr": SOURCE_CLR}
K_DISTRIBUTION = (
    "referred to chi-squared(1), its asymptotic distribution (Kleibergen 2002); the Anderson-Rubin test uses "
    "F(q, df), so with few degrees of freedom its set is somewhat wider even where the statistics coincide"
)
CLR_DISTRIBUTION = (
    "referred to its null distribution conditional on r, built from chi-squared variables (Moreira 2003), "
    "asymptotic like the K test's; with one instrument it is chi-squared(1) and CLR = K = the chi-squared "
    "form of Anderson-Rubin, whose set differs only by its F(q, df) reference"
)


@dataclass(frozen=True)
class ConditionalStatistics:
    """AR (chi-squared form), K, the conditioning statistic r and LR at each tested value."""

    anderson_rubin: np.ndarray
    k: np.ndarray
    rank: np.ndarray
    likelihood_ratio: np.ndarray


def conditional_statistics(system: ReducedFormSystem, values: np.ndarray) -> ConditionalStatistics:
    """The statistics at every ``b`` in ``values`` (one focal regressor), vectorised.

    Computed in the rotated coordinates ``w = (1, -b) / N`` and ``a = (b, 1) / N``
    (``N = sqrt(1 + b^2)``): g = Pi w and D from h = Pi a. The statistics are
    invariant to this scaling (D is determined up to a factor by any direction
    independent of w), and the rotation keeps them accurate for very large |b|,
    where ``pi_x - V_xg V_gg^{-1} g`` would cancel catastrophically.
    """
    pi, cov = system.coefficients, system.covariance
    norm = np.sqrt(1.0 + values**2)
    w = np.stack([1.0 / norm, -values / norm], axis=1)
    a = np.stack([values / norm, 1.0 / norm], axis=1)
    g = w @ pi.T
    h = a @ pi.T
    v_gg = _combine(w, w, cov)
    v_hg = _combine(a, w, cov)
    v_hh = _combine(a, a, cov)
    solved_g = np.linalg.solve(v_gg, g[:, :, None])[:, :, 0]
    d = h - np.einsum("nij,nj->ni", v_hg, solved_g)
    solved_d = np.linalg.solve(v_gg, d[:, :, None])[:, :, 0]
    v_dd = v_hh - v_hg @ np.linalg.solve(v_gg, np.swapaxes(v_hg, 1, 2))
    ar = np.einsum("ni,ni->n", g, solved_g)
    cross = np.einsum("ni,ni->n", d, solved_g)
    strength = np.einsum("ni,ni->n", d, solved_d)
    tiny = np.finfo(float).eps * np.maximum(1.0, ar)
    k = np.where(strength > tiny, cross**2 / np.where(strength > tiny, strength, 1.0), 0.0)
    k = np.minimum(k, ar)
    rank = np.einsum("ni,ni->n", d, np.linalg.solve(v_dd, d[:, :, None])[:, :, 0])
    root = np.sqrt(np.maximum((ar + rank) ** 2 - 4.0 * rank * (ar - k), 0.0))
    return ConditionalStatistics(anderson_rubin=ar, k=k, rank=rank, likelihood_ratio=np.maximum((ar - rank + root) / 2, 0.0))


def _combine(left: np.ndarray, right: np.ndarray, covariance: np.ndarray) -> np.ndarray:
    """``sum_ab left[n, a] right[n, b] covariance[a, b]`` for every n, as one matrix product."""
    q = covariance.shape[-1]
    weights = (left[:, :, None] * right[:, None, :]).reshape(len(left), -1)
    return (weights @ covariance.reshape(-1, q * q)).reshape(len(left), q, q)


def clr_p_value(statistic: np.ndarray, rank: np.ndarray, n_instruments: int) -> np.ndarray:
    """``P(LR > m | r)`` under the null (see the module notes), vectorised over m and r."""
    m = np.atleast_1d(np.asarray(statistic, dtype=float))
    r = np.broadcast_to(np.atleast_1d(np.asarray(rank, dtype=float)), m.shape)
    if n_instruments == 1:
        return stats.chi2.sf(m, 1)
    rule = _jacobi_rules(n_instruments)
    positive = m > 0
    m_safe = np.where(positive, m, 1.0)
    total = m_safe + np.maximum(r, 0.0)
    inside = total <= rule.truncation
    below = np.empty_like(m_safe)
    if inside.any():
        u_total = total[inside][:, None]
        nodes = u_total * rule.sqrt_nodes[None, :]
        spread = m_safe[inside][:, None] * (u_total - nodes) / (2 * u_total)
        smooth = _erf_over_root(spread) * np.exp(-nodes / 2)
        scale = np.sqrt(m_safe[inside] / (2 * total[inside])) * total[inside] ** (1.5 + rule.beta)
        below[inside] = rule.constant * scale * (smooth @ rule.sqrt_weights)
    if (~inside).any():
        nodes = rule.truncation * rule.plain_nodes
        spread = m_safe[~inside][:, None] * (total[~inside][:, None] - nodes[None, :]) / (2 * total[~inside][:, None])
        integrand = special.erf(np.sqrt(spread)) * np.exp(-nodes[None, :] / 2)
        below[~inside] = rule.constant * rule.truncation ** (1 + rule.beta) * (integrand @ rule.plain_weights)
    return np.where(positive, np.clip(1.0 - below, 0.0, 1.0), 1.0)


@dataclass(frozen=True)
class _JacobiRules:
    """Gauss-Jacobi nodes on [0, 1] for weights ``(1 - t)^{1/2} t^beta`` and ``t^beta``, beta = (q - 3)/2."""

    beta: float
    sqrt_nodes: np.ndarray
    sqrt_weights: np.ndarray
    plain_nodes: np.ndarray
    plain_weights: np.ndarray
    truncation: float
    constant: float


@lru_cache(maxsize=32)
def _jacobi_rules(n_instruments: int) -> _JacobiRules:
    beta = (n_instruments - 3) / 2.0
    x_sqrt, w_sqrt = special.roots_jacobi(QUADRATURE_NODES, 0.5, beta)
    x_plain, w_plain = special.roots_jacobi(QUADRATURE_NODES, 0.0, beta)
    degrees = n_instruments - 1
    return _JacobiRules(
        beta=beta,
        sqrt_nodes=(1.0 + x_sqrt) / 2.0,
        sqrt_weights=w_sqrt / 2.0 ** (1.5 + beta),
        plain_nodes=(1.0 + x_plain) / 2.0,
        plain_weights=w_plain / 2.0 ** (1.0 + beta),
        truncation=float(stats.chi2.isf(1e-16, degrees)),
        constant=1.0 / (2.0 ** (degrees / 2.0) * special.gamma(degrees / 2.0)),
    )


def _erf_over_root(z: np.ndarray) -> np.ndarray:
    """``erf(sqrt(z)) / sqrt(z)``, an entire function of z equal to 2/sqrt(pi) at 0."""
    root = np.sqrt(np.maximum(z, 0.0))
    return np.where(root > 1e-8, special.erf(root) / np.where(root > 1e-8, root, 1.0), 2.0 / np.sqrt(np.pi))


def conditional_tests(system: ReducedFormSystem, *, level: float = CONFIDENCE_LEVEL) -> dict[str, TestResult]:
    """``kleibergen_k`` and ``clr``: the test of no effect and the confidence set of each."""
    if system.n_endog != 1:
        reason = (
            "the K and CLR tests here are for one focal regressor; with several, read the joint "
            "Anderson-Rubin test of no effect"
        )
        return {key: TestResult.not_applicable(NAMES[key], reason, source=SOURCES[key], null_hypothesis=NULL) for key in NAMES}
    joint = system.stacked_covariance([0, 1])
    if system.exact_first_stage:
        return {key: TestResult.undefined(NAMES[key], EXACT_FIRST_STAGE, source=SOURCES[key], null_hypothesis=NULL) for key in NAMES}
    if not is_positive_definite((joint + joint.T) / 2):
        reason = (
            "the joint covariance of the reduced-form and first-stage coefficients is singular (for example "
            "fewer clusters than twice the number of instruments), so the K and CLR statistics are undefined"
        )
        return {key: TestResult.undefined(NAMES[key], reason, source=SOURCES[key], null_hypothesis=NULL) for key in NAMES}
    q = system.n_instruments
    at_zero = conditional_statistics(system, np.zeros(1))
    center, scale = _center_and_scale(system)
    k_critical = float(stats.chi2.ppf(level, 1))

    def k_margin(values: np.ndarray) -> np.ndarray:
        return k_critical - conditional_statistics(system, values).k

    def clr_margin(values: np.ndarray) -> np.ndarray:
        computed = conditional_statistics(system, values)
        return clr_p_value(computed.likelihood_ratio, computed.rank, q) - (1.0 - level)

    k_set = grid_inversion(k_margin, center=center, scale=scale, level=level)
    clr_set = grid_inversion(clr_margin, center=center, scale=scale, level=level)
    rank_at_zero = float(at_zero.rank[0])
    k_value = float(at_zero.k[0])
    lr_value = float(at_zero.likelihood_ratio[0])
    return {
        "kleibergen_k": TestResult(
            name=NAMES["kleibergen_k"],
            statistic=k_value,
            p_value=float(stats.chi2.sf(k_value, 1)),
            df=1,
            distribution="chi2",
            null_hypothesis=NULL,
            source=SOURCE_K,
            details={"tested_value": 0.0, "distribution_note": K_DISTRIBUTION, **k_set.to_details()},
        ),
        "clr": TestResult(
            name=NAMES["clr"],
            statistic=lr_value,
            p_value=float(clr_p_value(np.array([lr_value]), np.array([rank_at_zero]), q)[0]),
            df=None,
            distribution="conditional on r (Moreira 2003)",
            null_hypothesis=NULL,
            source=SOURCE_CLR,
            details={
                "tested_value": 0.0,
                "conditioning_statistic": rank_at_zero,
                "distribution_note": CLR_DISTRIBUTION,
                **clr_set.to_details(),
            },
        ),
    }


def _center_and_scale(system: ReducedFormSystem) -> tuple[float, float]:
    """The 2SLS estimate implied by the system and its standard error, to place the inversion grid."""
    pi = system.coefficients
    metric = system.instrument_gram
    strength = float(pi[:, 1] @ metric @ pi[:, 1])
    if strength <= 0:
        return 0.0, 1.0
    estimate = float(pi[:, 1] @ metric @ pi[:, 0]) / strength
    weights = metric @ pi[:, 1] / strength
    cov = system.covariance
    v_gg = cov[0, 0] - estimate * (cov[0, 1] + cov[1, 0]) + estimate**2 * cov[1, 1]
    variance = float(weights @ v_gg @ weights)
    return estimate, float(np.sqrt(variance)) if variance > 0 else max(1.0, abs(estimate))
