"""Journal-club session links: read-only access to one refit's results and checklist, for a limited time.

A referee, coordinator or steward opens a link for a finished refit; referees
see and withdraw only the links they opened themselves (they need not learn
who else reviews the case), coordinators and stewards all of them. Its key
(256 random bits) is shown once and stored only as a digest; the link expires
after the hours chosen (at most ``settings.session_link_max_hours``) and can be
withdrawn at any time. Whoever holds the key sees the estimates, diagnostics,
checklist, verdict and the reviewer's judgements and notes, without signing in,
and nothing else: no data profile, no file, no report export, no form.
"""

from __future__ import annotations

from datetime import datetime, timedelta
from typing import NamedTuple

from sqlalchemy import bindparam, select
from sqlalchemy.orm import Session

from app.auth.actors import Actor
from app.auth.keys import digest, new_secret
from app.auth.roles import Action
from app.services import checklists
from app.services.context import ServiceContext
from app.services.errors import InvalidInput, NotFound, NotReady, Problem
from app.services.records import load_case, load_refit, record_event, refit_info
from app.services.views import ChecklistSection, FollowedLink, FollowView, SessionLinkInfo, SessionLinkOpened
from app.store.models import Case, Refit, SessionLink, utc_now

MAX_LABEL_LENGTH = 200
OPEN_LINK = (
    select(SessionLink.id, SessionLink.refit_id, Case.revision)
    .join(Case, Case.id == SessionLink.case_id)
    .where(
        SessionLink.secret_sha256 == bindparam("digest"),
        SessionLink.revoked_at.is_(None),
        SessionLink.expires_at > bindparam("now"),
    )
)
"""An open link's refit and its case's revision; built once, since it runs before every page of a link."""

NOT_VALID = (
    "this session link does not open anything: it may have expired or been withdrawn; "
    "ask the person who shared it for a new one"
)


class OpenLink(NamedTuple):
    """An open link's id, the refit it shows and its case's current revision."""

    link_id: int
    refit_id: int
    revision: int


def link_state(row: SessionLink, *, now: datetime | None = None) -> str:
    """``withdrawn``, ``expired`` or ``open``."""
    if row.revoked_at is not None:
        return "withdrawn"
    return "expired" if row.expires_at <= (now or utc_now()) else "open"


def sees_link(actor: Actor, row: SessionLink) -> bool:
    """Whether the actor may see (and withdraw) a link: those who manage the case all, others their own."""
    return actor.may(Action.MANAGE) or (actor.user_id is not None and row.created_by_id == actor.user_id)


def link_info(row: SessionLink) -> SessionLinkInfo:
    return SessionLinkInfo(
        id=row.id,
        case_id=row.case_id,
        refit_id=row.refit_id,
        label=row.label,
        created_by=row.created_by,
        created_at=row.created_at,
        expires_at=row.expires_at,
        revoked_at=row.revoked_at,
        state=link_state(row),
    )


def open_link(ctx: ServiceContext, *, case_id: int, refit_id: int, hours: int, label: str = "") -> SessionLinkOpened:
    """Open a session link to a finished refit, valid for ``hours``; its key is in the result, once."""
    limit = ctx.settings.session_link_max_hours
    problems = []
    if not 1 <= hours <= limit:
        problems.append(Problem(field="hours", message=f"hours: a session link lasts from 1 to {limit} hours"))
    label = label.strip()
    if len(label) > MAX_LABEL_LENGTH:
        problems.append(Problem(field="label", message=f"label: at most {MAX_LABEL_LENGTH} characters"))
    if problems:
        raise InvalidInput(problems)
    key = new_secret()
    with ctx.transaction() as session:
        refit = load_refit(session, case_id, refit_id, actor=ctx.actor, action=Action.SHARE)
        if refit.state != "finished":
            raise NotReady(f"refit {refit_id} has not finished, so there is nothing to show in a session")
        now = utc_now()
        row = SessionLink(
            case_id=case_id,
            refit_id=refit_id,
            label=label,
            secret_sha256=digest(key),
            created_by=ctx.actor.name,
            created_by_id=ctx.actor.user_id,
            created_at=now,
            expires_at=now + timedelta(hours=hours),
        )
        session.add(row)
        session.flush()
        record_event(
            session,
            refit.case,
            kind="session_link_opened",
            message=f"Session link {row.id} opened for refit {refit_id}, valid for {hours} hour{'' if hours == 1 else 's'}"
            + (f": {label}" if label else ""),
            actor=ctx.actor,
        )
        return SessionLinkOpened(link=link_info(row), key=key)


def withdraw_link(ctx: ServiceContext, *, case_id: int, link_id: int) -> SessionLinkInfo:
    """Withdraw a session link at once (withdrawing it again changes nothing)."""
    with ctx.transaction() as session:
        case = load_case(session, case_id, actor=ctx.actor, action=Action.SHARE)
        row = session.get(SessionLink, link_id)
        if row is None or row.case_id != case_id or not sees_link(ctx.actor, row):
            raise NotFound(f"case {case_id} has no session link {link_id}")
        if row.revoked_at is None:
            row.revoked_at = utc_now()
            record_event(
                session, case, kind="session_link_withdrawn", message=f"Session link {link_id} withdrawn", actor=ctx.actor
            )
        return link_info(row)


def follow(ctx: ServiceContext, *, key: str) -> FollowView:
    """What a session link shows; :class:`NotFound` for a key that is unknown, expired or withdrawn."""
    with ctx.reading() as session:
        row = _open_link(session, key)
        refit = session.get(Refit, row.refit_id)
        if refit is None or refit.state != "finished":
            raise NotFound(NOT_VALID)
        checklist = checklists.checklist_of(refit)
        return FollowView(
            case_title=refit.case.title,
            case_reference=refit.case.reference,
            link=FollowedLink(label=row.label, expires_at=row.expires_at),
            refit=refit_info(refit),
            findings=refit.findings or {},
            verdict=checklists.verdict_data(checklist),
            sections=[
                ChecklistSection(id=section, name=name, items=[checklists.item_data(item) for item in items])
                for section, name, items in checklist.sections()
            ],
            judged_items=checklists.judged_count(checklist),
            total_items=len(checklist.items),
        )


def check_link(ctx: ServiceContext, *, key: str) -> OpenLink:
    """The open link with this key (pages of a link are cached per case revision); :class:`NotFound` otherwise.

    One prebuilt query on a plain connection, asked before every cached page of a link.
    """
    with ctx.database.engine.connect() as connection:
        found = connection.execute(OPEN_LINK, {"digest": digest(key), "now": utc_now()}).first()
    if found is None:
        raise NotFound(NOT_VALID)
    return OpenLink(*found)


def _open_link(session: Session, key: str) -> SessionLink:
    row = session.scalars(select(SessionLink).where(SessionLink.secret_sha256 == digest(key))).one_or_none()
    if row is None or link_state(row) != "open":
        raise NotFound(NOT_VALID)
    return row

