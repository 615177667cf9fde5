"""Bias-adjusted estimate under proportional selection on observables and unobservables (Oster 2019).

Compare the uncontrolled regression of y on the focal regressor D (estimate
``b0``, R^2 ``R0``) with the controlled one (``bt``, ``Rt``). Oster (2019)
assumes the unobserved causes relate to D in proportion ``delta`` to the
observed controls, and that with every cause included the R^2 would be
``R_max``. With ``sy`` the variance of y, ``sx`` that of D, ``tx`` the variance
of D's residual on the controls, ``d = b0 - bt``, ``m = (R_max - Rt) sy`` and
``o = (Rt - R0) sy``, the bias ``nu = bt - beta`` solves (her Proposition 2)

    (delta - 1)(tx sx - tx^2) nu^3 + (delta - 2) tx d sx nu^2
      + [delta m (sx - tx) - o tx - sx tx d^2] nu + delta m d sx = 0,

a quadratic when delta = 1. The cubic is linear in delta, so the delta that
makes a given beta the solution (beta = 0: "how much selection on
unobservables would explain the effect away") is
``delta(nu) = Q(nu) / P(nu)`` with ``nu = bt - beta``,
``P(nu) = [(sx - tx) nu + sx d] (m + tx nu^2)`` and
``Q(nu) = tx [(sx - tx) nu^3 + 2 sx d nu^2 + (o + sx d^2) nu]``.

Root choice (ours; every root is reported): each real root implies a
variance of the observed-control index ``s1 = o + (a + b)^2/sx - b^2/tx``
and of the unobserved index ``s2 = b s1 / (delta a)``, with ``b = nu tx``
and ``a = (d + nu) sx - nu tx`` the covariances of D with the two indices. A
root is admissible when both variances are positive and finite (a root with
``a = 0`` - always present with a single control - would need an infinitely
variable unobserved cause); among admissible roots the one closest to the
controlled estimate (smallest ``|nu|``) is reported.

The approximate formula of Oster (2019)
``beta* ~ bt - delta d (R_max - Rt) / (Rt - R0)`` is reported beside it, with
a warning when the two disagree in sign. ``R_max = min(1, 1.3 Rt)`` is Oster's
suggested default, calibrated on randomized studies (common practice, not a
law).

References
----------
Oster, E. (2019). Unobservable selection and coefficient stability: theory
and evidence. Journal of Business & Economic Statistics 37(2), 187-204.
"""

from __future__ import annotations

import math

import numpy as np

from app.estimation.findings import TestResult
from app.estimation.linalg import inverse_pd
from app.estimation.moments import Moments
from app.spec import SensitivityOptions

SOURCE = "Oster (2019), JBES 37(2), Proposition 2"
NAME = "Bias-adjusted estimate under proportional selection"
NULL = "selection on unobservables as strong as delta times selection on observables leaves the sign of the effect"
IMAGINARY_TOLERANCE = 1e-9
ROUNDING = 1e-9
"""Relative size below which a covariance is taken as zero (a root that puts no weight on the observed controls)."""


