"""How strongly the excluded instruments move the focal regressors: rank-based statistics.

With ``Pi`` the q x p first-stage coefficients of the excluded instruments
(W partialled out), ``Q = Z~'Z~`` and the first-stage residuals ``V``:

* Cragg-Donald F (Cragg & Donald 1993; Stock & Yogo 2005): the smallest
  eigenvalue of ``Sigma^{-1/2}' Pi' Q Pi Sigma^{-1/2} / q`` with
  ``Sigma = V'V / (n - L)``. Assumes homoskedastic errors; with one focal
  regressor it is the classical first-stage F.
* Kleibergen-Paap rk statistics (Kleibergen & Paap 2006) test that ``Pi`` has
  rank p - 1 (under-identification) with the claim's own variance estimator.
  ``Theta = R_z Pi R_x^{-1}`` (Cholesky factors ``Q = R_z'R_z`` and
  ``X~'X~ = R_x'R_x``); with ``U``, ``V`` the singular vectors of Theta for its
  q - p + 1 and 1 smallest singular values, ``lambda = U' Theta V`` and
  ``rk = lambda' [Cov(lambda)]^{-1} lambda`` with
  ``Cov(vec Theta) = (R_x^{-T} (x) R_z) Cov(vec Pi) (R_x^{-T} (x) R_z)'``.
  The Wald form uses the first-stage residuals and the claim's small-sample
  factor; ``rk Wald F = rk / q``. It equals the robust first-stage Wald F with
  one focal regressor and the Cragg-Donald F with homoskedastic errors. The
  LM form evaluates the covariance under the null ``Pi = 0`` (residuals
  ``M_W X``, no small-sample factor), is chi-squared with q - p + 1 degrees of
  freedom, and equals Anderson's (1951) canonical-correlation statistic
  ``n r_min^2`` with homoskedastic errors.
* Sanderson-Windmeijer conditional F per focal regressor (Sanderson &
  Windmeijer 2016), for several focal regressors: x_j is regressed by 2SLS on
  the other focal regressors, and the residual's excluded-instrument
  coefficients ``theta_j = pi_j - Pi_-j delta_j`` are tested with the claim's
  variance estimator; ``F = Wald / (q - p + 1)``, F(q - p + 1, df). With
  homoskedastic errors this is the paper's F; with robust or cluster errors
  it is the Wald form evaluated at the 2SLS ``delta_j``.

References
----------
Anderson, T. W. (1951). Estimating linear restrictions on regression
coefficients for multivariate normal distributions. Annals of Mathematical
Statistics 22(3), 327-351.
Cragg, J. G. and Donald, S. G. (1993). Testing identifiability and
specification in instrumental variable models. Econometric Theory 9(2), 222-240.
Stock, J. H. and Yogo, M. (2005). Testing for weak instruments in linear IV
regression. In Andrews and Stock (eds.), Identification and Inference for
Econometric Models, Cambridge University Press, 80-108.
Kleibergen, F. and Paap, R. (2006). Generalized reduced rank tests using the
singular value decomposition. Journal of Econometrics 133(1), 97-126.
Sanderson, E. and Windmeijer, F. (2016). A weak instrument F-test in linear IV
models with multiple endogenous variables. Journal of Econometrics 190(2), 212-221.
"""

from __future__ import annotations

import numpy as np
from scipy import linalg

from app.estimation.covariance import VarianceEstimator
from app.estimation.findings import TestResult
from app.estimation.inference import chi2_p, f_p
from app.estimation.linalg import SingularMatrixError, inverse_pd, is_positive_definite, quadratic_form_inverse
from app.estimation.moments import Moments
from app.estimation.projected_meats import projected_meats
from app.estimation.reduced_form_system import EXACT_FIRST_STAGE, ReducedFormSystem, partialled_cross, partialled_vector

RANK_NULL = "the instruments do not identify the focal regressors (the first-stage coefficient matrix has reduced rank)"
SOURCE_CD = "Cragg & Donald (1993); Stock & Yogo (2005)"
SOURCE_KP = "Kleibergen & Paap (2006)"
SOURCE_SW = "Sanderson & Windmeijer (2016)"
STRENGTH_NOTE = (
    "a strength statistic: compare it with critical values (Stock-Yogo, effective F), not with a p-value; "
    "a rule of thumb of the trade reads values below 10 as weak (Staiger & Stock 1997), common practice only"
)


