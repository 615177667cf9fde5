"""Checklists: building one from stored findings and judgements, saving judgements, exporting reports.

The checklist itself is computed by :mod:`app.review` from the refit's findings
and the reviewer's judgements every time it is shown; only the judgements (with
who saved each last, and when) and a summary (verdict, serious items,
reproduction status) for the triage overview are stored.

Saving is checked optimistically: a form carries the time the judgement it
shows was saved (:class:`LoadedVersion`), and a save made from an older version
than the stored one is refused with :class:`ChangedMeanwhile`, keeping nothing,
so two people typing on one item never overwrite each other silently.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping
from dataclasses import dataclass
from datetime import UTC, datetime, timedelta
from typing import Any, ClassVar, Literal

from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator
from sqlalchemy import select
from sqlalchemy.orm import Session

from app.auth.actors import Actor
from app.auth.roles import Action
from app.review.checklist import REVIEWER_JUDGEMENTS, Checklist, ChecklistItem, Judgement, build_checklist
from app.review.reports import REPORT_FORMATS
from app.services.context import ServiceContext
from app.services.errors import ChangedMeanwhile, InvalidInput, NotFound, NotReady, Problem, problems_from
from app.services.records import case_info, load_refit, record_event, refit_info
from app.services.views import (
    ChecklistSection,
    ChecklistView,
    ExportedReport,
    JudgementSaved,
    ReportFormatInfo,
)
from app.store.models import Judgement as JudgementRow
from app.store.models import Refit, utc_now

REPRODUCTION_SECTION = "reproduction"

REPRODUCTION_BY_STANDING = {
    "serious": "not_reproduced",
    "concern": "partly_reproduced",
    "reviewer_judgement": "to_judge",
    "sound": "reproduced",
    "not_applicable": "nothing_claimed",
}
"""Reproduction status from the most pressing effective standing of the reproduction items."""

MAX_NOTE_LENGTH = 20_000

JUDGEMENT_EVENT_MERGE = timedelta(minutes=15)
"""Saves of the same item within this time make one line of the case's history."""


class JudgementFields(BaseModel):
    """A judgement as submitted: one of the reviewer standings (or none) and a note."""

    model_config = ConfigDict(extra="forbid")

    standing: Literal[REVIEWER_JUDGEMENTS] | None = None  # type: ignore[valid-type]
    note: str = Field(default="", max_length=MAX_NOTE_LENGTH)

    @field_validator("standing", mode="before")
    @classmethod
    def _blank_is_none(cls, value: Any) -> Any:
        return value or None

    def judgement(self) -> Judgement:
        return Judgement(standing=self.standing, note=self.note.strip())


@dataclass(frozen=True)
class LoadedVersion:
    """The judgement a save started from: when it was last saved, or None when the item had none."""

    updated_at: datetime | None

    NONE: ClassVar[str] = "none"
    """What a form carries for an item that had no judgement when it was loaded."""

    @classmethod
    def from_text(cls, text: str) -> LoadedVersion:
        """The version a form carries: an ISO timestamp, or :attr:`NONE` for an item without a judgement."""
        if text.strip() == cls.NONE:
            return cls(updated_at=None)
        try:
            return cls(updated_at=datetime.fromisoformat(text.strip()))
        except ValueError:
            raise InvalidInput(
                [Problem(field="loaded_at", message="loaded_at: not a time this page could have sent; reload the page")]
            ) from None

    def matches(self, stored: JudgementRow | None) -> bool:
        """Whether nothing was saved on the item since this version was loaded."""
        if stored is None:
            return self.updated_at is None
        if self.updated_at is None:
            return False
        loaded = self.updated_at if self.updated_at.tzinfo else self.updated_at.replace(tzinfo=UTC)
        return loaded == stored.updated_at


@dataclass(frozen=True)
class Summary:
    """What the triage overview shows for a refit."""

    verdict: str
    verdict_label: str
    serious_items: int
    reproduction: str


def build(
    findings: Mapping[str, Any],
    *,
    judgements: Mapping[str, Judgement],
    variants: Mapping[str, Mapping[str, Any]] | None,
) -> Checklist:
    """The checklist of a refit's findings with the reviewer's judgements applied."""
    return build_checklist(findings, judgements=judgements, variants=variants)


def checklist_of(row: Refit, *, judgements: Mapping[str, Judgement] | None = None) -> Checklist:
    """The checklist of a finished refit row, with its stored (or the given) judgements."""
    return build(
        row.findings or {},
        judgements=judgements_of(row) if judgements is None else judgements,
        variants=row.variants,
    )


