"""Section ``omitted_causes``: could a cause left out of the model drive the estimate?

Three automatic readings and one for the reviewer:

* with instruments, whether the naive (OLS) and instrumented estimates
  differ beyond chance (control-function test, Hausman 1978);
* without a credible instrument, how strong an omitted cause would have to be
  to overturn the estimate (Cinelli & Hazlett 2020) and how much selection on
  unobservables, relative to observables, would bring it to zero (Oster 2019);
* whether outcome and regressor come from the same source or moment (common
  method; Podsakoff et al. 2003), which no statistic can settle.

References
----------
Hausman, J. A. (1978). Specification tests in econometrics. Econometrica 46(6), 1251-1271.
Wooldridge, J. M. (2010). Econometric Analysis of Cross Section and Panel Data, 2nd ed., sec. 6.3.1.
Cinelli, C. and Hazlett, C. (2020). Making sense of sensitivity: extending omitted variable bias.
Journal of the Royal Statistical Society B 82(1), 39-67.
Oster, E. (2019). Unobservable selection and coefficient stability: theory and evidence.
Journal of Business & Economic Statistics 37(2), 187-204.
Podsakoff, P. M., MacKenzie, S. B., Lee, J.-Y. and Podsakoff, N. P. (2003). Common method biases in
behavioral research. Journal of Applied Psychology 88(5), 879-903.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from app.review.formatting import as_number, interval, number, p_value, setting, statistic
from app.review.rules.base import (
    SIGNIFICANCE,
    Outcome,
    Rule,
    needs_instrument_diagnostic,
    not_applicable,
    significant,
    unavailable,
)
from app.review.view import FindingsView

SECTION = "omitted_causes"
TITLE = "Omitted common causes"

BENCHMARK_MULTIPLE = 1.0
"""Cinelli & Hazlett (2020): an omitted cause as strong as the strongest observed benchmark covariate."""

SELECTION_RATIO = 1.0
"""Oster (2019): selection on unobservables as strong as on observables (delta = 1)."""


def assess_naive_vs_instrumented(view: FindingsView) -> Outcome:
    found = view.lookup("control_function")
    if (skip := needs_instrument_diagnostic(view, found)) is not None:
        return skip
    test = found.value
    p = as_number(test.get("p_value"))
    naive = view.row("ols")
    instrumented_code = view.claimed_estimator if view.claim_uses_instruments else "2sls"
    instrumented = view.row(instrumented_code)
    parts = []
    if naive and instrumented:
        parts.append(
            f"{view.focal_term}: OLS {number(naive.get('estimate'))} against "
            f"{view.estimator_name(instrumented_code)} {number(instrumented.get('estimate'))}."
        )
    parts.append(
        f"Control-function test that the focal regressor is exogenous ({view.variance_label} variance): "
        f"{statistic(test.get('statistic'), distribution=test.get('distribution'), df=test.get('df'))}, {p_value(p)}."
    )
    parts += _common_cause_size(view)
    evidence = " ".join(parts)
    if significant(p) and not view.claim_is_naive:
        evidence += (
            " The test suggests that the focal regressor is not exogenous; the claim's instrumented estimator "
            "allows for that."
        )
    if view.claim_is_naive and significant(p):
        return Outcome(
            "serious",
            evidence,
            question=(
                "The instrumented estimate differs from the OLS estimate beyond chance, which suggests an omitted "
                "common cause (if the instruments are valid). Why do the authors base the claim on OLS, and how do "
                "they rule out such a cause?"
            ),
        )
    return Outcome("sound", evidence)


def _common_cause_size(view: FindingsView) -> list[str]:
    """The sign and size of the endogeneity: the system fit's disturbance correlation, else the residual correlation."""
    for key in ("disturbance_correlation", "residual_correlation"):
        found = view.lookup(key)
        if not found.usable:
            continue
        entries = [e for e in found.value.get("by_regressor") or [] if isinstance(e, Mapping)]
        parts = []
        for entry in entries:
            if key == "disturbance_correlation":
                parts.append(
                    f"Correlation of the outcome and first-stage disturbances of {entry.get('regressor')} (3SLS "
                    f"system): {number(entry.get('correlation'))}, 95% interval "
                    f"{interval(entry.get('ci_low'), entry.get('ci_high'))}."
                )
            else:
                parts.append(
                    f"First-stage and 2SLS residuals of {entry.get('regressor')} correlate at "
                    f"{number(entry.get('correlation'))}."
                )
        if parts:
            return parts
    return []


