"""Giving referees and readers access to a case, and withdrawing it.

Stewards and coordinators see every case and need no access row. A referee
given access works on the case; a reader given access reads it. Granting and
withdrawing are written to the case's audit trail but not to its history, which
referees read: referees need not learn who else reviews the manuscript.
"""

from __future__ import annotations

from sqlalchemy import select
from sqlalchemy.orm import Session

from app.auth.roles import GIVEN_ACCESS, Action, Role
from app.services.context import ServiceContext
from app.services.errors import InvalidInput, NotFound, Problem
from app.services.records import bump_revision, load_case, record_audit
from app.services.views import AccessInfo
from app.store.models import Case, CaseAccess, User


def grant_access(ctx: ServiceContext, *, case_id: int, user_id: int) -> AccessInfo:
    """Give a referee or reader access to a case (giving it twice changes nothing)."""
    with ctx.transaction() as session:
        case = load_case(session, case_id, actor=ctx.actor, action=Action.MANAGE)
        user = session.get(User, user_id)
        if user is None:
            raise InvalidInput([Problem(field="user_id", message=f"user_id: there is no account {user_id}")])
        if Role(user.role) not in GIVEN_ACCESS:
            raise InvalidInput(
                [Problem(field="user_id", message=f"user_id: '{user.name}' is a {user.role} and sees every case already")]
            )
        row = _access_row(session, case_id, user_id)
        if row is None:
            row = CaseAccess(case_id=case_id, user_id=user_id, granted_by=ctx.actor.name)
            session.add(row)
            session.flush()
            detail = f"{user.role} given access to case {case.id}"
            _record_access_change(session, ctx, case, action="access_granted", name=user.name, detail=detail)
        return AccessInfo(
            user_id=user.id,
            name=user.name,
            full_name=user.full_name,
            role=user.role,
            granted_at=row.granted_at,
            granted_by=row.granted_by,
        )


def withdraw_access(ctx: ServiceContext, *, case_id: int, user_id: int) -> None:
    """Withdraw someone's access to a case; from their next request on, the case does not exist for them."""
    with ctx.transaction() as session:
        case = load_case(session, case_id, actor=ctx.actor, action=Action.MANAGE)
        row = _access_row(session, case_id, user_id)
        if row is None:
            raise NotFound(f"account {user_id} has no access to case {case_id}")
        name = row.user.name
        session.delete(row)
        detail = f"access to case {case.id} withdrawn"
        _record_access_change(session, ctx, case, action="access_withdrawn", name=name, detail=detail)


def _access_row(session: Session, case_id: int, user_id: int) -> CaseAccess | None:
    """The row that gives this account access to this case, if there is one."""
    return session.scalars(
        select(CaseAccess).where(CaseAccess.case_id == case_id, CaseAccess.user_id == user_id)
    ).one_or_none()


def _record_access_change(
    session: Session, ctx: ServiceContext, case: Case, *, action: str, name: str, detail: str
) -> None:
    """Audit a change of who may see the case (not in its history) and raise its revision, so cached pages renew."""
    record_audit(session, actor=ctx.actor, action=action, case_id=case.id, subject=f"user {name}", detail=detail)
    bump_revision(session, case.id)