def summarise(checklist: Checklist) -> Summary:
    """Verdict, number of items standing at ``serious`` and the reproduction status."""
    effective = [item.effective_standing for item in checklist.items]
    reproduction = [item.effective_standing for item in checklist.items if item.section == REPRODUCTION_SECTION]
    most_pressing = next(
        (standing for standing in REPRODUCTION_BY_STANDING if standing in reproduction), "not_applicable"
    )
    return Summary(
        verdict=checklist.verdict.code,
        verdict_label=checklist.verdict.label,
        serious_items=effective.count("serious"),
        reproduction=REPRODUCTION_BY_STANDING[most_pressing],
    )


def store_summary(row: Refit, summary: Summary) -> None:
    """Copy a summary onto the refit row (the only refit columns that change after it finished)."""
    row.review_verdict = summary.verdict
    row.review_verdict_label = summary.verdict_label
    row.review_serious = summary.serious_items
    row.review_reproduction = summary.reproduction


def get_checklist(ctx: ServiceContext, *, case_id: int, refit_id: int) -> ChecklistView:
    """The checklist page of a finished refit."""
    with ctx.reading() as session:
        row = _finished_refit(session, case_id, refit_id, actor=ctx.actor)
        checklist = checklist_of(row)
        saved = {stored.item_id: stored for stored in row.judgements}
        return ChecklistView(
            case=case_info(row.case),
            refit=refit_info(row),
            verdict=verdict_data(checklist),
            sections=[
                ChecklistSection(
                    id=section, name=name, items=[item_data(item, saved=saved.get(item.id)) for item in items]
                )
                for section, name, items in checklist.sections()
            ],
            judged_items=judged_count(checklist),
            total_items=len(checklist.items),
            report_formats=[
                ReportFormatInfo(
                    name=fmt.name,
                    extension=_extension(fmt.extension),
                    media_type=fmt.media_type,
                    description=fmt.description,
                )
                for fmt in REPORT_FORMATS.values()
            ],
        )


def save_judgement(
    ctx: ServiceContext,
    *,
    case_id: int,
    refit_id: int,
    item_id: str,
    standing: str | None,
    note: str,
    loaded: LoadedVersion | None = None,
) -> JudgementSaved:
    """Record the reviewer's standing and note on one item; an empty standing and note clear it.

    With ``loaded``, the save is refused (:class:`ChangedMeanwhile`, nothing
    kept) when someone saved or cleared the item after that version was loaded.
    """
    try:
        judgement = JudgementFields(standing=standing, note=note).judgement()
    except ValidationError as error:
        raise InvalidInput(problems_from(error)) from None
    now = utc_now()
    with ctx.transaction() as session:
        row = _finished_refit(session, case_id, refit_id, actor=ctx.actor, action=Action.EDIT)
        judgements = judgements_of(row)
        before = judgements.get(item_id, Judgement(standing=None, note=""))
        checklist = checklist_of(row, judgements=judgements)
        item = next((item for item in checklist.items if item.id == item_id), None)
        if item is None:
            raise NotFound(f"refit {refit_id} has no checklist item '{item_id}'")
        stored = session.scalars(
            select(JudgementRow).where(JudgementRow.refit_id == refit_id, JudgementRow.item_id == item_id)
        ).one_or_none()
        if loaded is not None and not loaded.matches(stored):
            raise ChangedMeanwhile(_changed_meanwhile(stored))
        previous_author = stored.author if stored is not None else ""
        cleared = judgement.standing is None and not judgement.note
        if cleared:
            if stored is not None:
                session.delete(stored)
                stored = None
            judgements.pop(item_id, None)
        else:
            if stored is None:
                stored = JudgementRow(refit_id=refit_id, item_id=item_id)
                session.add(stored)
            stored.standing = judgement.standing
            stored.note = judgement.note
            stored.updated_at = now
            stored.author = ctx.actor.name[:100]
            stored.author_user_id = ctx.actor.user_id
            judgements[item_id] = dataclasses.replace(judgement, author=stored.author or None, saved_at=now)
        checklist = checklist_of(row, judgements=judgements)
        store_summary(row, summarise(checklist))
        record_event(
            session,
            row.case,
            kind="judgement_saved",
            message=f"Refit {refit_id}: {'judgement cleared' if cleared else 'judgement saved'} on '{item.item}'",
            actor=ctx.actor,
            audit_action="judgement_saved" if before.standing != judgement.standing else "note_saved",
            audit_detail=_judgement_change(
                refit_id, item.item, before=before, after=judgement, author=ctx.actor.name, previous_author=previous_author
            ),
            merge_within=JUDGEMENT_EVENT_MERGE,
        )
        return JudgementSaved(
            item=item_data(checklist.item(item_id), saved=stored),
            verdict=verdict_data(checklist),
            judged_items=judged_count(checklist),
            total_items=len(checklist.items),
            saved_at=now,
        )


