"""A case's life after the review: closing, reopening, and purging closed cases after the retention period.

A closed case is read-only (nothing in it can change; see
:func:`app.services.records.require`) until a coordinator reopens it. With
``settings.retention_days`` set, ``secondstage purge`` deletes every case
closed longer ago than that, files included, each deletion verified
(:func:`app.services.cases.delete_case`).
"""

from __future__ import annotations

from datetime import datetime, timedelta

from sqlalchemy import select

from app.auth.roles import Action
from app.services import cases
from app.services.context import ServiceContext
from app.services.errors import Forbidden
from app.services.records import case_info, load_case, record_event
from app.services.views import CaseDetail, PurgeReport
from app.store.models import Case, utc_now


def close_case(ctx: ServiceContext, *, case_id: int) -> CaseDetail:
    """Close a finished review; the retention period starts now (closing it again changes nothing)."""
    with ctx.transaction() as session:
        case = load_case(session, case_id, actor=ctx.actor, action=Action.MANAGE)
        if case.closed_at is None:
            case.closed_at = utc_now()
            retention = ctx.settings.retention_days
            record_event(
                session,
                case,
                kind="case_closed",
                message="Case closed"
                + (f"; it will be purged {retention} days from now unless reopened" if retention else ""),
                actor=ctx.actor,
            )
    return cases.get_case(ctx, case_id=case_id)


def reopen_case(ctx: ServiceContext, *, case_id: int) -> CaseDetail:
    """Reopen a closed case so that it can change again."""
    with ctx.transaction() as session:
        case = load_case(session, case_id, actor=ctx.actor, action=Action.MANAGE)
        if case.closed_at is not None:
            case.closed_at = None
            record_event(session, case, kind="case_reopened", message="Case reopened", actor=ctx.actor)
    return cases.get_case(ctx, case_id=case_id)


def purge_closed(ctx: ServiceContext, *, dry_run: bool = False, now: datetime | None = None) -> PurgeReport:
    """Delete every case closed more than ``settings.retention_days`` ago (only the server itself may).

    With no retention period configured nothing is purged. With ``dry_run``,
    the cases are listed and nothing is deleted.
    """
    if not ctx.actor.is_system:
        raise Forbidden("closed cases are purged by the server's own command (secondstage purge)")
    retention = ctx.settings.retention_days
    if retention is None:
        return PurgeReport(retention_days=None, dry_run=dry_run, cases=[], deletions=[])
    cutoff = (now or utc_now()) - timedelta(days=retention)
    with ctx.reading() as session:
        due = session.scalars(
            select(Case).where(Case.closed_at.is_not(None), Case.closed_at < cutoff).order_by(Case.id)
        ).all()
        infos = [case_info(case) for case in due]
    deletions = [] if dry_run else [cases.delete_case(ctx, case_id=info.id) for info in infos]
    return PurgeReport(retention_days=retention, dry_run=dry_run, cases=infos, deletions=deletions)