def proportional_selection(
    moments: Moments, *, columns: list[str], regressor: str, baseline: list[str], options: SensitivityOptions
) -> TestResult:
    """Oster's beta*, its root, the delta that drives the estimate to zero, and the approximation."""
    position = columns.index(regressor)
    baseline_positions = [columns.index(c) for c in baseline]
    others = [c for c in moments.layout.regressors if c != position]
    if not [c for c in others if c not in baseline_positions]:
        return TestResult.not_applicable(
            NAME,
            "the claim has no controls: proportional selection compares the regression with and without them",
            source=SOURCE,
            null_hypothesis=NULL,
        )
    outcome, focal = moments.column(0), moments.column(position)
    total_y = moments.residual_ss(outcome, baseline_positions)
    total_x = moments.residual_ss(focal, baseline_positions)
    residual_x = moments.residual_ss(focal, others)
    short_estimate, _, short_rss = partialled_slope(moments, position=position, others=baseline_positions)
    controlled_estimate, _, controlled_rss = partialled_slope(moments, position=position, others=others)
    r2_short = 1.0 - short_rss / total_y
    r2_controlled = 1.0 - controlled_rss / total_y
    r2_max = options.r2_max if options.r2_max is not None else min(1.0, options.r2_max_factor * r2_controlled)
    if r2_max <= r2_controlled:
        return TestResult.not_applicable(
            NAME,
            f"R_max ({r2_max:.4f}) must exceed the R-squared with controls ({r2_controlled:.4f})",
            source=SOURCE,
            null_hypothesis=NULL,
        )
    system = OsterSystem(
        short_estimate=short_estimate,
        controlled_estimate=controlled_estimate,
        var_y=total_y,
        var_x=total_x,
        residual_var_x=residual_x,
        r2_short=r2_short,
        r2_controlled=r2_controlled,
        r2_max=r2_max,
    )
    roots = system.roots(options.delta)
    chosen = _choose(roots)
    approximate = system.approximate_estimate(options.delta)
    exact = chosen["estimate"] if chosen else None
    warnings = []
    if chosen is None:
        warnings.append("the cubic has no real root: no bias-adjusted estimate exists for this delta and R_max")
    elif not chosen["admissible"]:
        warnings.append(
            "no real root implies positive variances of the observed and unobserved causes; the root closest "
            "to the controlled estimate is shown, but the assumptions do not fit these data"
        )
    if exact is not None and approximate is not None and np.sign(exact) != np.sign(approximate):
        warnings.append(
            f"the exact solution ({exact:.4g}) and the approximate formula ({approximate:.4g}) disagree in sign: "
            "read the exact solution; the approximation holds only when the bias is small"
        )
    details = {
        "regressor": regressor,
        "delta": options.delta,
        "r2_max": r2_max,
        "r2_max_rule": (
            "given by the reviewer"
            if options.r2_max is not None
            else f"min(1, {options.r2_max_factor:g} x R-squared with controls); Oster's (2019) suggestion, common practice"
        ),
        "uncontrolled_estimate": short_estimate,
        "uncontrolled_r2": r2_short,
        "controlled_estimate": controlled_estimate,
        "controlled_r2": r2_controlled,
        "beta_star": exact,
        "beta_star_approximate": approximate,
        "roots": roots,
        "root_rule": (
            "among real roots whose implied variances of the observed and unobserved causes are positive, "
            "the one closest to the controlled estimate"
        ),
        "identified_set": sorted([controlled_estimate, exact]) if exact is not None else None,
        "identified_set_excludes_zero": (exact is not None and exact * controlled_estimate > 0),
        "delta_for_zero": system.delta_for(0.0),
        "delta_for_zero_approximate": system.approximate_delta_for_zero(),
        "warnings": warnings,
    }
    return TestResult(
        name=NAME,
        statistic=exact,
        p_value=None,
        df=None,
        distribution=None,
        null_hypothesis=NULL,
        source=SOURCE,
        details=details,
    )


