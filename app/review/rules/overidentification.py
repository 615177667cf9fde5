"""Section ``overidentification``: do the instruments tell the same story?

With more instruments than focal regressors, each instrument (or subset)
gives its own estimate; if all are valid they agree up to chance.

* The joint test: Hansen's J with robust or clustered errors, Sargan's
  statistic with classical errors. A rejection says at least one instrument
  is invalid, or that the effect differs across the people each instrument
  moves.
* The C statistic (difference-in-Hansen/Sargan) for each instrument or
  named subset says which one the joint test blames. Its test assumes the
  other instruments are valid, so when one instrument is invalid the C
  statistics of the valid ones can reject too; an instrument is singled out
  only if the others, without it, pass the over-identification test. With
  one over-identifying restriction every C statistic equals J, so no
  instrument can be singled out.

A non-rejection does not show validity: instruments that share one bias
agree with each other.

References
----------
Sargan, J. D. (1958). The estimation of economic relationships using instrumental variables.
Econometrica 26(3), 393-415.
Hansen, L. P. (1982). Large sample properties of generalized method of moments estimators.
Econometrica 50(4), 1029-1054.
Hayashi, F. (2000). Econometrics, sec. 3.6 (the C statistic). Princeton University Press.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from app.estimation.inference import chi2_p
from app.review.formatting import as_number, number, p_value, statistic
from app.review.rules.base import (
    SIGNIFICANCE,
    Outcome,
    Rule,
    needs_instrument_diagnostic,
    not_applicable,
    significant,
)
from app.review.view import FindingsView, Lookup

SECTION = "overidentification"
TITLE = "Over-identification"


def joint_test(view: FindingsView) -> Lookup:
    """Hansen J for robust or clustered errors, Sargan for classical ones."""
    return view.lookup("sargan" if view.variance_kind == "homoskedastic" else "hansen_j")


def _describe(view: FindingsView, found: Lookup) -> str:
    test = found.value
    name = "Sargan" if found.key == "sargan" else f"Hansen J ({view.variance_label})"
    shown = statistic(test.get("statistic"), distribution=test.get("distribution"), df=test.get("df"))
    return f"{name}: {shown}, {p_value(test.get('p_value'))}."


def assess_joint_test(view: FindingsView) -> Outcome:
    found = joint_test(view)
    if (skip := needs_instrument_diagnostic(view, found)) is not None:
        return skip
    evidence = _describe(view, found)
    if significant(as_number(found.value.get("p_value"))):
        return Outcome(
            "serious",
            evidence,
            question=(
                f"The over-identification test suggests that {', '.join(view.instruments)} do not point to the same "
                "effect: one may be invalid, or each may move people whose effects differ. Which instrument do the "
                "authors consider valid, and what does the estimate with that instrument alone show?"
            ),
        )
    return Outcome("sound", evidence + " Agreement among instruments does not prove that any of them is valid.")


def assess_blamed_instrument(view: FindingsView) -> Outcome:
    joint = joint_test(view)
    if (skip := needs_instrument_diagnostic(view, joint)) is not None:
        return skip
    joint_rejects = significant(as_number(joint.value.get("p_value")))
    if len(view.instruments) - len(view.focal_terms) == 1:
        evidence = (
            "With one over-identifying restriction the C statistic of every instrument equals the joint statistic, "
            "so the data cannot say which instrument is at fault. " + _describe(view, joint)
        )
        if joint_rejects:
            return Outcome(
                "concern",
                evidence,
                question=(
                    "The joint test rejects, but with these instruments the data cannot say which one, if any, is invalid. "
                    "Which instrument's exclusion argument is the stronger, and what does it give alone?"
                ),
            )
        return Outcome("sound", evidence)
    found = view.lookup("c_statistic")
    if (skip := needs_instrument_diagnostic(view, found)) is not None:
        return skip
    entries = _c_entries(found.value)
    if not entries:
        return not_applicable("The findings hold no C statistic for any instrument or subset.")
    parts, rejecting, blamed = [], [], []
    for entry in entries:
        label = _subset_label(entry)
        if entry.get("standing", "computed") != "computed":
            parts.append(f"{label}: not computed ({entry.get('reason') or 'no reason given'}).")
            continue
        p = as_number(entry.get("p_value"))
        rest_p = remaining_p_value(entry, n_instruments=len(view.instruments), n_focal=len(view.focal_terms))
        shown = statistic(entry.get("statistic"), distribution=entry.get("distribution"), df=entry.get("df"))
        rest = f"; the other instruments alone: J = {number(entry.get('j_without_suspects'))}, {p_value(rest_p)}"
        parts.append(f"{label}: {shown}, {p_value(p)}{rest if rest_p is not None else ''}.")
        if significant(p):
            rejecting.append(label)
            if rest_p is not None and not significant(rest_p):
                blamed.append(label)
    evidence = "C statistic (is this instrument invalid, given the others?): " + " ".join(parts)
    if blamed:
        return Outcome(
            "serious",
            evidence,
            question=(
                f"The C statistic singles out {', '.join(blamed)}: without it the other instruments agree. Why should it "
                f"be excluded from the equation of {view.outcome}, and how does the estimate change without it?"
            ),
        )
    if rejecting or joint_rejects:
        return Outcome(
            "concern",
            evidence,
            question=(
                "The instruments disagree, but dropping no single instrument or named subset makes the others agree. "
                "Which instruments do the authors trust, and do they expect the effect to differ across the people "
                "each instrument moves?"
            ),
        )
    return Outcome("sound", evidence)


def remaining_p_value(entry: Mapping[str, Any], *, n_instruments: int, n_focal: int) -> float | None:
    """p-value of the over-identification test on the instruments left after dropping the suspects.

    None when the remaining instruments just identify the model (their J is zero by construction).
    """
    suspects = entry.get("instruments")
    j_rest = as_number(entry.get("j_without_suspects"))
    if not isinstance(suspects, list) or j_rest is None:
        return None
    degrees = n_instruments - len(suspects) - n_focal
    return chi2_p(j_rest, degrees) if degrees > 0 else None


def _c_entries(data: Any) -> list[Mapping[str, Any]]:
    return [e for e in data if isinstance(e, Mapping)] if isinstance(data, list) else []


def _subset_label(entry: Mapping[str, Any]) -> str:
    names = entry.get("instruments")
    return " + ".join(str(n) for n in names) if isinstance(names, list) else str(entry.get("name", "a subset"))


RULES = (
    Rule(
        id="overidentification.joint_test",
        title="The instruments agree with each other",
        rule=(
            f"The over-identification test (Hansen J with robust or clustered errors, Sargan with classical ones) "
            f"with p below {SIGNIFICANCE} flags that at least one instrument may be invalid, or that effects differ "
            "across the people each instrument moves."
        ),
        source="Sargan (1958); Hansen (1982)",
        explanation=(
            "With more instruments than needed, each gives its own estimate of the same effect. If they disagree "
            "beyond chance, at least one of them cannot be valid."
        ),
        assess=assess_joint_test,
    ),
    Rule(
        id="overidentification.blamed_instrument",
        title="No single instrument is singled out as invalid",
        rule=(
            f"An instrument (or named subset) is singled out when its C statistic has p below {SIGNIFICANCE} and the "
            "other instruments alone pass the over-identification test (the second condition is common practice)."
        ),
        source="Hayashi (2000), sec. 3.6; Eichenbaum, Hansen & Singleton (1988)",
        explanation=(
            "The C statistic compares the fit with and without one instrument's validity assumed. A large value "
            "singles out that instrument as the likely culprit."
        ),
        assess=assess_blamed_instrument,
    ),
)
