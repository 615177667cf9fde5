"""The checklist's data: items, the reviewer's judgements and the verdict.

These are plain frozen dataclasses so that a checklist can be rebuilt from
stored findings at any time and serialised without loss.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import UTC, datetime
from typing import Any

STANDINGS = ("sound", "concern", "serious", "reviewer_judgement", "not_applicable")
"""Automatic standings of an item.

``sound``: the published rule finds nothing to ask about. ``concern``: the rule
flags something the authors should explain. ``serious``: the rule flags a
problem that, unless explained, undermines the claim. ``reviewer_judgement``:
no computation can decide the item; the reviewer reads the manuscript.
``not_applicable``: the item does not apply to this claim, or the finding it
needs is missing (the evidence says which).
"""

REVIEWER_JUDGEMENTS = ("sound", "concern", "serious")
"""What a reviewer may set on an item; it replaces the automatic standing in the verdict."""

STANDING_LABELS = {
    "sound": "sound",
    "concern": "concern",
    "serious": "serious",
    "reviewer_judgement": "for the reviewer",
    "not_applicable": "does not apply",
}
"""Display words for the standings."""


@dataclass(frozen=True)
class Judgement:
    """The reviewer's own reading of one item, with who saved it last and when, where known.

    ``author`` and ``saved_at`` are None for a judgement not yet saved, or
    saved before authors were kept; a ``saved_at`` without a time zone is
    read as UTC.

    Raises
    ------
    ValueError
        When ``standing`` is not one of :data:`REVIEWER_JUDGEMENTS` (or None).
    """

    standing: str | None
    note: str = ""
    author: str | None = None
    saved_at: datetime | None = None

    def __post_init__(self) -> None:
        if self.standing is not None and self.standing not in REVIEWER_JUDGEMENTS:
            allowed = ", ".join(REVIEWER_JUDGEMENTS)
            raise ValueError(f"a reviewer's judgement must be one of {allowed}, not {self.standing!r}")

    def to_dict(self) -> dict[str, Any]:
        """Standing, note, author and the save time in ISO 8601 (UTC), or None for what is not known."""
        saved_at = in_utc(self.saved_at).isoformat() if self.saved_at is not None else None
        return {"standing": self.standing, "note": self.note, "author": self.author, "saved_at": saved_at}


def in_utc(moment: datetime) -> datetime:
    """``moment`` in UTC; a time without a time zone is taken to be UTC already (as the store keeps times)."""
    return moment.replace(tzinfo=UTC) if moment.tzinfo is None else moment.astimezone(UTC)


@dataclass(frozen=True)
class ChecklistItem:
    """One question about the claim, with the automatic reading and the reviewer's own."""

    id: str
    section: str
    item: str
    standing: str
    evidence: str
    rule: str
    source: str
    explanation: str
    question: str | None
    judgement: Judgement | None = None

    @property
    def effective_standing(self) -> str:
        """The reviewer's judgement when set, otherwise the automatic standing."""
        if self.judgement is not None and self.judgement.standing is not None:
            return self.judgement.standing
        return self.standing

    def to_dict(self) -> dict[str, Any]:
        return {
            "id": self.id,
            "section": self.section,
            "item": self.item,
            "standing": self.standing,
            "evidence": self.evidence,
            "rule": self.rule,
            "source": self.source,
            "explanation": self.explanation,
            "question": self.question,
            "judgement": self.judgement.to_dict() if self.judgement else None,
        }


@dataclass(frozen=True)
class Verdict:
    """The overall reading of the claim and the items that drive it."""

    code: str
    label: str
    summary: str
    drivers: list[str]

    def to_dict(self) -> dict[str, Any]:
        return {"code": self.code, "label": self.label, "summary": self.summary, "drivers": list(self.drivers)}