class OsterSystem:
    """The observed moments of Oster's (2019) proportional-selection equations.

    Variances may be on any common scale (sums of squares or divided by n).
    """

    def __init__(
        self,
        *,
        short_estimate: float,
        controlled_estimate: float,
        var_y: float,
        var_x: float,
        residual_var_x: float,
        r2_short: float,
        r2_controlled: float,
        r2_max: float,
    ) -> None:
        self.short_estimate = short_estimate
        self.controlled_estimate = controlled_estimate
        self.var_x = var_x
        self.residual_var_x = residual_var_x
        self.r2_short = r2_short
        self.r2_controlled = r2_controlled
        self.r2_max = r2_max
        self.gap = short_estimate - controlled_estimate
        self.unexplained = (r2_max - r2_controlled) * var_y
        self.observed = (r2_controlled - r2_short) * var_y

    def coefficients(self, delta: float) -> np.ndarray:
        """Cubic coefficients in the bias ``nu``, highest power first (Proposition 2)."""
        sx, tx, d, m, o = self.var_x, self.residual_var_x, self.gap, self.unexplained, self.observed
        return np.array(
            [
                (delta - 1.0) * (tx * sx - tx * tx),
                (delta - 2.0) * tx * d * sx,
                delta * m * (sx - tx) - o * tx - sx * tx * d * d,
                delta * m * d * sx,
            ]
        )

    def roots(self, delta: float) -> list[dict[str, object]]:
        """Every real root as a bias-adjusted estimate, with its implied variances and admissibility."""
        coefficients = self.coefficients(delta)
        scale = np.max(np.abs(coefficients))
        if scale == 0:
            return []
        found = np.roots(coefficients / scale)
        real = sorted({float(r.real) for r in found if abs(r.imag) <= IMAGINARY_TOLERANCE * max(1.0, abs(r))})
        results = []
        for bias in real:
            s1, s2 = self.implied_variances(bias, delta)
            results.append(
                {
                    "estimate": self.controlled_estimate - bias,
                    "bias": bias,
                    "observed_index_variance": s1,
                    "unobserved_index_variance": s2,
                    "admissible": bool(s1 > 0 and 0 < s2 < math.inf),
                }
            )
        return results

    def implied_variances(self, bias: float, delta: float) -> tuple[float, float]:
        """Variances of the observed and unobserved indices implied by a bias ``nu``."""
        sx, tx = self.var_x, self.residual_var_x
        b = bias * tx
        a = (self.gap + bias) * sx - bias * tx
        s1 = self.observed + (a + b) ** 2 / sx - b * b / tx
        size = sx * (abs(self.gap) + abs(bias)) + tx * abs(bias)
        if b == 0:
            return s1, 0.0 if self.unexplained == 0 else math.nan
        if delta == 0 or abs(a) <= ROUNDING * size:
            return s1, math.inf
        return s1, b * s1 / (delta * a)

    def delta_for(self, beta: float) -> float | None:
        """The delta under which ``beta`` solves the cubic; None when no finite delta does."""
        sx, tx, d, m, o = self.var_x, self.residual_var_x, self.gap, self.unexplained, self.observed
        nu = self.controlled_estimate - beta
        denominator = ((sx - tx) * nu + sx * d) * (m + tx * nu * nu)
        numerator = tx * ((sx - tx) * nu**3 + 2 * sx * d * nu**2 + (o + sx * d * d) * nu)
        if denominator == 0:
            return None
        return numerator / denominator

    def approximate_estimate(self, delta: float) -> float | None:
        """``bt - delta (b0 - bt)(R_max - Rt)/(Rt - R0)``; None when the controls add no R^2."""
        if self.r2_controlled == self.r2_short:
            return None
        return self.controlled_estimate - delta * self.gap * (self.r2_max - self.r2_controlled) / (
            self.r2_controlled - self.r2_short
        )

    def approximate_delta_for_zero(self) -> float | None:
        """``bt (Rt - R0) / ((b0 - bt)(R_max - Rt))`` from the approximate formula."""
        denominator = self.gap * (self.r2_max - self.r2_controlled)
        if denominator == 0:
            return None
        return self.controlled_estimate * (self.r2_controlled - self.r2_short) / denominator


def _choose(roots: list[dict[str, object]]) -> dict[str, object] | None:
    if not roots:
        return None
    admissible = [r for r in roots if r["admissible"]]
    candidates = admissible or roots
    return min(candidates, key=lambda r: abs(float(r["bias"])))


def partialled_slope(moments: Moments, *, position: int, others: list[int]) -> tuple[float, float, float]:
    """OLS slope of y on column ``position`` given ``others`` (Frisch-Waugh-Lovell).

    Returns the slope, the focal column's residual sum of squares given
    ``others``, and the regression's residual sum of squares.
    """
    outcome, focal = moments.column(0), moments.column(position)
    focal_ss = moments.residual_ss(focal, others)
    cross = moments.quad(outcome, focal)
    if others:
        gram = moments.gram
        cross_y = gram[others, :] @ outcome
        cross_x = gram[others, :] @ focal
        cross -= float(cross_y @ inverse_pd(gram[np.ix_(others, others)]) @ cross_x)
    slope = cross / focal_ss
    return slope, focal_ss, moments.residual_ss(outcome, others) - cross * cross / focal_ss