def _changed_meanwhile(stored: JudgementRow | None) -> str:
    """Why a save from an older version is refused: who changed the item, and when (UTC, to the minute)."""
    if stored is None:
        return "someone else cleared this judgement since you loaded it; reload to see it, your change was not saved"
    at = stored.updated_at.strftime("%Y-%m-%d %H:%M UTC")
    who = stored.author or "someone else"
    return f"{who} changed this note at {at}; reload to see it, your change was not saved"


def export_report(ctx: ServiceContext, *, case_id: int, refit_id: int, format_name: str) -> ExportedReport:
    """Render the checklist and findings in one of :data:`app.review.reports.REPORT_FORMATS`.

    Each reviewer's note is exported with the name of whoever saved it last and when (see :func:`judgements_of`).
    """
    report_format = REPORT_FORMATS.get(format_name)
    if report_format is None:
        raise NotFound(f"no report format '{format_name}'; choose one of {', '.join(REPORT_FORMATS)}")
    with ctx.reading() as session:
        row = _finished_refit(session, case_id, refit_id, actor=ctx.actor, action=Action.EXPORT)
        findings = row.findings or {}
        checklist = checklist_of(row)
        data_file_name = row.dataset.original_name
    content = report_format.render(findings, checklist, data_file_name=data_file_name)
    return ExportedReport(
        file_name=f"secondstage-case{case_id}-refit{refit_id}{_extension(report_format.extension)}",
        media_type=report_format.media_type,
        content=content,
    )


def verdict_data(checklist: Checklist) -> dict[str, Any]:
    """The verdict as JSON data, with the titles of the items that drive it."""
    titles = {item.id: item.item for item in checklist.items}
    verdict = checklist.verdict.to_dict()
    return {**verdict, "driver_titles": {item_id: titles.get(item_id, item_id) for item_id in verdict["drivers"]}}


def judged_count(checklist: Checklist) -> int:
    """How many items carry a judgement or a note of the reviewer."""
    return sum(1 for item in checklist.items if item.judgement is not None)


def item_data(item: ChecklistItem, *, saved: JudgementRow | None = None) -> dict[str, Any]:
    """An item as JSON data, with the standing that counts (the reviewer's when set) and who judged it.

    ``saved_by`` and ``saved_at`` name the author and time of the stored
    judgement (None without one); ``saved_at`` is also the version a form sends
    back when it saves (see :class:`LoadedVersion`). The judgement itself is
    given as standing and note only, so that a view names its author only
    when the caller passes the stored row (a session link's view names nobody).
    """
    judgement = item.judgement
    return {
        **item.to_dict(),
        "judgement": {"standing": judgement.standing, "note": judgement.note} if judgement is not None else None,
        "effective_standing": item.effective_standing,
        "saved_by": (saved.author or None) if saved is not None else None,
        "saved_at": saved.updated_at if saved is not None else None,
    }


def _judgement_change(
    refit_id: int, title: str, *, before: Judgement, after: Judgement, author: str, previous_author: str
) -> str:
    """What a save changed, for the audit trail: the standing, the note's length (not its text) and its author."""
    parts = []
    if before.standing != after.standing:
        parts.append(f"standing {before.standing or 'automatic'} to {after.standing or 'automatic'}")
    if before.note != after.note:
        parts.append(f"note {'removed' if not after.note else f'now {len(after.note)} characters'}")
    authors = f"by {author}" + (
        f", replacing the judgement by {previous_author}" if previous_author and previous_author != author else ""
    )
    return f"Refit {refit_id}, '{title}': " + ("; ".join(parts) or "saved unchanged") + f"; {authors}"


def _finished_refit(
    session: Session, case_id: int, refit_id: int, *, actor: Actor, action: Action = Action.READ
) -> Refit:
    row = load_refit(session, case_id, refit_id, actor=actor, action=action)
    if row.state != "finished":
        reason = f"it failed: {row.error}" if row.state == "failed" else f"it is still {row.state}"
        raise NotReady(f"refit {refit_id} has no checklist: {reason}")
    return row


def judgements_of(row: Refit) -> dict[str, Judgement]:
    """The reviewer's stored judgements on a refit, by item id, each with who saved it last and when.

    An empty author (a judgement saved before authors were kept) becomes None.
    """
    return {
        stored.item_id: Judgement(
            standing=stored.standing, note=stored.note, author=stored.author or None, saved_at=stored.updated_at
        )
        for stored in row.judgements
    }


def _extension(extension: str) -> str:
    return extension if extension.startswith(".") else f".{extension}"
