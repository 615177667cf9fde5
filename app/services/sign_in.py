"""Signing in and out: password checks with limits on failures, web sessions, and the first administrator.

A successful sign-in opens a new web session (a fresh secret every time, so a
session id planted before sign-in is worthless) that lasts
``settings.session_hours``. Failures are written to the audit trail with the
name tried and the address; they also count towards the limits of
:mod:`app.auth.rate_limit`, checked before the password is. A refusal never
says whether the name exists.

While no account exists the server needs its first steward: the web layer
offers a one-time first-run page (its key printed on the terminal), which
calls :func:`complete_first_run`.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime, timedelta

from sqlalchemy import bindparam, delete, func, or_, select
from sqlalchemy.orm import Session

from app.auth.actors import Actor
from app.auth.keys import digest, new_secret
from app.auth.rate_limit import SignInLimits, wait_needed
from app.auth.roles import Role
from app.services.context import ServiceContext
from app.services.errors import Forbidden, SignInRefused, TooManyAttempts
from app.services.records import record_audit
from app.services.users import checked_new_account, normalise_name, user_info
from app.services.views import UserInfo
from app.store.models import AuditEntry, User, WebSession, utc_now

SESSION_OWNER = (
    select(WebSession.id, User.id, User.name, User.role)
    .join(User, User.id == WebSession.user_id)
    .where(WebSession.secret_sha256 == bindparam("digest"), WebSession.expires_at > bindparam("now"))
)
"""The person behind a live session; built once, since it runs before every page."""

FAILED = "sign_in_failed"
REFUSED = "sign_in_refused"
"""Attempts refused by the limits before the password was checked (they do not count as failures)."""
SUCCEEDED = "signed_in"
MAX_NAME_TRIED = 100


@dataclass(frozen=True)
class SignedIn:
    """A new web session: who, its secret (for the cookie only), and when it ends."""

    user: UserInfo
    session_id: int
    secret: str
    expires_at: datetime


def limits(ctx: ServiceContext) -> SignInLimits:
    """The server's sign-in limits."""
    settings = ctx.settings
    return SignInLimits(
        window=timedelta(minutes=settings.sign_in_window_minutes),
        per_account=settings.sign_in_failures_per_account,
        per_address=settings.sign_in_failures_per_address,
    )


def sign_in(ctx: ServiceContext, *, name: str, password: str, address: str) -> SignedIn:
    """Check a name and password and open a web session.

    Raises
    ------
    TooManyAttempts
        Too many recent failures for this account or from this address; the
        password is not even checked.
    SignInRefused
        The name or the password is wrong (the message does not say which).
    """
    name = normalise_name(name)[:MAX_NAME_TRIED]
    now = utc_now()
    try:
        _check_limits(ctx, name=name, address=address, now=now)
    except TooManyAttempts:
        count = ctx.refusals.refused(name, now=now)
        if count is not None:
            _record_refusals(ctx, name, count, address=address)
        raise
    for untold, count in ctx.refusals.take(name).items():
        _record_refusals(ctx, untold, count, address=address)
    with ctx.reading() as session:
        user = session.scalars(select(User).where(User.name == name)).one_or_none()
        stored = user.password_hash if user is not None else None
    if user is None or not ctx.hasher.verify(stored, password):
        with ctx.transaction() as session:
            record_audit(
                session,
                actor=_claimed_name(name),
                action=FAILED,
                subject=name,
                detail="wrong name or password",
                address=address,
            )
        raise SignInRefused("the name or the password is not right")
    rehashed = ctx.hasher.hash(password) if ctx.hasher.needs_rehash(user.password_hash) else None
    with ctx.transaction() as session:
        user = session.get(User, user.id)
        if user is None:
            raise SignInRefused("the name or the password is not right")
        if rehashed is not None:
            user.password_hash = rehashed
        return _open_session(ctx, session, user, address=address)


def record_untold_refusals(ctx: ServiceContext) -> None:
    """Write the refused attempts still waiting for their account's next audit entry (when the server stops)."""
    for name, count in ctx.refusals.take().items():
        _record_refusals(ctx, name, count, address="")


def _claimed_name(name: str) -> Actor:
    """Who a refused sign-in says it is: the name typed into the form, before any password is checked."""
    return Actor(name=name or "(no name)", kind="user", via="sign-in form")


def _record_refusals(ctx: ServiceContext, name: str, count: int, *, address: str) -> None:
    """One audit entry for ``count`` attempts on an account refused by the limits."""
    attempts = "1 attempt" if count == 1 else f"{count} attempts"
    with ctx.transaction() as session:
        record_audit(
            session,
            actor=_claimed_name(name),
            action=REFUSED,
            subject=name,
            detail=f"{attempts} refused without checking the password: too many recent failed sign-ins for this "
            "account or from this address (one entry a minute at most; it counts the attempts since the last one)",
            address=address,
        )