def assess_sensitivity(view: FindingsView) -> Outcome:
    found = view.lookup_for("omitted_cause_sensitivity")
    if (skip := unavailable(found)) is not None:
        return skip
    data = found.value
    analysed = analysed_fit(view, data)
    evidence = _sensitivity_evidence(data, name=view.estimator_name(analysed))
    if (reference := _for_reference(view, analysed, evidence)) is not None:
        return reference
    bounds = [b for b in _benchmark_bounds(data) if b.get("available") and as_number(b.get("multiplier")) is not None]
    if not bounds:
        return Outcome(
            "reviewer_judgement",
            evidence + " No benchmark covariate was named, so the reviewer judges whether such a cause is plausible.",
            question=(
                "Which observed covariate do the authors consider the strongest determinant of both the regressor "
                "and the outcome, and could an omitted cause of that strength overturn the estimate?"
            ),
        )
    estimate = as_number(data.get("estimate"))
    overturned = [(b, words) for b in bounds if (words := _what_the_cause_does(b, estimate=estimate)) is not None]
    if not overturned:
        return Outcome("sound", evidence)
    weakest, words = min(overturned, key=lambda pair: as_number(pair[0].get("multiplier")))
    if as_number(weakest.get("multiplier")) <= BENCHMARK_MULTIPLE:
        return Outcome(
            "serious",
            evidence,
            question=f"An omitted cause no stronger than {weakest.get('benchmark')} would {words}. What rules out such a cause?",
        )
    return Outcome(
        "concern",
        evidence,
        question=(
            f"An omitted cause {setting(weakest.get('multiplier'))} times as strong as {weakest.get('benchmark')} "
            f"would {words}. Can the authors argue that no such cause exists?"
        ),
    )


def _benchmark_bounds(data: Mapping[str, Any]) -> list[Mapping[str, Any]]:
    bounds = data.get("benchmark_bounds")
    return [b for b in bounds if isinstance(b, Mapping)] if isinstance(bounds, list) else []


def _what_the_cause_does(bound: Mapping[str, Any], *, estimate: float | None) -> str | None:
    """What a bounded omitted cause does to the estimate, in words; None when the conclusion survives it.

    The adjusted estimate crossing zero is named as a reversal (or as reaching
    zero); otherwise an adjusted interval containing zero (or missing) makes
    the estimate indistinguishable from zero.
    """
    adjusted = as_number(bound.get("adjusted_estimate"))
    if estimate is not None and adjusted is not None and adjusted * estimate < 0:
        return "reverse the sign of the estimate"
    if estimate is not None and adjusted == 0:
        return "bring the estimate to zero"
    low, high = as_number(bound.get("adjusted_ci_low")), as_number(bound.get("adjusted_ci_high"))
    if low is None or high is None or low <= 0.0 <= high:
        return "make the estimate indistinguishable from zero"
    return None


def analysed_fit(view: FindingsView, data: Mapping[str, Any]) -> str:
    """The estimator whose regression an omitted-cause analysis examines.

    Findings record it under ``estimator``; older findings did not, and then
    analysed the within fit in a panel and the plain OLS fit otherwise.
    """
    code = data.get("estimator")
    if isinstance(code, str):
        return code
    return "within" if view.design == "panel" else "ols"


def _for_reference(view: FindingsView, analysed: str, evidence: str) -> Outcome | None:
    """Not applicable, with the evidence kept, when the analysis examines another estimator than the claimed one."""
    if analysed == view.claimed_estimator:
        return None
    return not_applicable(
        f"The claim rests on {view.estimator_name(view.claimed_estimator)}; this analysis examines the "
        f"{view.estimator_name(analysed)} regression, so it is shown for reference only. " + evidence
    )


def _sensitivity_evidence(data: Mapping[str, Any], *, name: str) -> str:
    q, alpha = data.get("q", 1), data.get("alpha", SIGNIFICANCE)
    parts = [
        f"{name} estimate {number(data.get('estimate'))} (classical s.e. {number(data.get('std_error'))}, as the "
        f"method assumes); partial R-squared of the focal regressor with the outcome: "
        f"{number(data.get('partial_r2_outcome'))}.",
        f"Robustness value RV_q (q = {setting(q)}): {number(data.get('robustness_value_q'))}; "
        f"RV_q,alpha (alpha = {setting(alpha)}): {number(data.get('robustness_value_q_alpha'))}.",
    ]
    for bound in _benchmark_bounds(data):
        head = f"A cause {setting(bound.get('multiplier'))} x as strong as {bound.get('benchmark')}"
        if bound.get("available") and bound.get("r2yz_dx_capped") is True:
            parts.append(
                f"{head}: adjusted estimate {number(bound.get('adjusted_estimate'))}; the bound on the cause's partial "
                "R-squared with the outcome reached 1 and was capped there, where the adjusted standard error is "
                "zero, so no interval is shown."
            )
        elif bound.get("available"):
            parts.append(
                f"{head}: adjusted estimate {number(bound.get('adjusted_estimate'))}, interval "
                f"{interval(bound.get('adjusted_ci_low'), bound.get('adjusted_ci_high'))}."
            )
        else:
            parts.append(f"{head}: {bound.get('reason') or 'not computed'}.")
    return " ".join(parts)


