"""Section ``design``: checks that belong to one study design.

* ``mediation``: a randomized experiment whose claim is about a measured
  mediator. The regression of the outcome on the mediator is not protected
  by the randomization: anything that moves both mediator and outcome biases
  it (Bullock, Green & Ha 2010). Instrumenting the mediator with the
  randomized arms removes that bias only if the treatment moves the outcome
  through the mediator alone.
* ``panel``: random effects assume the unit effects are unrelated to the
  regressors; the Mundlak regression tests that with robust errors (Mundlak
  1978; Wooldridge 2010, sec. 10.7.3).
* ``selection``: a sample that people select into; the test of no selection
  is the inverse Mills ratio term of the Heckman two-step fit, whose
  identification is fragile without a variable excluded from the outcome
  equation (Heckman 1979; Puhani 2000). For a binary treatment people choose,
  the test is the generalized-residual term of the control function
  (Heckman 1978; Wooldridge 2010, ch. 21).

References
----------
Bullock, J. G., Green, D. P. and Ha, S. E. (2010). Yes, but what's the mechanism? (Don't expect an
easy answer). Journal of Personality and Social Psychology 98(4), 550-558.
Mundlak, Y. (1978). On the pooling of time series and cross section data. Econometrica 46(1), 69-85.
Wooldridge, J. M. (2010). Econometric Analysis of Cross Section and Panel Data, 2nd ed. MIT Press.
Heckman, J. J. (1978). Dummy endogenous variables in a simultaneous equation system. Econometrica 46(4),
931-959.
Heckman, J. J. (1979). Sample selection bias as a specification error. Econometrica 47(1), 153-161.
Puhani, P. A. (2000). The Heckman correction for sample selection and its critique. Journal of
Economic Surveys 14(1), 53-68.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from app.review.formatting import as_number, interval, number, p_value, statistic
from app.review.rules.base import SIGNIFICANCE, Outcome, Rule, not_applicable, significant, unavailable
from app.review.view import NAIVE_ESTIMATORS, FindingsView

SECTION = "design"
TITLE = "Design-specific checks"


def _only_for(view: FindingsView, design: str, words: str) -> Outcome | None:
    if view.design == design:
        return None
    return not_applicable(f"The claim is not {words} (design '{view.design}').")


def assess_mediator(view: FindingsView) -> Outcome:
    if (skip := _only_for(view, "mediation", "about a measured mediator in an experiment")) is not None:
        return skip
    mediator = view.focal_term
    treatments = ", ".join(view.instruments) or "the randomized treatment"
    parts = []
    for code, words in (("ols", "Naive regression"), ("ols_with_treatment", "Naive regression holding the arms fixed")):
        naive = view.row(code)
        if naive:
            parts.append(
                f"{words} of {view.outcome} on {mediator}: {number(naive.get('estimate'))} "
                f"{interval(naive.get('ci_low'), naive.get('ci_high'))}."
            )
    instrumented = view.row("2sls")
    if instrumented:
        parts.append(
            f"{mediator} instrumented by {treatments} (2SLS): {number(instrumented.get('estimate'))} "
            f"{interval(instrumented.get('ci_low'), instrumented.get('ci_high'))}."
        )
    only_through = view.lookup("mediation")
    only_through_p = None
    if only_through.usable:
        test = only_through.value
        only_through_p = as_number(test.get("p_value"))
        if test.get("statistic") is not None:
            parts.append(
                "Test that the arms act only through the mediator (they must agree on its effect): "
                f"{statistic(test.get('statistic'), distribution=test.get('distribution'), df=test.get('df'))}, "
                f"{p_value(only_through_p)}."
            )
        drifts = [d for d in test.get("drift_per_unit_direct_effect") or [] if isinstance(d, Mapping)]
        if drifts:
            shown = "; ".join(f"{d.get('arm')} {number(d.get('drift'))}" for d in drifts)
            parts.append(f"Shift of the 2SLS estimate per unit of direct effect of each arm on {view.outcome}: {shown}.")
    evidence = " ".join(parts) or "The findings hold no estimate of the mediator's effect."
    if view.claimed_estimator in NAIVE_ESTIMATORS:
        return Outcome(
            "serious",
            evidence + f" Randomizing {treatments} does not randomize {mediator}.",
            question=(
                f"The claim about {mediator} rests on a regression that the randomization does not protect: anything "
                f"that moves both {mediator} and {view.outcome} biases it. Can the authors estimate the mediator's "
                f"effect with the randomized {treatments} as instrument, or manipulate {mediator} directly?"
            ),
        )
    question = (
        f"The instrumented estimate assumes that {treatments} changes {view.outcome} only through {mediator}. "
        "What other consequences of the treatment could reach the outcome, and how are they ruled out?"
    )
    if significant(only_through_p):
        return Outcome(
            "serious",
            evidence
            + " The test suggests that the arms do not agree on the mediator's effect. That happens when an arm also "
            f"acts on {view.outcome} through another path, or when the arms move different people whose responses "
            "to the mediator differ (different local effects); the test cannot tell which.",
            question=question
            + f" The arms give different estimates of {mediator}'s effect: do they move different groups of people?",
        )
    return Outcome("concern", evidence + f" This needs {treatments} to affect {view.outcome} only through {mediator}.", question=question)


def assess_mediator_manipulated(view: FindingsView) -> Outcome:
    if (skip := _only_for(view, "mediation", "about a measured mediator in an experiment")) is not None:
        return skip
    return Outcome(
        "reviewer_judgement",
        f"Randomized: {', '.join(view.instruments) or 'not named'}; mediator: {view.focal_term}.",
        question=(
            f"Was {view.focal_term} itself manipulated in any arm of the experiment, or only measured? If only "
            "measured, what supports reading its association with the outcome as causal?"
        ),
    )


def assess_panel_effects(view: FindingsView) -> Outcome:
    if (skip := _only_for(view, "panel", "fitted on panel data")) is not None:
        return skip
    found = view.lookup("mundlak")
    if (skip := unavailable(found)) is not None:
        return skip
    test = found.value
    p = as_number(test.get("p_value"))
    parts = [
        f"Mundlak test that the unit effects are unrelated to the regressors ({_mundlak_errors(test)}): "
        f"{statistic(test.get('statistic'), distribution=test.get('distribution'), df=test.get('df'))}, {p_value(p)}."
    ]
    parts += _hausman_evidence(view)
    for code in ("within", "random_effects", "pooled_ols"):
        row = view.row(code)
        if row:
            parts.append(f"{view.estimator_name(code)}: {number(row.get('estimate'))}.")
    evidence = " ".join(parts)
    relies_on_unit_independence = view.claimed_estimator in ("random_effects", "pooled_ols")
    if relies_on_unit_independence and significant(p):
        return Outcome(
            "serious",
            evidence,
            question=(
                "The Mundlak test suggests that the unit effects are related to the regressors; if they are, random "
                "effects (or pooled OLS) mix the effect with stable differences between units. Do the conclusions "
                "hold with fixed effects?"
            ),
        )
    return Outcome("sound", evidence)


def _mundlak_errors(test: Mapping[str, Any]) -> str:
    """The Mundlak test's own standard errors: always cluster-robust, whatever the claim's (app/estimation/panel.py)."""
    clusters = test.get("clusters")
    return f"cluster-robust by {clusters}" if isinstance(clusters, str) and clusters else "cluster-robust"


def _hausman_evidence(view: FindingsView) -> list[str]:
    """The classical Hausman test with its own warning, or why it was not computed."""
    hausman = view.lookup("hausman_fe_re")
    if hausman.state == "undefined":
        return [f"Classical Hausman test: not computed ({hausman.reason or 'no reason given'})."]
    if not hausman.usable or not isinstance(hausman.value, Mapping):
        return []
    test = hausman.value
    shown = statistic(test.get("statistic"), distribution=test.get("distribution"), df=test.get("df"))
    parts = [f"Classical Hausman test: {shown}, {p_value(test.get('p_value'))}."]
    if isinstance(test.get("warning"), str):
        parts.append(f"Warning on the Hausman test: {test['warning']}.")
    return parts


def assess_effects_sampling(view: FindingsView) -> Outcome:
    if (skip := _only_for(view, "panel", "fitted on panel data")) is not None:
        return skip
    return Outcome(
        "reviewer_judgement",
        f"Unit identifier: {view.claim_name('unit') or 'not named'}; time identifier: {view.claim_name('time') or 'not named'}; "
        f"claimed estimator: {view.estimator_name(view.claimed_estimator)}.",
        question=(
            "Are the units a sample from a larger population the claim generalises to (which random effects "
            "assume), or the population itself? Why is the chosen model the right one for that sampling design?"
        ),
    )


def assess_selection(view: FindingsView) -> Outcome:
    if (skip := _only_for(view, "selection", "about a self-selected sample or treatment")) is not None:
        return skip
    if view.claim_name("selected") is None:
        return _assess_chosen_treatment(view)
    found = view.lookup("selection")
    if (skip := unavailable(found)) is not None:
        return skip
    test = found.value
    p = as_number(test.get("p_value"))
    evidence = (
        f"Test of no selection (inverse Mills ratio term, {view.variance_label}): "
        f"{statistic(test.get('statistic'), distribution=test.get('distribution'), df=test.get('df'))}, {p_value(p)}; "
        f"rho = {number(test.get('rho'))}, sigma = {number(test.get('sigma'))}."
    )
    engine_excluded = test.get("excluded_from_outcome_equation")
    excluded = [str(c) for c in engine_excluded] if isinstance(engine_excluded, list) else _excluded_from_outcome(view)
    if view.claimed_estimator in NAIVE_ESTIMATORS and significant(p):
        return Outcome(
            "serious",
            evidence,
            question=(
                "The test suggests that entry into the sample is related to the outcome's error; if so, an analysis "
                "of the selected sample alone is biased. Do the conclusions hold after correcting for selection?"
            ),
        )
    if not excluded:
        return Outcome(
            "concern",
            evidence + " No variable enters the selection equation but not the outcome equation.",
            question=(
                "The selection correction is identified only through the shape of the normal distribution. Which "
                "variable affects selection but not the outcome?"
            ),
        )
    return Outcome("sound", evidence + f" Excluded from the outcome equation: {', '.join(excluded)}.")


def _assess_chosen_treatment(view: FindingsView) -> Outcome:
    """A binary treatment people choose: the generalized-residual test of Heckman (1978), read against the claim."""
    found = view.lookup("treatment_selection")
    if (skip := unavailable(found)) is not None:
        return skip
    test = found.value
    p = as_number(test.get("p_value"))
    treatment = view.focal_term or "the treatment"
    parts = [
        f"Test that {treatment} is unrelated to the outcome's error (generalized residual of the probit for "
        f"{treatment}, {view.variance_label}): "
        f"{statistic(test.get('statistic'), distribution=test.get('distribution'), df=test.get('df'))}, {p_value(p)}."
    ]
    for code in ("ols", "control_function"):
        row = view.row(code)
        if row:
            parts.append(
                f"{view.estimator_name(code)}: {number(row.get('estimate'))} "
                f"{interval(row.get('ci_low'), row.get('ci_high'))}."
            )
    evidence = " ".join(parts)
    if view.claim_is_naive and significant(p):
        return Outcome(
            "serious",
            evidence,
            question=(
                f"The test suggests that {treatment} was chosen for reasons related to {view.outcome}; if so, the "
                f"OLS estimate mixes the effect of {treatment} with those reasons. Do the conclusions hold with a "
                "correction for the choice of treatment (such as the control function), and what made people choose it?"
            ),
        )
    if not view.has_instruments:
        return Outcome(
            "concern",
            evidence + f" No variable moves {treatment} without entering the outcome equation.",
            question=(
                "The correction for the choice of treatment is identified only through the shape of the normal "
                f"distribution. Which variable affects the choice of {treatment} but not {view.outcome}?"
            ),
        )
    return Outcome("sound", evidence + f" Variables that move the treatment only: {', '.join(view.instruments)}.")


def _excluded_from_outcome(view: FindingsView) -> list[str]:
    outcome_side = {*view.focal_terms, *view.claim_names("controls")}
    outcome_side |= {str(c.get("column")) for c in view.claim_entries("categorical")}
    return [c for c in view.claim_names("selection_covariates") if c not in outcome_side]


RULES = (
    Rule(
        id="design.mediator",
        title="A claim about a measured mediator is protected from shared causes",
        rule=(
            "A naive regression on a measured mediator is serious; an estimate instrumented by the randomized arms "
            f"is a concern until the only-through-the-mediator assumption is argued, and serious when several arms "
            f"disagree (over-identification test with p below {SIGNIFICANCE})."
        ),
        source="Bullock, Green & Ha (2010); Angrist, Imbens & Rubin (1996); Hansen (1982)",
        explanation=(
            "Randomizing a treatment makes treated and control groups comparable, but not people with high and low "
            "values of a mediator the treatment moves. Whatever else drives the mediator can also drive the outcome."
        ),
        assess=assess_mediator,
    ),
    Rule(
        id="design.mediator_manipulated",
        title="The mediator was manipulated, not only measured",
        rule="Judge from the experimental design whether the mediator itself was randomized.",
        source="Bullock, Green & Ha (2010)",
        explanation=(
            "Only a randomized mediator gives its effect the protection of the experiment. A measured mediator is "
            "observational data inside an experiment."
        ),
        assess=assess_mediator_manipulated,
    ),
    Rule(
        id="design.panel_effects",
        title="Unit effects are unrelated to the regressors, if the claim assumes so",
        rule=(
            f"A claim fitted by random effects or pooled OLS is serious when the robust Mundlak test rejects "
            f"(p below {SIGNIFICANCE})."
        ),
        source="Mundlak (1978); Wooldridge (2010), sec. 10.7.3; Hausman (1978)",
        explanation=(
            "Random effects treat each unit's stable traits as noise unrelated to the regressors. If those traits "
            "also drive the regressor, only comparisons within units remove them."
        ),
        assess=assess_panel_effects,
    ),
    Rule(
        id="design.effects_sampling",
        title="Fixed or random effects fit the sampling design",
        rule="Judge from how the units were sampled and what population the claim is about.",
        source="Wooldridge (2010), ch. 10",
        explanation=(
            "Fixed effects answer a question about the units in the data; random effects about a population they "
            "were drawn from, under stronger assumptions. Which fits depends on the study, not on a test."
        ),
        assess=assess_effects_sampling,
    ),
    Rule(
        id="design.selection",
        title="Self-selection into the sample or the treatment is accounted for",
        rule=(
            f"Serious when the claim rests on OLS and the test of no selection (inverse Mills ratio term for a "
            f"selected sample; generalized residual for a chosen treatment) rejects with p below {SIGNIFICANCE}; a "
            "concern when the correction has no variable excluded from the outcome equation."
        ),
        source="Heckman (1979); Heckman (1978); Puhani (2000); Wooldridge (2010), ch. 21",
        explanation=(
            "If people enter the sample, or take the treatment, for reasons related to the outcome, the naive "
            "comparison mixes the effect with those reasons. The correction needs something that affects entry or "
            "the choice but not the outcome."
        ),
        assess=assess_selection,
    ),
)
