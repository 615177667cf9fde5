"""Reading the audit trail: one case's (coordinators and stewards) or the whole server's (stewards).

Entries are written by :func:`app.services.records.record_event` and
:func:`app.services.records.record_audit`; nothing here or anywhere else in
the app changes or removes one (on SQLite a trigger refuses updates), except
that a case's entries go with the case when it is deleted.
"""

from __future__ import annotations

from sqlalchemy import func, select
from sqlalchemy.orm import Session
from sqlalchemy.sql import Select

from app.auth.roles import Action, ServerAction
from app.services.context import ServiceContext
from app.services.records import case_info, load_case, require_on_server
from app.services.views import AuditEntryInfo, AuditTrail, CaseInfo
from app.store.models import AuditEntry

DEFAULT_LIMIT = 500
MAX_LIMIT = 5000


def case_trail(ctx: ServiceContext, *, case_id: int, limit: int = DEFAULT_LIMIT) -> AuditTrail:
    """The newest ``limit`` entries about one case."""
    with ctx.reading() as session:
        case = load_case(session, case_id, actor=ctx.actor, action=Action.AUDIT)
        statement = select(AuditEntry).where(AuditEntry.case_id == case_id)
        return _trail(session, statement, limit=limit, case=case_info(case))


def server_trail(ctx: ServiceContext, *, limit: int = DEFAULT_LIMIT) -> AuditTrail:
    """The newest ``limit`` entries of the whole server: sign-ins, accounts, deletions and every case."""
    require_on_server(ctx.actor, ServerAction.READ_SERVER_AUDIT)
    with ctx.reading() as session:
        return _trail(session, select(AuditEntry), limit=limit, case=None)


def _trail(session: Session, statement: Select[tuple[AuditEntry]], *, limit: int, case: CaseInfo | None) -> AuditTrail:
    limit = max(1, min(limit, MAX_LIMIT))
    total = session.scalar(select(func.count()).select_from(statement.subquery()))
    rows = session.scalars(statement.order_by(AuditEntry.id.desc()).limit(limit)).all()
    return AuditTrail(
        case=case,
        entries=[
            AuditEntryInfo(
                id=row.id,
                at=row.at,
                actor=row.actor,
                actor_kind=row.actor_kind,
                address=row.address,
                action=row.action,
                case_id=row.case_id,
                subject=row.subject,
                detail=row.detail,
            )
            for row in rows
        ],
        total_entries=total or 0,
        limit=limit,
    )
