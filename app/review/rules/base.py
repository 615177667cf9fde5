"""What a rule is, and the helpers every rule uses.

A :class:`Rule` holds the fixed text of one checklist item (title, rule and
threshold in words, published source, plain explanation) and a function that
reads the findings and returns an :class:`Outcome`: the automatic standing,
the evidence and, when the item is not sound, a drafted question to the
authors.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

from app.review.items import ChecklistItem
from app.review.view import FindingsView, Lookup

SIGNIFICANCE = 0.05
"""Level of every test the checklist reads (the conventional 5%; common practice)."""

COMMON_PRACTICE = "common practice"


@dataclass(frozen=True)
class Outcome:
    """What a rule found on one refit."""

    standing: str
    evidence: str
    question: str | None = None


@dataclass(frozen=True)
class Rule:
    """One checklist item: fixed wording plus the function that judges it."""

    id: str
    title: str
    rule: str
    source: str
    explanation: str
    assess: Callable[[FindingsView], Outcome]

    @property
    def section(self) -> str:
        return self.id.split(".", 1)[0]

    def evaluate(self, view: FindingsView) -> ChecklistItem:
        """Apply the rule to the findings."""
        outcome = self.assess(view)
        return ChecklistItem(
            id=self.id,
            section=self.section,
            item=self.title,
            standing=outcome.standing,
            evidence=outcome.evidence,
            rule=self.rule,
            source=self.source,
            explanation=self.explanation,
            question=outcome.question if outcome.standing != "sound" else None,
        )


def not_applicable(reason: str) -> Outcome:
    """The item does not apply; ``reason`` says why in words."""
    return Outcome("not_applicable", reason)


def unavailable(found: Lookup) -> Outcome | None:
    """A not-applicable outcome when a diagnostic is missing or was not computed, else None."""
    if found.state == "computed":
        return None
    if found.state == "missing":
        return not_applicable(
            f"The findings hold no '{found.key}' result (the refit was made without it), "
            "so this check could not be made."
        )
    if found.state == "malformed":
        return not_applicable(f"The findings' '{found.key}' entry cannot be read, so this check could not be made.")
    reason = found.reason or "the engine gave no reason"
    if found.state == "undefined":
        return not_applicable(f"The '{found.key}' result could not be computed on these data: {reason}.")
    return not_applicable(f"The '{found.key}' result does not apply: {reason}.")


def needs_instruments(view: FindingsView) -> Outcome | None:
    """Not applicable when the claim names no excluded instruments."""
    if view.has_instruments:
        return None
    return not_applicable("The claim names no excluded instruments, so there is no instrument to check.")


LINEAR_IV_ELSEWHERE = {
    "selection": "the instruments ({instruments}) enter the probit for the treatment in the control function, not a "
    "linear first stage; the test of an exogenous treatment is under the design-specific checks",
    "panel": "the instruments ({instruments}) enter the fixed-effects 2SLS fit, for which only the first stage is "
    "computed",
}
"""Designs whose instruments are used by another estimator than linear IV, and how."""


def needs_instrument_diagnostic(view: FindingsView, found: Lookup) -> Outcome | None:
    """Not applicable when the claim names no excluded instruments or the diagnostic ``found`` is unavailable, else None.

    A linear-IV diagnostic missing from a design that uses its instruments
    another way says so, rather than that the refit was made without it.
    """
    if (skip := needs_instruments(view)) is not None:
        return skip
    if found.state == "missing" and view.design in LINEAR_IV_ELSEWHERE:
        how = LINEAR_IV_ELSEWHERE[view.design].format(instruments=", ".join(view.instruments))
        return not_applicable(
            f"The '{found.key}' diagnostic belongs to the linear instrumental-variable refit, which the "
            f"{view.design} design does not make: {how}."
        )
    return unavailable(found)


def significant(p: float | None) -> bool:
    """True when a p-value is below :data:`SIGNIFICANCE`."""
    return p is not None and p < SIGNIFICANCE


def worst(standings: list[str]) -> str:
    """The most severe of several automatic standings."""
    for standing in ("serious", "concern", "reviewer_judgement", "sound"):
        if standing in standings:
            return standing
    return "not_applicable"