def strength_statistics(
    moments: Moments, variance: VarianceEstimator, system: ReducedFormSystem, *, names: list[str]
) -> dict[str, TestResult]:
    """``cragg_donald_f``, ``kleibergen_paap_rk_f``, ``kleibergen_paap_rk_lm`` and ``sanderson_windmeijer_f``."""
    results = {"cragg_donald_f": cragg_donald_f(system)}
    results.update(kleibergen_paap(moments, variance, system))
    results["sanderson_windmeijer_f"] = sanderson_windmeijer(system, names=names)
    return results


def cragg_donald_f(system: ReducedFormSystem) -> TestResult:
    """Minimum-eigenvalue F of Cragg & Donald, with ``Sigma = V'V / (n - L)``."""
    name = "Cragg-Donald minimum-eigenvalue F"
    q, p = system.n_instruments, system.n_endog
    sigma = system.residual_cross[1:, 1:] / (system.n_obs - system.n_params)
    pi = system.coefficients[:, 1:]
    signal = pi.T @ system.instrument_gram @ pi
    if system.exact_first_stage:
        return TestResult.undefined(name, EXACT_FIRST_STAGE, source=SOURCE_CD, null_hypothesis=RANK_NULL)
    if not is_positive_definite(sigma):
        return TestResult.undefined(
            name, "the first-stage residuals are collinear (the instruments predict a focal regressor exactly)", source=SOURCE_CD
        )
    smallest = float(linalg.eigh((signal + signal.T) / 2, sigma, eigvals_only=True)[0])
    return TestResult(
        name=name,
        statistic=smallest / q,
        p_value=None,
        df=[q, system.n_obs - system.n_params],
        distribution=None,
        null_hypothesis=RANK_NULL,
        source=SOURCE_CD,
        details={"assumption": "homoskedastic errors", "note": STRENGTH_NOTE, "n_endog": p},
    )


def kleibergen_paap(moments: Moments, variance: VarianceEstimator, system: ReducedFormSystem) -> dict[str, TestResult]:
    """rk Wald F and rk LM statistics with the claim's variance estimator."""
    q, p = system.n_instruments, system.n_endog
    names = {"kleibergen_paap_rk_f": "Kleibergen-Paap rk Wald F", "kleibergen_paap_rk_lm": "Kleibergen-Paap rk LM test"}
    if system.exact_first_stage:
        return {key: TestResult.undefined(label, EXACT_FIRST_STAGE, source=SOURCE_KP, null_hypothesis=RANK_NULL) for key, label in names.items()}
    pi = system.coefficients[:, 1:]
    try:
        root_z = linalg.cholesky(system.instrument_gram, lower=False)
        root_x = linalg.cholesky(partialled_cross(moments, moments.layout.endog), lower=False)
    except linalg.LinAlgError:
        reason = "the instruments or the focal regressors are collinear once the controls are partialled out"
        return {key: TestResult.undefined(label, reason, source=SOURCE_KP, null_hypothesis=RANK_NULL) for key, label in names.items()}
    inverse_x = linalg.solve_triangular(root_x, np.eye(p))
    theta = root_z @ pi @ inverse_x
    left, _, right_t = np.linalg.svd(theta)
    select = np.kron(right_t.T[:, p - 1 :].T, left[:, p - 1 :].T)
    transform = select @ np.kron(inverse_x.T, root_z)
    statistic_vector = select @ theta.ravel(order="F")
    targets = list(range(1, 1 + p))
    wald_covariance = transform @ system.stacked_covariance(targets) @ transform.T
    lm_covariance = transform @ _null_covariance(moments, variance) @ transform.T
    degrees = q - p + 1
    results: dict[str, TestResult] = {}
    try:
        rk_wald = quadratic_form_inverse(statistic_vector, (wald_covariance + wald_covariance.T) / 2)
        results["kleibergen_paap_rk_f"] = TestResult(
            name=names["kleibergen_paap_rk_f"],
            statistic=rk_wald / q,
            p_value=None,
            df=[q, system.inference_df],
            distribution=None,
            null_hypothesis=RANK_NULL,
            source=SOURCE_KP,
            details={"rk_wald_chi2": rk_wald, "variance": variance.kind.value, "note": STRENGTH_NOTE},
        )
    except SingularMatrixError:
        results["kleibergen_paap_rk_f"] = TestResult.undefined(
            names["kleibergen_paap_rk_f"], _singular_reason(), source=SOURCE_KP, null_hypothesis=RANK_NULL
        )
    try:
        rk_lm = quadratic_form_inverse(statistic_vector, (lm_covariance + lm_covariance.T) / 2)
        results["kleibergen_paap_rk_lm"] = TestResult(
            name=names["kleibergen_paap_rk_lm"],
            statistic=rk_lm,
            p_value=chi2_p(rk_lm, degrees),
            df=degrees,
            distribution="chi2",
            null_hypothesis=RANK_NULL,
            source=SOURCE_KP,
            details={
                "variance": variance.kind.value,
                "reading": "a small p-value says the instruments identify the model at all; it does not say they are strong",
            },
        )
    except SingularMatrixError:
        results["kleibergen_paap_rk_lm"] = TestResult.undefined(
            names["kleibergen_paap_rk_lm"], _singular_reason(), source=SOURCE_KP, null_hypothesis=RANK_NULL
        )
    return results