def sign_out(ctx: ServiceContext, *, secret: str, address: str) -> None:
    """End the web session with this secret (ending it twice changes nothing).

    Also called when someone signs in again from a browser that still holds a
    session: the older session ends rather than lingering.
    """
    with ctx.transaction() as session:
        row = session.scalars(select(WebSession).where(WebSession.secret_sha256 == digest(secret))).one_or_none()
        if row is None:
            return
        user = session.get(User, row.user_id)
        session.delete(row)
        if user is not None:
            owner = Actor(name=user.name, kind="user", role=Role(user.role), user_id=user.id, via="web session")
            record_audit(session, actor=owner, action="signed_out", subject=user.name, detail="", address=address)


def actor_for_session(ctx: ServiceContext, *, secret: str, address: str) -> Actor | None:
    """The person a live web session belongs to, or None for a secret that is unknown, ended or expired.

    One prebuilt query on a plain connection: it runs before every page.
    """
    with ctx.database.engine.connect() as connection:
        found = connection.execute(SESSION_OWNER, {"digest": digest(secret), "now": utc_now()}).first()
    if found is None:
        return None
    session_id, user_id, name, role = found
    return Actor(
        name=name, kind="user", role=Role(role), user_id=user_id, via="web session", address=address, session_id=session_id
    )


def first_run_needed(ctx: ServiceContext) -> bool:
    """Whether the server has no account yet (and so needs its first steward)."""
    with ctx.reading() as session:
        return not session.scalar(select(func.count()).select_from(User))


def complete_first_run(ctx: ServiceContext, *, name: str, full_name: str, password: str, address: str) -> SignedIn:
    """Create the first steward and sign them in; refused once any account exists."""
    name, full_name = checked_new_account(name=name, full_name=full_name, password=password)
    password_hash = ctx.hasher.hash(password)
    with ctx.transaction() as session:
        if session.scalar(select(func.count()).select_from(User)):
            raise Forbidden("this server already has a steward; sign in instead")
        user = User(name=name, full_name=full_name, role=Role.STEWARD, password_hash=password_hash)
        session.add(user)
        session.flush()
        record_audit(
            session,
            actor=Actor(name=name, kind="user", role=Role.STEWARD, user_id=user.id, via="first run", address=address),
            action="user_added",
            subject=f"user {name}",
            detail="role steward (the server's first account, created from the first-run page)",
        )
        return _open_session(ctx, session, user, address=address)


def _open_session(ctx: ServiceContext, session: Session, user: User, *, address: str) -> SignedIn:
    """A new web session for ``user``; sessions that have expired (anyone's) are cleared out on the way."""
    now = utc_now()
    session.execute(delete(WebSession).where(WebSession.expires_at <= now))
    secret = new_secret()
    row = WebSession(
        user_id=user.id,
        secret_sha256=digest(secret),
        created_at=now,
        expires_at=now + timedelta(hours=ctx.settings.session_hours),
        address=address[:64],
    )
    session.add(row)
    session.flush()
    record_audit(
        session,
        actor=Actor(name=user.name, kind="user", role=Role(user.role), user_id=user.id, via="sign-in form", address=address),
        action=SUCCEEDED,
        subject=user.name,
        detail="",
    )
    return SignedIn(user=user_info(session, user), session_id=row.id, secret=secret, expires_at=row.expires_at)


def _check_limits(ctx: ServiceContext, *, name: str, address: str, now: datetime) -> None:
    """Refuse before checking the password when the account or the address has failed too often lately."""
    rules = limits(ctx)
    since = now - rules.window
    with ctx.reading() as session:
        last_success = session.scalar(
            select(func.max(AuditEntry.at)).where(
                AuditEntry.action == SUCCEEDED, AuditEntry.subject == name, AuditEntry.at >= since
            )
        )
        rows = session.execute(
            select(AuditEntry.at, AuditEntry.subject, AuditEntry.address).where(
                AuditEntry.action == FAILED,
                AuditEntry.at >= since,
                or_(AuditEntry.subject == name, AuditEntry.address == address),
            )
        ).all()
    account = [at for at, subject, _ in rows if subject == name and (last_success is None or at > last_success)]
    from_address = [at for at, _, where in rows if where == address]
    waits = [
        wait_needed(account, limit=rules.per_account, window=rules.window, now=now),
        wait_needed(from_address, limit=rules.per_address, window=rules.window, now=now),
    ]
    longest = max((wait for wait in waits if wait is not None), default=None)
    if longest is not None:
        minutes = max(1, round(longest.total_seconds() / 60))
        raise TooManyAttempts(
            f"too many failed sign-ins for this account or from this address; try again in {minutes} minute"
            f"{'' if minutes == 1 else 's'}, or ask a steward to reset the password",
            retry_after=max(1, int(longest.total_seconds())),
        )
