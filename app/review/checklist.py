"""The reviewer's checklist: findings (as stored JSON) in, items and a verdict out.

Pure: no web, storage or template code. The rules that produce the items
live in :mod:`app.review.rules`, one module per section; the verdict rules in
:mod:`app.review.verdict`.

Item ids are stable (``<section>.<item>``) because the reviewer's judgements
attach to them:

========================  =====================================================
section                   items
========================  =====================================================
reproduction              estimate, std_error, n_obs, first_stage_f
omitted_causes            naive_vs_instrumented, sensitivity,
                          proportional_selection, shared_source
relevance                 effective_f, first_stage_f, joint_strength,
                          identification
exclusion                 argument, as_if_random, balance, direct_effect,
                          monotonicity
overidentification        joint_test, blamed_instrument
inference                 weak_iv_robust, few_clusters, variance_choice,
                          cluster_level
design                    mediator, mediator_manipulated, panel_effects,
                          effects_sampling, selection
========================  =====================================================
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from app.review.items import REVIEWER_JUDGEMENTS, STANDINGS, ChecklistItem, Judgement, Verdict
from app.review.rules import SECTION_MODULES, SECTION_TITLES
from app.review.verdict import decide_verdict
from app.review.view import FindingsView

__all__ = [
    "REVIEWER_JUDGEMENTS",
    "STANDINGS",
    "Checklist",
    "ChecklistItem",
    "Judgement",
    "Verdict",
    "build_checklist",
    "item_ids",
]


@dataclass(frozen=True)
class Checklist:
    """Every item in display order, and the verdict they lead to."""

    items: list[ChecklistItem]
    verdict: Verdict

    def sections(self) -> list[tuple[str, str, list[ChecklistItem]]]:
        """``(section id, display name, items)`` in display order."""
        return [
            (section, title, [item for item in self.items if item.section == section])
            for section, title in SECTION_TITLES.items()
        ]

    def item(self, item_id: str) -> ChecklistItem:
        """The item with this id (KeyError if there is none)."""
        for item in self.items:
            if item.id == item_id:
                return item
        raise KeyError(item_id)

    def to_dict(self) -> dict[str, Any]:
        """``{"checklist": [...], "verdict": {...}}``, JSON-safe."""
        return {"checklist": [item.to_dict() for item in self.items], "verdict": self.verdict.to_dict()}


def build_checklist(
    findings: Mapping[str, Any],
    *,
    judgements: Mapping[str, Judgement] | None = None,
    variants: Mapping[str, Mapping[str, Any]] | None = None,
) -> Checklist:
    """Apply every rule to stored findings and combine the items into a verdict.

    Parameters
    ----------
    findings
        The JSON form of a refit (``Findings.to_dict()``). Missing keys give
        items that say the finding is missing; they never raise.
    judgements
        The reviewer's judgements by item id. Judgements for ids the
        checklist does not have are ignored.
    variants
        Optional standard errors under other variance estimators, from
        :func:`app.review.reproduction.covariance_variants`; they let the
        reproduction items name the variance estimator a table really used.
    """
    view = FindingsView(findings, variants=variants)
    judgements = judgements or {}
    items = [
        dataclasses.replace(item, judgement=judgements.get(item.id))
        for module in SECTION_MODULES
        for item in (rule.evaluate(view) for rule in module.RULES)
    ]
    return Checklist(items=items, verdict=decide_verdict(items, view))


def item_ids() -> list[str]:
    """Every item id, in display order (for forms that store judgements)."""
    return [rule.id for module in SECTION_MODULES for rule in module.RULES]
