"""Wild cluster bootstrap tests of no effect for claims with few clusters.

Cluster-robust tests over-reject when clusters are few (below about 50,
common practice; Cameron & Miller 2015). The wild cluster bootstrap with
restricted residuals imposes the null, multiplies each cluster's restricted
residuals by one random weight, and recomputes the claim's own cluster-robust
statistic. Two tests of ``beta = 0``:

* Anderson-Rubin (any number of focal regressors): the Wald test that the
  excluded instruments do not enter the reduced form. Restricted model
  ``y = W gamma + u``; bootstrap ``y* = W gamma~ + u~ v_g``.
* 2SLS Wald t-test, one focal regressor, by the wild restricted efficient
  (WRE) bootstrap of Davidson & MacKinnon (2010): the restricted structural
  residuals ``u~ = M_W y`` and the first-stage residuals from regressing x on
  ``[Z, W]`` and ``u~`` (with ``pi~`` the coefficients on ``[Z, W]``,
  ``v~ = x - [Z, W] pi~``) are multiplied by the same cluster weight:
  ``x* = [Z, W] pi~ + v~ v_g``, ``y* = W gamma~ + u~ v_g``.

Computation (MacKinnon 2023): every bootstrap quantity is a function of the
per-cluster cross-products ``A_g'A_g`` (computed once) and of the G weights,
so one replication costs a number of operations that depends on G and the
number of regressors, never on n. For the AR test, with ``P = ([Z,W]'[Z,W])^{-1}``,
``s_g = [Z,W]_g' u~_g`` and ``M_g = [Z,W]_g'[Z,W]_g``, the bootstrap coefficients
are ``pi* = sum_g (P s_g)_Z v_g`` and the cluster scores of the bootstrap
residuals ``(P s_g)_Z v_g - sum_h (P M_g P s_h)_Z v_h``. For the WRE test the
2SLS estimate, the partialled fitted regressor ``P~ x*`` and each cluster's
score follow from ``[Z,W]'x*`` and ``[Z,W]'y*``, linear in the weights.

Weights: Rademacher (+1/-1), or Webb's six-point distribution when there are
fewer than 12 clusters (Rademacher then has too few distinct draws). The
p-value is the share of replications whose statistic is at least as extreme
as the observed one. With absorbed fixed effects the bootstrap treats the
partialled data as given, which is exact when every fixed-effect group lies
within one cluster. One-way clustering only.

References
----------
Davidson, R. and MacKinnon, J. G. (2010). Wild bootstrap tests for IV
regression. Journal of Business & Economic Statistics 28(1), 128-144.
MacKinnon, J. G. (2023). Fast cluster bootstrap methods for linear
regression models. Econometrics and Statistics 26, 52-71.
Webb, M. D. (2023). Reworking wild bootstrap-based inference for clustered
errors. Canadian Journal of Economics 56(3), 839-858.
Cameron, A. C. and Miller, D. L. (2015). A practitioner's guide to
cluster-robust inference. Journal of Human Resources 50(2), 317-372.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from app.data.design import FEW_CLUSTERS
from app.estimation.covariance import ClusterRobust, VarianceEstimator
from app.estimation.findings import TestResult
from app.estimation.fits import LinearFit
from app.estimation.linalg import SingularMatrixError, inverse_pd, quadratic_form_inverse
from app.estimation.moments import Moments
from app.estimation.reduced_form_system import ReducedFormSystem, partialled_vector
from app.spec import BootstrapOptions

NAME = "Wild cluster bootstrap (restricted residuals)"
SOURCE = "Davidson & MacKinnon (2010); MacKinnon (2023) fast algorithm; Webb (2023) weights"
NULL = "the focal regressor has no effect (beta = 0)"
WEBB_BELOW = 12
CHUNK = 512
WEBB_WEIGHTS = np.array([-np.sqrt(1.5), -1.0, -np.sqrt(0.5), np.sqrt(0.5), 1.0, np.sqrt(1.5)])


@dataclass(frozen=True)
class ClusterPieces:
    """What every replication reuses.

    Attributes
    ----------
    instrument_rows
        ``[Z, W]_g' A_g`` per cluster (``G x k x width``): score sums of any residual vector.
    instrument_grams
        ``[Z, W]_g' [Z, W]_g`` per cluster.
    instrument_inverse
        ``([Z, W]'[Z, W])^{-1}``.
    restricted_scores
        ``[Z, W]_g' u~_g`` with the restricted residual ``u~ = M_W y``.
    factor_ar, factor_2sls
        The claim's cluster small-sample factors for the reduced form and for 2SLS.
    """

    instrument_rows: np.ndarray
    instrument_grams: np.ndarray
    instrument_inverse: np.ndarray
    restricted_scores: np.ndarray
    factor_ar: float
    factor_2sls: float


def wild_cluster_bootstrap(
    moments: Moments,
    variance: VarianceEstimator,
    *,
    system: ReducedFormSystem,
    tsls: LinearFit,
    tsls_t: float,
    options: BootstrapOptions,
) -> TestResult:
    """Bootstrap p-values of the AR and (one focal regressor) 2SLS Wald tests of no effect."""
    if not isinstance(variance, ClusterRobust):
        return TestResult.not_applicable(
            NAME,
            "the claim does not cluster its standard errors, so a cluster bootstrap does not apply",
            source=SOURCE,
            null_hypothesis=NULL,
        )
    if len(variance.dimensions) != 1:
        return TestResult.not_applicable(
            NAME,
            "the wild cluster bootstrap here handles one-way clustering; the claim clusters two ways",
            source=SOURCE,
            null_hypothesis=NULL,
        )
    clusters = variance.dimensions[0]
    g = clusters.n_clusters
    if g >= FEW_CLUSTERS:
        return TestResult.not_applicable(
            NAME,
            f"{g} clusters: with {FEW_CLUSTERS} or more, cluster-robust tests are usually adequate "
            "(common practice; Cameron & Miller 2015)",
            source=SOURCE,
            null_hypothesis=NULL,
        )
    q = moments.layout.n_instr
    singular = TestResult.undefined(
        NAME,
        f"the cluster-robust covariance of the {q} reduced-form coefficients is singular with {g} clusters, "
        "so the bootstrap statistics are undefined",
        source=SOURCE,
        null_hypothesis=NULL,
    )
    if g <= q:
        return singular
    try:
        observed_ar = quadratic_form_inverse(system.coefficients[:, 0], system.covariance[0, 0])
        pieces = cluster_pieces(moments, clusters.cross_products(), n_params_ar=system.n_params, n_params_2sls=tsls.n_params)
        weights = draw_weights(np.random.default_rng(options.seed), replications=options.replications, n_clusters=g)
        ar_draws = anderson_rubin_draws(moments, pieces, weights)
    except (SingularMatrixError, np.linalg.LinAlgError):
        return singular
    ar_p = float(np.mean(ar_draws >= observed_ar))
    details: dict[str, object] = {
        "replications": options.replications,
        "seed": options.seed,
        "weights": "Webb six-point" if g < WEBB_BELOW else "Rademacher",
        "clusters": g,
        "anderson_rubin": {
            "statistic": observed_ar / q,
            "p_value": ar_p,
            "null_hypothesis": "the excluded instruments do not enter the reduced form (no effect, valid with weak instruments)",
            "method": "wild cluster bootstrap with restricted residuals (WCR)",
        },
        "wald": _wald_entry(moments, pieces, weights, tsls_t=tsls_t),
    }
    return TestResult(
        name=NAME,
        statistic=observed_ar / q,
        p_value=ar_p,
        df=None,
        distribution=f"bootstrap ({options.replications} replications)",
        null_hypothesis=NULL,
        source=SOURCE,
        details=details,
    )


def _wald_entry(moments: Moments, pieces: ClusterPieces, weights: np.ndarray, *, tsls_t: float) -> dict[str, object]:
    """The WRE bootstrap of the 2SLS t-test, or the reason it is not reported."""
    if moments.layout.n_endog != 1:
        return _unavailable("the WRE bootstrap here is for one focal regressor")
    try:
        with np.errstate(divide="ignore", invalid="ignore"):
            draws = restricted_efficient_draws(moments, pieces, weights)
    except np.linalg.LinAlgError:
        return _unavailable("the restricted first stage is singular, so the WRE bootstrap is undefined")
    if not np.isfinite(tsls_t) or not np.all(np.isfinite(draws)):
        return _unavailable("a bootstrap 2SLS standard error is zero, so the t-statistics are undefined")
    return {
        "statistic": tsls_t,
        "p_value": float(np.mean(np.abs(draws) >= abs(tsls_t))),
        "null_hypothesis": "the 2SLS coefficient of the focal regressor is zero",
        "method": "wild restricted efficient bootstrap (WRE) of the 2SLS t-test",
    }


def _unavailable(reason: str) -> dict[str, object]:
    return {"statistic": None, "p_value": None, "reason": reason}


def draw_weights(rng: np.random.Generator, *, replications: int, n_clusters: int) -> np.ndarray:
    """``replications x G`` cluster weights: Rademacher, or Webb's six points for fewer than 12 clusters."""
    if n_clusters < WEBB_BELOW:
        return WEBB_WEIGHTS[rng.integers(0, 6, size=(replications, n_clusters))]
    return rng.choice(np.array([-1.0, 1.0]), size=(replications, n_clusters))


def cluster_pieces(moments: Moments, cross_products: np.ndarray, *, n_params_ar: int, n_params_2sls: int) -> ClusterPieces:
    """Per-cluster instrument cross-products, ``(Zf'Zf)^{-1}`` and the restricted score sums ``Zf_g' M_W y``."""
    instruments = moments.layout.instruments
    rows = cross_products[:, instruments, :]
    inverse = inverse_pd(moments.gram[np.ix_(instruments, instruments)])
    restricted = rows @ partialled_vector(moments, 0)
    g, n = cross_products.shape[0], moments.n_obs
    common = g / (g - 1) * (n - 1)
    return ClusterPieces(
        instrument_rows=rows,
        instrument_grams=rows[:, :, instruments],
        instrument_inverse=inverse,
        restricted_scores=restricted,
        factor_ar=common / (n - n_params_ar),
        factor_2sls=common / (n - n_params_2sls),
    )


def anderson_rubin_draws(moments: Moments, pieces: ClusterPieces, weights: np.ndarray) -> np.ndarray:
    """Bootstrap Wald statistics (chi-squared form) of the excluded instruments in the reduced form."""
    q = moments.layout.n_instr
    inverse = pieces.instrument_inverse
    scores = pieces.restricted_scores
    coefficient_map = scores @ inverse[:, :q]
    sandwich = np.einsum("qk,gkl,lm->gqm", inverse[:q, :], pieces.instrument_grams, inverse)
    coupling = np.einsum("gqm,hm->ghq", sandwich, scores)
    draws = np.empty(weights.shape[0])
    for start in range(0, weights.shape[0], CHUNK):
        v = weights[start : start + CHUNK]
        coefficients = v @ coefficient_map
        cluster_scores = v[:, :, None] * coefficient_map[None] - np.einsum("ghq,bh->bgq", coupling, v)
        covariance = pieces.factor_ar * np.einsum("bgq,bgr->bqr", cluster_scores, cluster_scores)
        solved = np.linalg.solve(covariance, coefficients[:, :, None])[:, :, 0]
        draws[start : start + CHUNK] = np.einsum("bq,bq->b", coefficients, solved)
    return draws


def restricted_efficient_draws(moments: Moments, pieces: ClusterPieces, weights: np.ndarray) -> np.ndarray:
    """Bootstrap 2SLS t-statistics of ``beta = 0`` under the WRE data-generating process."""
    layout = moments.layout
    gram = moments.gram
    instruments = layout.instruments
    q = layout.n_instr
    exog_in_z = list(range(q, len(instruments)))
    structural = partialled_vector(moments, 0)
    restricted_gamma = np.linalg.solve(gram[np.ix_(layout.exog, layout.exog)], gram[layout.exog, 0])
    first_stage = _efficient_first_stage(moments, structural)
    first_residual = moments.column(layout.endog[0])
    first_residual[instruments] -= first_stage
    grams = pieces.instrument_grams
    inverse = pieces.instrument_inverse
    total = gram[np.ix_(instruments, instruments)]
    exog_inverse = np.linalg.inv(total[np.ix_(exog_in_z, exog_in_z)])
    structural_scores = pieces.restricted_scores
    first_scores = pieces.instrument_rows @ first_residual
    fitted_by_cluster = grams @ first_stage
    exog_by_cluster = grams[:, :, exog_in_z]
    draws = np.empty(weights.shape[0])
    for start in range(0, weights.shape[0], CHUNK):
        v = weights[start : start + CHUNK]
        z_x = total @ first_stage + v @ first_scores
        z_y = total[:, exog_in_z] @ restricted_gamma + v @ structural_scores
        w_x, w_y = z_x[:, exog_in_z], z_y[:, exog_in_z]
        direction = z_x @ inverse
        direction[:, exog_in_z] -= w_x @ exog_inverse
        signal = np.einsum("bk,bk->b", z_x, direction)
        beta = np.einsum("bk,bk->b", z_y, direction) / signal
        gamma = (w_y - w_x * beta[:, None]) @ exog_inverse
        scores = np.einsum("bk,gkw,bw->bg", direction, exog_by_cluster, restricted_gamma[None, :] - gamma)
        scores += (direction @ structural_scores.T) * v
        scores -= ((direction @ fitted_by_cluster.T) + (direction @ first_scores.T) * v) * beta[:, None]
        variance = pieces.factor_2sls * np.einsum("bg,bg->b", scores, scores) / signal**2
        draws[start : start + CHUNK] = beta / np.sqrt(variance)
    return draws


def _efficient_first_stage(moments: Moments, structural: np.ndarray) -> np.ndarray:
    """Coefficients on ``[Z, W]`` of the regression of x on ``[Z, W]`` and the restricted residual."""
    layout = moments.layout
    gram = moments.gram
    instruments = layout.instruments
    x = layout.endog[0]
    cross_z_u = gram[instruments, :] @ structural
    matrix = np.block(
        [
            [gram[np.ix_(instruments, instruments)], cross_z_u[:, None]],
            [cross_z_u[None, :], np.array([[moments.quad(structural, structural)]])],
        ]
    )
    target = np.concatenate([gram[instruments, x], [float(gram[x, :] @ structural)]])
    return np.linalg.solve(matrix, target)[:-1]

