"""Plausibly exogenous instruments: how large a direct effect would overturn the claim?

Conley, Hansen & Rossi (2012) let the instruments affect the outcome directly,
``y = X beta + Z gamma + W delta + u``, with ``gamma`` known only to lie in a
set. For each gamma, 2SLS of ``y - Z gamma`` gives

    beta(gamma) = beta_2SLS - A gamma,     e(gamma) = e - sum_k gamma_k r_k,

with ``A`` the 2SLS coefficients of the instruments themselves (as outcomes)
and ``r_k`` their 2SLS residuals, so its variance (claim's estimator) is a
quadratic form in ``(1, -gamma)`` of a few meats. The union of the 95%
intervals over the box ``|gamma_k| <= s_k`` (the "union of confidence
intervals") is ``[min lower, max upper]``; the lower end
``beta(gamma) - c se(gamma)`` is concave in gamma and the upper end convex,
so both extremes lie at vertices of the box, which are enumerated exactly.
``c`` is the critical value of the claim's own 2SLS interval, so at
``gamma = 0`` the union is that interval.

The break-even bound is the smallest box (scaled by t >= 0) whose union
contains zero: along each vertex direction the crossing solves a quadratic
in t, and the smallest crossing over vertices is the answer.

Boxes: with ``direct_effect_bound = delta`` in the claim, ``|gamma_k| <= delta``
for every excluded instrument (outcome units per unit of the instrument). Without
it, a default grid bounds each instrument's direct effect by a share
(5, 10, 25, 50%) of its own reduced-form coefficient, i.e. of its total
effect on the outcome. Both break-even values are reported: the common delta,
and the share of the reduced-form coefficient.

References
----------
Conley, T. G., Hansen, C. B. and Rossi, P. E. (2012). Plausibly exogenous.
Review of Economics and Statistics 94(1), 260-272.
"""

from __future__ import annotations

import itertools
import math

import numpy as np

from app.estimation.covariance import VarianceEstimator
from app.estimation.findings import TestResult
from app.estimation.fits import LinearFit
from app.estimation.inference import critical_value
from app.estimation.moments import Moments
from app.estimation.projected_meats import projected_meats

NAME = "Plausibly exogenous instruments: union of confidence intervals"
SOURCE = "Conley, Hansen & Rossi (2012), union-of-confidence-intervals method"
DEFAULT_SHARES = (0.05, 0.10, 0.25, 0.50)
MAX_INSTRUMENTS = 12


NULL = (
    "the focal regressor has no effect (beta = 0), allowing each instrument a direct effect on the outcome "
    "anywhere in [-delta, delta]; rejected only if zero lies outside every 2SLS interval over that range"
)


def plausibly_exogenous(
    moments: Moments,
    variance: VarianceEstimator,
    *,
    tsls: LinearFit,
    reduced_form: np.ndarray,
    focal: list[str],
    instruments: list[str],
    bound: float | None,
) -> TestResult:
    """Union of 2SLS intervals over bounded direct effects of the instruments, and the break-even bounds."""
    layout = moments.layout
    q = layout.n_instr
    if q > MAX_INSTRUMENTS:
        return TestResult.not_applicable(
            NAME, f"the exact vertex search is limited to {MAX_INSTRUMENTS} instruments (the claim has {q})", source=SOURCE
        )
    slopes, meats = _direct_effect_pieces(moments, variance, tsls)
    critical = critical_value(variance.inference_df(tsls.n_params))
    shares = np.abs(reduced_form)
    entries = []
    for j, regressor in enumerate(focal):
        pieces = _Pieces(estimate=float(tsls.params[j]), slopes=slopes[j], meat=meats[j], critical=critical)
        if bound is not None:
            boxes = [{"delta": bound, "bounds": [bound] * q, "interval": pieces.union(np.full(q, bound))}]
        else:
            boxes = [
                {"share_of_reduced_form": share, "bounds": (share * shares).tolist(), "interval": pieces.union(share * shares)}
                for share in DEFAULT_SHARES
            ]
        for box in boxes:
            low, high = box["interval"]
            box["excludes_zero"] = low > 0 or high < 0
        entries.append(
            {
                "regressor": regressor,
                "estimate": pieces.estimate,
                "interval_without_direct_effect": pieces.union(np.zeros(q)),
                "boxes": boxes,
                "break_even_delta": pieces.break_even(np.ones(q)),
                "break_even_share_of_reduced_form": pieces.break_even(shares),
            }
        )
    return TestResult(
        name=NAME,
        statistic=None,
        p_value=None,
        df=None,
        distribution=None,
        null_hypothesis=NULL,
        source=SOURCE,
        details={
            "by_regressor": entries,
            "instruments": list(instruments),
            "direct_effect_bound": bound,
            "box": (
                "|direct effect of each instrument| <= direct_effect_bound (outcome units per unit of the instrument)"
                if bound is not None
                else "default grid: |direct effect of each instrument| <= share x |its reduced-form coefficient|, "
                "shares 5, 10, 25, 50%; set direct_effect_bound in the claim to use a bound of your own"
            ),
            "reading": (
                "break_even_delta is the smallest direct effect (outcome units per unit of every instrument) at which "
                "the 95% union interval reaches zero; break_even_share_of_reduced_form the same as a share of each "
                "instrument's reduced-form coefficient. 0 means the claim is not significant even with valid "
                "instruments; null means no bound overturns it. Whether such a direct effect is plausible is the "
                "reviewer's judgement."
            ),
        },
    )


