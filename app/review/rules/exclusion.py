"""Section ``exclusion``: do the instruments affect the outcome only through the focal regressor?

Exclusion and as-if-random assignment cannot be proven from data; the
checklist gives the reviewer the questions and the numbers that bear on
them:

* the argument for the exclusion restriction and as-if-random assignment
  (for the reviewer; Angrist, Imbens & Rubin 1996);
* balance: a valid instrument should not predict covariates fixed before
  treatment (a check borrowed from randomized experiments; common practice);
* how large a direct effect of the instrument on the outcome would remove the
  claim's significance, against the bound the reviewer finds plausible
  (Conley, Hansen & Rossi 2012);
* monotonicity, needed to read the estimate as a local average effect
  (Imbens & Angrist 1994).

References
----------
Angrist, J. D., Imbens, G. W. and Rubin, D. B. (1996). Identification of causal effects using
instrumental variables. Journal of the American Statistical Association 91(434), 444-455.
Conley, T. G., Hansen, C. B. and Rossi, P. E. (2012). Plausibly exogenous. Review of Economics
and Statistics 94(1), 260-272.
Imbens, G. W. and Angrist, J. D. (1994). Identification and estimation of local average treatment
effects. Econometrica 62(2), 467-475.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from app.review.formatting import as_number, number, p_value, statistic
from app.review.rules.base import (
    COMMON_PRACTICE,
    SIGNIFICANCE,
    Outcome,
    Rule,
    needs_instrument_diagnostic,
    needs_instruments,
    not_applicable,
    significant,
)
from app.review.view import FindingsView

SECTION = "exclusion"
TITLE = "Instrument exclusion and independence"


def _instrument_list(view: FindingsView) -> str:
    return ", ".join(view.instruments)


def assess_argument(view: FindingsView) -> Outcome:
    if (skip := needs_instruments(view)) is not None:
        return skip
    parts = []
    found = view.lookup("reduced_form")
    if found.usable and isinstance(found.value, Mapping):
        coefficients = [c for c in found.value.get("coefficients") or [] if isinstance(c, Mapping)]
        shown = "; ".join(f"{c.get('term')} {number(c.get('estimate'))} (s.e. {number(c.get('std_error'))})" for c in coefficients)
        parts.append(f"Reduced form of {view.outcome} on the instruments ({view.variance_label}): {shown}.")
    if len(view.instruments) <= len(view.focal_terms):
        parts.append("The model is exactly identified, so no test can check the exclusion restriction.")
    return Outcome(
        "reviewer_judgement",
        " ".join(parts) or "The data cannot show whether the exclusion restriction holds.",
        question=(
            f"What is the argument that {_instrument_list(view)} affect {view.outcome} only through "
            f"{', '.join(view.focal_terms)}? Which other paths from the instruments to the outcome have the authors "
            "considered, and how are they ruled out?"
        ),
    )


def assess_as_if_random(view: FindingsView) -> Outcome:
    if (skip := needs_instruments(view)) is not None:
        return skip
    named = view.claim_names("pre_treatment")
    evidence = (
        f"Pre-treatment covariates named for the balance check: {', '.join(map(str, named))}."
        if named
        else "No pre-treatment covariates were named, so balance was not checked."
    )
    return Outcome(
        "reviewer_judgement",
        evidence,
        question=(
            f"How were {_instrument_list(view)} assigned? What makes their assignment as good as random with respect "
            f"to the unmeasured causes of {view.outcome}, given the controls?"
        ),
    )


def assess_balance(view: FindingsView) -> Outcome:
    found = view.lookup("instrument_balance")
    if (skip := needs_instrument_diagnostic(view, found)) is not None:
        return skip
    checks = _balance_checks(found.value)
    if not checks:
        return not_applicable("No pre-treatment covariate was checked for balance.")
    distribution = found.value.get("distribution") if isinstance(found.value, Mapping) else None
    parts, unbalanced = [], []
    for check in checks:
        p = as_number(check.get("p_value"))
        covariate = str(check.get("covariate", check.get("name")))
        shown = statistic(check.get("statistic"), distribution=check.get("distribution", distribution), df=check.get("df"))
        parts.append(f"{covariate}: {shown}, {p_value(p)}.")
        if significant(p):
            unbalanced.append(covariate)
    evidence = f"Joint test that the instruments predict each pre-treatment covariate ({view.variance_label}): " + " ".join(parts)
    if unbalanced:
        return Outcome(
            "concern",
            evidence,
            question=(
                f"The instruments predict {', '.join(unbalanced)}, which were fixed before treatment. A valid instrument "
                "should not; how do the authors explain this imbalance?"
            ),
        )
    return Outcome("sound", evidence)


def _balance_checks(data: Any) -> list[Mapping[str, Any]]:
    if isinstance(data, list):
        return [c for c in data if isinstance(c, Mapping)]
    checks = data.get("by_covariate", data.get("covariates")) if isinstance(data, Mapping) else None
    return [c for c in checks if isinstance(c, Mapping)] if isinstance(checks, list) else []


def assess_direct_effect(view: FindingsView) -> Outcome:
    found = view.lookup("plausibly_exogenous")
    if (skip := needs_instrument_diagnostic(view, found)) is not None:
        return skip
    entries = [e for e in found.value.get("by_regressor") or [] if isinstance(e, Mapping)]
    entry = next((e for e in entries if e.get("regressor") == view.focal_term), entries[0] if entries else None)
    if entry is None:
        return not_applicable("The findings give no break-even direct effect for the focal regressor.")
    break_even = as_number(entry.get("break_even_delta"))
    bound = as_number(view.claim.get("direct_effect_bound"))
    if break_even == 0:
        return not_applicable(
            "The claimed effect is not distinguishable from zero even with exactly valid instruments, so no "
            "direct effect is needed to overturn it."
        )
    if break_even is None:
        evidence = f"No direct effect of the instruments on {view.outcome} within the range examined makes the effect insignificant."
        return Outcome("sound", evidence)
    evidence = _direct_effect_evidence(view, entry, break_even)
    if bound is None:
        return Outcome(
            "reviewer_judgement",
            evidence + " No plausible bound on the direct effect was entered.",
            question=(
                f"Could {_instrument_list(view)} affect {view.outcome} directly by as much as {number(break_even)}? "
                "What evidence bounds such a direct effect?"
            ),
        )
    evidence += f" The bound entered as plausible is {number(bound)}."
    if break_even <= bound:
        return Outcome(
            "serious",
            evidence,
            question=(
                f"A direct effect within the plausible range (up to {number(bound)}) would remove the claimed effect. "
                "How do the authors rule out a direct effect of this size?"
            ),
        )
    return Outcome("sound", evidence)


def _direct_effect_evidence(view: FindingsView, entry: Mapping[str, Any], break_even: float) -> str:
    """The two break-even values of Conley, Hansen & Rossi's union of intervals, each with what it measures.

    ``break_even_delta`` is one direct effect, the same for every instrument,
    shown against each instrument's reduced-form coefficient;
    ``break_even_share_of_reduced_form`` is a second search, over direct
    effects proportional to each instrument's own reduced-form coefficient.
    """
    parts = [
        f"A direct effect of the instruments on {view.outcome} of {number(break_even)} (outcome units per unit of "
        "each instrument, the same for all) would make the claimed effect indistinguishable from zero"
    ]
    shares = [
        f"{abs(break_even / value):.0%} of {c.get('term')}'s ({number(value)})"
        for c in _reduced_form_coefficients(view)
        if (value := as_number(c.get("estimate"))) not in (None, 0.0)
    ]
    parts.append(f"; that is {' and '.join(shares)} reduced-form coefficient." if shares else ".")
    share = as_number(entry.get("break_even_share_of_reduced_form"))
    if share is not None:
        parts.append(
            " Searched separately, direct effects proportional to each instrument's own reduced-form coefficient "
            f"make the claimed effect indistinguishable from zero at {share:.0%} of that coefficient."
        )
    return "".join(parts)


def _reduced_form_coefficients(view: FindingsView) -> list[Mapping[str, Any]]:
    found = view.lookup("reduced_form")
    if not found.usable or not isinstance(found.value, Mapping):
        return []
    return [c for c in found.value.get("coefficients") or [] if isinstance(c, Mapping)]


def assess_monotonicity(view: FindingsView) -> Outcome:
    if (skip := needs_instruments(view)) is not None:
        return skip
    signs = []
    for entry in view.first_stages():
        for coefficient in entry.get("coefficients") or []:
            if isinstance(coefficient, Mapping):
                signs.append(
                    f"{coefficient.get('term')} on {entry.get('regressor')}: {number(coefficient.get('estimate'))}"
                )
    evidence = "First-stage coefficients: " + "; ".join(signs) + "." if signs else "No first-stage coefficients recorded."
    return Outcome(
        "reviewer_judgement",
        evidence,
        question=(
            f"Could {_instrument_list(view)} push some units toward and others away from "
            f"{', '.join(view.focal_terms)}? If not everyone responds in the same direction, the estimate is not a "
            "local average effect; what supports monotonicity here?"
        ),
    )


RULES = (
    Rule(
        id="exclusion.argument",
        title="The instruments affect the outcome only through the focal regressor",
        rule="No test can confirm the exclusion restriction; judge the authors' argument for it.",
        source="Angrist, Imbens & Rubin (1996)",
        explanation=(
            "An instrument is useful only if its sole route to the outcome is the focal regressor. Any other route "
            "shows up as part of the estimated effect."
        ),
        assess=assess_argument,
    ),
    Rule(
        id="exclusion.as_if_random",
        title="The instruments are assigned as if at random",
        rule="No test can confirm independence; judge how the instruments came about.",
        source="Angrist, Imbens & Rubin (1996)",
        explanation=(
            "If the instrument itself depends on something that also drives the outcome, it carries that cause into "
            "the estimate. A lottery is convincing; a place, a policy or a person's choice needs an argument."
        ),
        assess=assess_as_if_random,
    ),
    Rule(
        id="exclusion.balance",
        title="The instruments do not predict pre-treatment covariates",
        rule=f"A joint test of the instruments on each pre-treatment covariate with p below {SIGNIFICANCE} is a concern.",
        source=COMMON_PRACTICE + " (balance checks as in randomized experiments)",
        explanation=(
            "Characteristics fixed before treatment cannot be caused by it. If the instruments still predict them, "
            "the instruments are probably linked to other causes of the outcome."
        ),
        assess=assess_balance,
    ),
    Rule(
        id="exclusion.direct_effect",
        title="A plausible direct effect of the instrument would not overturn the claim",
        rule=(
            "The break-even direct effect (where the interval first includes zero) must exceed the bound entered "
            "as plausible; without a bound the reviewer judges."
        ),
        source="Conley, Hansen & Rossi (2012)",
        explanation=(
            "Exclusion is rarely exact, so this asks how large a direct effect of the instrument could be before the "
            "conclusion changes. A small break-even value means the claim depends on exclusion holding almost exactly."
        ),
        assess=assess_direct_effect,
    ),
    Rule(
        id="exclusion.monotonicity",
        title="Everyone responds to the instruments in the same direction",
        rule="No test can confirm monotonicity; judge whether some units could respond against the instrument.",
        source="Imbens & Angrist (1994)",
        explanation=(
            "With effects that differ across people, the instrumented estimate is the average for those the "
            "instrument moves, but only if it moves nobody the opposite way. Defiers make the estimate hard to read."
        ),
        assess=assess_monotonicity,
    ),
)
