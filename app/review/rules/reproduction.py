"""Section ``reproduction``: do the printed numbers come out of the data?

A printed number reproduces when the refit rounds to it (half a unit of the
last printed digit either side); the sample size must match exactly. The
comparison and its likely causes live in :mod:`app.review.reproduction`.

Rounding to the printed digit is common practice in reproduction checks,
not a published test.
"""

from __future__ import annotations

from app.review.formatting import as_number, count, decimals
from app.review.reproduction import (
    Comparison,
    compare_estimate,
    compare_first_stage_f,
    compare_n_obs,
    compare_std_error,
    printed_number,
)
from app.review.rules.base import COMMON_PRACTICE, Outcome, Rule, SIGNIFICANCE, not_applicable
from app.review.view import FindingsView

SECTION = "reproduction"
TITLE = "Reported numbers"

NORMAL_CRITICAL = 1.96
"""Two-sided 5% critical value used to read the significance a printed estimate and standard error imply."""

ROUNDING_RULE = (
    "The refit must round to the printed number: half a unit of its last printed digit either side "
    "(a printed 0.13 covers 0.125 up to but not including 0.135)."
)
ESTIMATE_RULE = ROUNDING_RULE + (
    " A refit one unit off in the last digit is a concern (a rounding slip or a small sample difference); "
    "a larger miss is serious."
)


def _printed_against_refit(comparison: Comparison) -> str:
    printed = printed_number(comparison.claimed)
    places = printed.places + 2 if printed else 4
    refit = "not in the findings" if comparison.refit is None else decimals(comparison.refit, places)
    text = f"Printed {comparison.claimed}; refit {comparison.compared}: {refit}."
    if comparison.matches:
        return text + " It rounds to the printed number."
    if comparison.near_miss and printed is not None and comparison.refit is not None:
        text += (
            f" It would print as {printed.as_printed(comparison.refit)}: one unit off in the last printed digit."
        )
    return " ".join([text, *comparison.causes])


def assess_estimate(view: FindingsView) -> Outcome:
    comparison = compare_estimate(view)
    if comparison is None:
        return not_applicable("The claim records no printed estimate, so reproduction of the estimate was not checked.")
    if comparison.refit is None:
        return not_applicable(
            f"The refit has no {view.estimator_name(view.claimed_estimator)} estimate of {view.focal_term}, "
            "so the printed estimate cannot be compared."
        )
    if comparison.matches:
        return Outcome("sound", _printed_against_refit(comparison))
    return Outcome(
        "concern" if comparison.near_miss else "serious",
        _printed_against_refit(comparison),
        question=(
            f"Refitting the stated model on the replication data gives {decimals(comparison.refit, 4)} for "
            f"{view.focal_term}, not the printed {comparison.claimed}. Could the authors share the code that "
            "produced this estimate and state the exact sample, estimator and variables used?"
        ),
    )


def assess_std_error(view: FindingsView) -> Outcome:
    comparison = compare_std_error(view)
    if comparison is None:
        return not_applicable("The claim records no printed standard error, so it was not checked.")
    if comparison.refit is None:
        return not_applicable("The refit has no standard error for the claimed estimator, so it cannot be compared.")
    evidence = _printed_against_refit(comparison)
    if comparison.matches:
        return Outcome("sound", evidence)
    question = (
        f"Our refit gives a standard error of {decimals(comparison.refit, 4)} with {view.variance_label} standard "
        f"errors, not the printed {comparison.claimed}. Which variance estimator, clustering and small-sample "
        "correction does the table use?"
    )
    if _significance_differs(view):
        evidence += (
            f" The difference changes the conclusion at the {SIGNIFICANCE:.0%} level: the printed numbers and the "
            "refit disagree on whether the effect is distinguishable from zero."
        )
        return Outcome("serious", evidence, question=question)
    return Outcome("concern", evidence, question=question)


def _significance_differs(view: FindingsView) -> bool:
    estimate = printed_number(view.claimed.get("estimate"))
    std_error = printed_number(view.claimed.get("std_error"))
    row = view.row(view.claimed_estimator)
    refit_p = as_number(row.get("p_value")) if row else None
    if estimate is None or std_error is None or std_error.value <= 0 or refit_p is None:
        return False
    printed_significant = abs(estimate.value / std_error.value) > NORMAL_CRITICAL
    return printed_significant != (refit_p < SIGNIFICANCE)


def assess_n_obs(view: FindingsView) -> Outcome:
    comparison = compare_n_obs(view)
    if comparison is None:
        return not_applicable("The claim records no printed number of observations, so it was not checked.")
    if comparison.refit is None:
        return not_applicable("The findings do not record the refit's number of observations.")
    if comparison.matches:
        return Outcome("sound", f"Printed n = {count(int(comparison.claimed))}; the refit uses the same number of rows.")
    evidence = " ".join(
        [f"Printed n = {count(int(comparison.claimed))}; the refit uses {count(comparison.refit)} rows.", *comparison.causes]
    )
    return Outcome(
        "concern",
        evidence,
        question=(
            f"The replication data give {count(comparison.refit)} observations for the stated model, not "
            f"{count(int(comparison.claimed))}. How was the estimation sample formed (filters, treatment of "
            "missing values)?"
        ),
    )


def assess_first_stage_f(view: FindingsView) -> Outcome:
    comparison = compare_first_stage_f(view)
    if comparison is None:
        return not_applicable("The claim records no printed first-stage F, so it was not checked.")
    if comparison.refit is None:
        return not_applicable("The findings hold no first-stage F to compare with the printed one.")
    evidence = _printed_against_refit(comparison)
    if comparison.matches:
        return Outcome("sound", evidence)
    return Outcome(
        "concern",
        evidence,
        question=(
            f"The printed first-stage F of {comparison.claimed} does not match any form of it in our refit. "
            "Which statistic is reported (classical, robust or clustered Wald, effective F), and on which sample?"
        ),
    )


RULES = (
    Rule(
        id="reproduction.estimate",
        title="The printed estimate comes out of the data",
        rule=ESTIMATE_RULE,
        source=COMMON_PRACTICE,
        explanation=(
            "Before judging a claim, check that its number can be recomputed from the shared data with the "
            "stated model. A difference does not mean an error, but every later check is about the refit, "
            "not the printed table."
        ),
        assess=assess_estimate,
    ),
    Rule(
        id="reproduction.std_error",
        title="The printed standard error comes out of the data",
        rule=ROUNDING_RULE,
        source=COMMON_PRACTICE,
        explanation=(
            "The standard error decides whether the effect is distinguishable from zero. It depends on how "
            "the errors are assumed to behave (equal variances, robust, clustered), which tables often leave unsaid."
        ),
        assess=assess_std_error,
    ),
    Rule(
        id="reproduction.n_obs",
        title="The printed number of observations matches",
        rule="The estimation sample of the refit must have exactly the printed number of observations.",
        source=COMMON_PRACTICE,
        explanation=(
            "A different number of rows means a different sample, usually because of missing values or "
            "filters. Estimates from different samples need not agree."
        ),
        assess=assess_n_obs,
    ),
    Rule(
        id="reproduction.first_stage_f",
        title="The printed first-stage F comes out of the data",
        rule=ROUNDING_RULE + " Any form of the F in the findings counts (classical, robust Wald, effective F).",
        source=COMMON_PRACTICE,
        explanation=(
            "The first-stage F tells how strongly the instruments move the regressor. Several versions exist, "
            "and a strong-looking classical F can hide a weak robust one."
        ),
        assess=assess_first_stage_f,
    ),
)