def _direct_effect_pieces(moments: Moments, variance: VarianceEstimator, tsls: LinearFit) -> tuple[np.ndarray, np.ndarray]:
    """``A`` (p x q: change in each focal coefficient per unit direct effect) and per-focal meats (p x (q+1) x (q+1))."""
    layout = moments.layout
    p, q = layout.n_endog, layout.n_instr
    select_r = layout.selector(layout.regressors)
    residuals = [tsls.residual]
    slopes = np.empty((p, q))
    for k, column in enumerate(layout.instr):
        coefficients = tsls.bread @ (tsls.score_map.T @ moments.gram[1:, column])
        slopes[:, k] = coefficients[:p]
        residuals.append(moments.residual_vector(moments.column(column), select_r, coefficients))
    directions = tsls.score_map @ tsls.bread[:, :p]
    blocks = projected_meats(variance, directions, np.column_stack(residuals), n_params=tsls.n_params)
    meats = np.einsum("abjj->jab", blocks)
    return slopes, (meats + meats.transpose(0, 2, 1)) / 2


class _Pieces:
    """One focal coefficient: estimate, slopes in gamma and the variance quadratic in (1, -gamma)."""

    def __init__(self, *, estimate: float, slopes: np.ndarray, meat: np.ndarray, critical: float) -> None:
        self.estimate = estimate
        self.slopes = slopes
        self.meat = meat
        self.critical = critical

    def union(self, half_widths: np.ndarray) -> list[float]:
        """``[min lower, max upper]`` over the vertices of the box ``|gamma_k| <= half_widths_k``."""
        signs = np.array(list(itertools.product((-1.0, 1.0), repeat=len(half_widths))))
        gammas = signs * half_widths[None, :]
        weights = np.hstack([np.ones((len(gammas), 1)), -gammas])
        spread = self.critical * np.sqrt(np.maximum(np.einsum("va,ab,vb->v", weights, self.meat, weights), 0.0))
        centers = self.estimate - gammas @ self.slopes
        return [float((centers - spread).min()), float((centers + spread).max())]

    def break_even(self, scale: np.ndarray) -> float | None:
        """Smallest t >= 0 such that the union over ``|gamma_k| <= t scale_k`` contains zero."""
        low, high = self.union(np.zeros(len(scale)))
        if low <= 0 <= high:
            return 0.0
        sign = 1.0 if self.estimate > 0 else -1.0
        level = sign * self.estimate
        c2 = self.critical**2
        best = math.inf
        for signs in itertools.product((-1.0, 1.0), repeat=len(scale)):
            direction = np.array(signs) * scale
            drift = sign * float(direction @ self.slopes)
            v0 = self.meat[0, 0]
            v1 = float(self.meat[0, 1:] @ direction)
            v2 = float(direction @ self.meat[1:, 1:] @ direction)
            for t in _roots(drift * drift - c2 * v2, -2 * level * drift + 2 * c2 * v1, level * level - c2 * v0):
                if t > 0 and level - t * drift >= 0:
                    best = min(best, t)
        return best if math.isfinite(best) else None


def _roots(a2: float, a1: float, a0: float) -> list[float]:
    """Real roots of ``a2 t^2 + a1 t + a0 = 0`` (linear when a2 is zero)."""
    if a2 == 0.0:
        return [] if a1 == 0.0 else [-a0 / a1]
    discriminant = a1 * a1 - 4 * a2 * a0
    if discriminant < 0:
        return []
    root = math.sqrt(discriminant)
    return [(-a1 - root) / (2 * a2), (-a1 + root) / (2 * a2)]