def assess_proportional_selection(view: FindingsView) -> Outcome:
    found = view.lookup_for("proportional_selection")
    if (skip := unavailable(found)) is not None:
        return skip
    data = found.value
    analysed = analysed_fit(view, data)
    delta = as_number(data.get("delta_for_zero"))
    evidence = (
        f"{view.estimator_name(analysed)} regression: bias-adjusted estimate beta* = {number(data.get('beta_star'))} (delta = {setting(data.get('delta', 1))}, "
        f"R_max = {number(data.get('r2_max'))}; controlled estimate {number(data.get('controlled_estimate'))}); "
        f"selection ratio delta that brings the estimate to zero: {number(delta)}."
    )
    warnings = [str(w) for w in data.get("warnings") or []]
    if warnings:
        evidence += " Note: " + "; ".join(warnings) + "."
    if (reference := _for_reference(view, analysed, evidence)) is not None:
        return reference
    too_small = delta is not None and abs(delta) < SELECTION_RATIO
    if too_small or data.get("identified_set_excludes_zero") is False:
        return Outcome(
            "concern",
            evidence,
            question=(
                "Selection on unobservables no stronger than on the observed controls could explain the whole "
                "estimate. Why is stronger selection implausible here, and what R_max do the authors consider?"
            ),
        )
    return Outcome("sound", evidence)


def assess_shared_source(view: FindingsView) -> Outcome:
    return Outcome(
        "reviewer_judgement",
        f"Outcome: {view.outcome}; focal regressor(s): {', '.join(view.focal_terms) or 'not named'}. "
        "The data cannot show how or when they were measured.",
        question=(
            "Were the outcome and the focal regressor measured at the same time, by the same instrument or from the "
            "same respondents? If so, how do the authors rule out a shared measurement cause (common method)?"
        ),
    )


RULES = (
    Rule(
        id="omitted_causes.naive_vs_instrumented",
        title="The claimed estimator allows for an omitted common cause",
        rule=(
            f"A control-function test with p below {SIGNIFICANCE} flags the focal regressor as possibly correlated "
            "with the error (the test suggests it; it does not prove it); a claim that rests on OLS is then in doubt."
        ),
        source="Hausman (1978); Wooldridge (2010), sec. 6.3.1",
        explanation=(
            "If something not in the model drives both the regressor and the outcome, the plain regression mixes its "
            "effect into the estimate. The instruments give a second estimate free of that mix, and a large gap "
            "between the two suggests such a cause (if the instruments are valid)."
        ),
        assess=assess_naive_vs_instrumented,
    ),
    Rule(
        id="omitted_causes.sensitivity",
        title="An omitted cause as strong as an observed one would not overturn the estimate",
        rule=(
            "The interval adjusted for an omitted cause as strong as the strongest benchmark covariate (k = 1) must "
            "exclude zero and keep the estimate's sign (serious if not); concern if a cause 2 or 3 times as strong "
            "would not."
        ),
        source="Cinelli & Hazlett (2020)",
        explanation=(
            "This asks how much of the regressor and of the outcome an unmeasured cause would have to explain to "
            "erase the result. Comparing that with an observed covariate tells whether such a cause is plausible."
        ),
        assess=assess_sensitivity,
    ),
    Rule(
        id="omitted_causes.proportional_selection",
        title="Selection on unobservables would have to be stronger than on observables",
        rule=f"The selection ratio delta that brings the estimate to zero must be at least {SELECTION_RATIO:g} in size.",
        source="Oster (2019)",
        explanation=(
            "When adding controls moves the estimate and raises the R-squared, unobserved controls would likely move "
            "it further. The ratio says how strong that unobserved selection must be, compared with the observed, to "
            "explain the whole effect."
        ),
        assess=assess_proportional_selection,
    ),
    Rule(
        id="omitted_causes.shared_source",
        title="Outcome and regressor do not share a measurement source",
        rule="No statistic can settle this; judge from the manuscript's description of the measures.",
        source="Podsakoff, MacKenzie, Lee & Podsakoff (2003)",
        explanation=(
            "When the same person reports both the cause and the effect at the same moment, mood or style can move "
            "both. That shared source acts like an omitted common cause."
        ),
        assess=assess_shared_source,
    ),
)
