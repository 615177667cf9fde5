"""Loading rows by id within a case (:class:`NotFound` otherwise), access checks, views, history and audit.

Every lookup takes the case id as well as the row id, so a dataset, claim or
refit is only ever reached through the case that holds it, and every lookup
checks the acting user's access to that case here, once, for every service:

* a case the actor may not see (a referee or reader without access to it) is
  :class:`NotFound`, worded exactly as for a case that does not exist;
* a visible case where the actor's role may not do the action asked is
  :class:`Forbidden`;
* a change (``Action.EDIT``) to a closed case is :class:`CaseClosed`.

Every change to a case is written by :func:`record_event` (a line of the case's
history and an audit entry) or :func:`bump_revision`; entries that belong to no
case (sign-ins, accounts, deletions) by :func:`record_audit`.
"""

from __future__ import annotations

from datetime import datetime, timedelta
from typing import TypeVar

from sqlalchemy import ColumnElement, select, true, update
from sqlalchemy.orm import Session

from app.auth.actors import Actor
from app.auth.roles import ACTION_WORDS, Action, ServerAction, role_label
from app.services.errors import CaseClosed, Forbidden, NotFound
from app.services.views import CaseInfo, ClaimInfo, DatasetInfo, EventInfo, RefitInfo
from app.store.models import AuditEntry, Case, CaseAccess, Claim, Dataset, Event, Refit, utc_now

CaseRow = TypeVar("CaseRow", Dataset, Claim, Refit)
"""A row that belongs to one case (it has a ``case_id``)."""


def load_case(session: Session, case_id: int, *, actor: Actor, action: Action = Action.READ) -> Case:
    """The case, if ``actor`` may see it and do ``action`` to it; :class:`NotFound` or :class:`Forbidden` otherwise."""
    case = session.get(Case, case_id)
    if case is None or not can_see(session, actor, case_id):
        raise NotFound(f"there is no case {case_id}")
    require(actor, action, case)
    return case


def require(actor: Actor, action: Action, case: Case) -> None:
    """Refuse ``action`` on a case the actor sees: :class:`Forbidden` for the role, :class:`CaseClosed` for a change."""
    if not actor.may(action):
        raise Forbidden(f"as a {role_label(actor.role or '').lower()} you cannot {ACTION_WORDS[action]}")
    if action is Action.EDIT and case.closed_at is not None:
        raise CaseClosed(f"case {case.id} is closed, so nothing in it can change; a coordinator can reopen it")


def require_on_server(actor: Actor, action: ServerAction) -> None:
    """Refuse a server-wide action the actor's role does not allow."""
    if not actor.may_on_server(action):
        raise Forbidden(f"as a {role_label(actor.role or '').lower()} you cannot {action}")


def can_see(session: Session, actor: Actor, case_id: int) -> bool:
    """Whether ``actor`` sees the case: every case for the server, stewards and coordinators; else an access row."""
    if actor.sees_every_case:
        return True
    memo: dict[tuple[int | None, int], bool] = session.info.setdefault("visible_cases", {})
    key = (actor.user_id, case_id)
    if key not in memo:
        found = session.scalar(
            select(CaseAccess.id).where(CaseAccess.case_id == case_id, CaseAccess.user_id == actor.user_id)
        )
        memo[key] = found is not None
    return memo[key]


def visible_cases(actor: Actor) -> ColumnElement[bool]:
    """A condition on ``Case.id`` that keeps the cases ``actor`` sees."""
    if actor.sees_every_case:
        return true()
    return Case.id.in_(select(CaseAccess.case_id).where(CaseAccess.user_id == actor.user_id))


def load_dataset(
    session: Session, case_id: int, dataset_id: int, *, actor: Actor, action: Action = Action.READ
) -> Dataset:
    """A dataset version of this case, or :class:`NotFound`."""
    return _load_in_case(session, Dataset, case_id, dataset_id, noun="dataset", actor=actor, action=action)


def load_claim(session: Session, case_id: int, claim_id: int, *, actor: Actor, action: Action = Action.READ) -> Claim:
    """A claim version of this case, or :class:`NotFound`."""
    return _load_in_case(session, Claim, case_id, claim_id, noun="claim", actor=actor, action=action)


def load_refit(session: Session, case_id: int, refit_id: int, *, actor: Actor, action: Action = Action.READ) -> Refit:
    """A refit of this case, or :class:`NotFound`."""
    return _load_in_case(session, Refit, case_id, refit_id, noun="refit", actor=actor, action=action)


def _load_in_case(
    session: Session, model: type[CaseRow], case_id: int, row_id: int, *, noun: str, actor: Actor, action: Action
) -> CaseRow:
    """A row of ``model`` that belongs to this case, once the case is loaded for ``actor``; :class:`NotFound` otherwise."""
    load_case(session, case_id, actor=actor, action=action)
    row = session.get(model, row_id)
    if row is None or row.case_id != case_id:
        raise NotFound(f"case {case_id} has no {noun} {row_id}")
    return row