def _null_covariance(moments: Moments, variance: VarianceEstimator) -> np.ndarray:
    """``Cov(vec Pi)`` under ``Pi = 0``: scores ``Z~_i x~_i`` with ``x~ = M_W x``, no small-sample factor."""
    layout = moments.layout
    q, p = layout.n_instr, layout.n_endog
    select = layout.selector(layout.instruments)
    to_excluded = select @ inverse_pd(moments.gram[np.ix_(layout.instruments, layout.instruments)])[:, :q]
    restricted = np.column_stack([partialled_vector(moments, column) for column in layout.endog])
    blocks = projected_meats(variance, to_excluded, restricted, n_params=None)
    return blocks.transpose(0, 2, 1, 3).reshape(p * q, p * q)


def sanderson_windmeijer(system: ReducedFormSystem, *, names: list[str]) -> TestResult:
    """Conditional F per focal regressor; not applicable with one focal regressor."""
    name = "Sanderson-Windmeijer conditional F"
    q, p = system.n_instruments, system.n_endog
    if p == 1:
        return TestResult.not_applicable(
            name,
            "the conditional F is for claims with several focal regressors; with one it equals the first-stage F",
            source=SOURCE_SW,
        )
    degrees = q - p + 1
    metric = system.instrument_gram
    pi = system.coefficients[:, 1:]
    entries = []
    for j in range(p):
        others = [k for k in range(p) if k != j]
        pi_others = pi[:, others]
        delta = np.linalg.solve(pi_others.T @ metric @ pi_others, pi_others.T @ metric @ pi[:, j])
        theta = pi[:, j] - pi_others @ delta
        weights = np.zeros(1 + p)
        weights[1 + j] = 1.0
        weights[[1 + k for k in others]] = -delta
        try:
            wald = quadratic_form_inverse(theta, system.combination_covariance(weights))
        except SingularMatrixError:
            entries.append({"regressor": names[j], "statistic": None, "p_value": None, "reason": _singular_reason()})
            continue
        statistic = wald / degrees
        entries.append(
            {
                "regressor": names[j],
                "statistic": statistic,
                "p_value": f_p(statistic, degrees, system.inference_df),
                "wald_chi2": wald,
            }
        )
    computed = [entry["statistic"] for entry in entries if entry["statistic"] is not None]
    return TestResult(
        name=name,
        statistic=min(computed) if computed else None,
        p_value=None,
        df=[degrees, system.inference_df],
        distribution="F",
        null_hypothesis="the instruments do not identify this focal regressor given the others",
        source=SOURCE_SW,
        details={"by_regressor": entries, "statistic_shown": "the smallest conditional F", "note": STRENGTH_NOTE},
    )


def _singular_reason() -> str:
    return (
        "the covariance of the first-stage coefficients is singular (for example fewer clusters than "
        "instruments), so the statistic is undefined"
    )

