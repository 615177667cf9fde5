"""The overall verdict on a claim, from its checklist.

Each item counts with its *effective* standing: the reviewer's judgement
when one is set, the automatic standing otherwise. The first rule that
applies decides:

1. ``undetermined`` — the findings hold no estimate of the claimed estimator
   for the focal coefficient, so there is nothing to judge.
2. ``not_reproduced`` — an item of the ``reproduction`` section is serious
   (the printed estimate, or its significance, does not come out of the data).
3. ``not_supported`` — any other item is serious.
4. ``fragile`` — any item is a concern.
5. ``holds_up`` — otherwise.

The drivers are the items whose standing triggered the rule, at most
:data:`MAX_DRIVERS` and at most one per section (the first in checklist
order), so that two findings of different kinds are named rather than two
readings of the same one; for ``holds_up`` they are the first sound items of
:data:`KEY_ITEMS`. Items left to the reviewer and not yet judged do not
move the verdict; the summary counts them, because the verdict is final only
once the reviewer has read them.
"""

from __future__ import annotations

from collections.abc import Sequence

from app.review.formatting import interval, number
from app.review.items import ChecklistItem, Verdict
from app.review.view import FindingsView

MAX_DRIVERS = 2

VERDICT_LABELS = {
    "holds_up": "Holds up",
    "fragile": "Fragile",
    "not_supported": "Not supported by the data",
    "not_reproduced": "Could not be reproduced",
    "undetermined": "Cannot be judged from these findings",
}

KEY_ITEMS = (
    "reproduction.estimate",
    "relevance.effective_f",
    "inference.weak_iv_robust",
    "overidentification.joint_test",
    "omitted_causes.naive_vs_instrumented",
    "omitted_causes.sensitivity",
    "design.panel_effects",
    "design.selection",
    "relevance.first_stage_f",
)
"""Items that speak for a claim that holds up, in the order they are named."""


def decide_verdict(items: Sequence[ChecklistItem], view: FindingsView) -> Verdict:
    """Combine the checklist into a verdict by the rules in the module docstring."""
    pending = [i for i in items if i.effective_standing == "reviewer_judgement"]
    estimate = _estimate_sentence(view)
    if estimate is None:
        missing = f"{view.estimator_name(view.claimed_estimator)} estimate of {view.focal_term or 'the focal regressor'}"
        return _verdict("undetermined", f"The findings hold no {missing}, so the claim cannot be judged.", [])
    reproduction = [i for i in items if i.section == "reproduction" and i.effective_standing == "serious"]
    serious = [i for i in items if i.section != "reproduction" and i.effective_standing == "serious"]
    concerns = [i for i in items if i.effective_standing == "concern"]
    if reproduction:
        drivers = _one_per_section(reproduction)
        summary = f"The stated model, refitted on the data, does not give the printed numbers (in doubt: {_titles(drivers)}). {estimate}"
        return _verdict("not_reproduced", _with_pending(summary, pending), drivers)
    if serious:
        drivers = _one_per_section(serious)
        summary = f"{estimate} In serious doubt: {_titles(drivers)}."
        return _verdict("not_supported", _with_pending(summary, pending), drivers)
    if concerns:
        drivers = _one_per_section(concerns)
        summary = f"{estimate} Open to question: {_titles(drivers)}."
        return _verdict("fragile", _with_pending(summary, pending), drivers)
    by_id = {i.id: i for i in items}
    drivers = [by_id[key] for key in KEY_ITEMS if key in by_id and by_id[key].effective_standing == "sound"]
    summary = f"{estimate} No automatic check raises a concern."
    return _verdict("holds_up", _with_pending(summary, pending), drivers[:MAX_DRIVERS])


def _one_per_section(items: Sequence[ChecklistItem]) -> list[ChecklistItem]:
    """The first item of each section, in checklist order, at most :data:`MAX_DRIVERS`."""
    first: dict[str, ChecklistItem] = {}
    for item in items:
        first.setdefault(item.section, item)
    return list(first.values())[:MAX_DRIVERS]


def _verdict(code: str, summary: str, drivers: Sequence[ChecklistItem]) -> Verdict:
    return Verdict(code=code, label=VERDICT_LABELS[code], summary=summary, drivers=[d.id for d in drivers])


def _estimate_sentence(view: FindingsView) -> str | None:
    row = view.row(view.claimed_estimator)
    if row is None or row.get("estimate") is None:
        return None
    sentence = (
        f"Refitted estimate of {view.focal_term} ({view.estimator_name(view.claimed_estimator)}, as claimed): "
        f"{number(row.get('estimate'))}, 95% interval {interval(row.get('ci_low'), row.get('ci_high'))} "
        f"with {view.variance_label} standard errors."
    )
    corrected = view.corrected_estimator
    corrected_row = view.row(corrected)
    if corrected is None or corrected == view.claimed_estimator or corrected_row is None:
        return sentence
    return (
        f"{sentence} Corrected estimate ({view.estimator_name(corrected)}): {number(corrected_row.get('estimate'))}, "
        f"95% interval {interval(corrected_row.get('ci_low'), corrected_row.get('ci_high'))}."
    )


def _titles(items: Sequence[ChecklistItem]) -> str:
    return "; ".join(f"'{item.item}'" for item in items)


def _with_pending(summary: str, pending: Sequence[ChecklistItem]) -> str:
    if not pending:
        return summary
    noun = "item awaits" if len(pending) == 1 else "items await"
    return f"{summary} {len(pending)} {noun} the reviewer's judgement."