def latest_claim_versions(session: Session, case_id: int) -> dict[int, int]:
    """Claim number to its newest version number."""
    rows = session.execute(select(Claim.number, Claim.version).where(Claim.case_id == case_id)).all()
    latest: dict[int, int] = {}
    for number, version in rows:
        latest[number] = max(version, latest.get(number, 0))
    return latest


def record_event(
    session: Session,
    case: Case,
    *,
    kind: str,
    message: str,
    actor: Actor,
    audit_action: str | None = None,
    audit_detail: str | None = None,
    merge_within: timedelta | None = None,
) -> None:
    """Add a line to the case's history and to the audit trail, mark the case active now, raise its revision.

    The history line says what happened, without names (referees need not
    learn who else works on the case); the audit entry adds who did it, from
    where, and ``audit_action`` / ``audit_detail`` when the history's kind and
    line alone do not say what changed.
    With ``merge_within``, a history line identical to the case's latest one and
    younger than that only has its time moved forward (a note saved as it is
    typed leaves one line, not one per pause); the audit trail keeps every save.
    """
    now = utc_now()
    record_audit(
        session, actor=actor, action=audit_action or kind, detail=audit_detail or message, case_id=case.id, at=now
    )
    latest = None
    if merge_within is not None:
        latest = session.scalars(
            select(Event).where(Event.case_id == case.id).order_by(Event.id.desc()).limit(1)
        ).one_or_none()
    if latest is not None and (latest.kind, latest.message) == (kind, message) and now - latest.at <= merge_within:
        latest.at = now
    else:
        session.add(Event(case_id=case.id, at=now, kind=kind, message=message))
    case.last_activity = now
    bump_revision(session, case.id)


def bump_revision(session: Session, case_id: int) -> None:
    """Raise the case's revision by one, atomically in SQL (two writers never read the same value)."""
    session.execute(update(Case).where(Case.id == case_id).values(revision=Case.revision + 1))


def case_info(case: Case) -> CaseInfo:
    return CaseInfo(
        id=case.id,
        title=case.title,
        reference=case.reference,
        notes=case.notes,
        created_at=case.created_at,
        last_activity=case.last_activity,
        closed_at=case.closed_at,
    )


def dataset_info(dataset: Dataset) -> DatasetInfo:
    return DatasetInfo(
        id=dataset.id,
        case_id=dataset.case_id,
        version=dataset.version,
        original_name=dataset.original_name,
        file_format=dataset.file_format,
        size_bytes=dataset.size_bytes,
        sha256=dataset.sha256,
        n_rows=dataset.n_rows,
        n_columns=dataset.n_columns,
        uploaded_at=dataset.uploaded_at,
    )


def claim_info(claim: Claim, *, latest_version: int) -> ClaimInfo:
    return ClaimInfo(
        id=claim.id,
        case_id=claim.case_id,
        number=claim.number,
        version=claim.version,
        title=claim.title,
        spec=claim.spec,
        spec_sha256=claim.spec_sha256,
        change_note=claim.change_note,
        drafted_on_id=claim.drafted_on_id,
        created_at=claim.created_at,
        is_latest=claim.version == latest_version,
    )


def refit_info(refit: Refit) -> RefitInfo:
    return RefitInfo(
        id=refit.id,
        case_id=refit.case_id,
        claim_id=refit.claim_id,
        claim_number=refit.claim.number,
        claim_version=refit.claim.version,
        claim_title=refit.claim.title,
        dataset_id=refit.dataset_id,
        dataset_version=refit.dataset.version,
        data_file_name=refit.dataset.original_name,
        state=refit.state,
        stage=refit.stage,
        error=refit.error,
        created_at=refit.created_at,
        started_at=refit.started_at,
        finished_at=refit.finished_at,
        verdict=refit.review_verdict,
        verdict_label=refit.review_verdict_label,
        serious_items=refit.review_serious,
        reproduction=refit.review_reproduction,
    )


def event_info(event: Event) -> EventInfo:
    return EventInfo(at=event.at, kind=event.kind, message=event.message)


def record_audit(
    session: Session,
    *,
    actor: Actor,
    action: str,
    detail: str,
    case_id: int | None = None,
    subject: str = "",
    address: str | None = None,
    at: datetime | None = None,
) -> None:
    """Append one entry to the audit trail (entries are never changed afterwards)."""
    session.add(
        AuditEntry(
            at=at or utc_now(),
            actor=actor.described()[:100],
            actor_kind=actor.kind,
            actor_user_id=actor.user_id,
            address=(actor.address if address is None else address)[:64],
            action=action,
            case_id=case_id,
            subject=subject[:300],
            detail=detail,
        )
    )
