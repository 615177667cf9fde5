"""API tokens: secrets for scripted use of the JSON API, each acting as the person who created it.

A token is shown once when created and stored only as its SHA-256 digest with
its first characters (to tell tokens apart). It can expire and can be revoked
by its owner at any time; removing the account removes its tokens. A request
with ``Authorization: Bearer <token>`` acts as the token's owner with the
owner's current role and access.
"""

from __future__ import annotations

from datetime import datetime, timedelta

from sqlalchemy import bindparam, select, update

from app.auth.actors import Actor
from app.auth.keys import TOKEN_PREFIX, digest, new_api_token
from app.auth.roles import Role
from app.services.context import ServiceContext
from app.services.errors import Forbidden, InvalidInput, NotFound, Problem
from app.services.records import record_audit
from app.services.views import TokenCreated, TokenInfo
from app.store.models import ApiToken, User, utc_now

MAX_LABEL_LENGTH = 100
MAX_DAYS = 366
HINT_LENGTH = len(TOKEN_PREFIX) + 6
LAST_USED_RESOLUTION = timedelta(minutes=5)
TOKEN_OWNER = (
    select(ApiToken.id, ApiToken.last_used_at, User.id, User.name, User.role)
    .join(User, User.id == ApiToken.user_id)
    .where(
        ApiToken.secret_sha256 == bindparam("digest"),
        ApiToken.revoked_at.is_(None),
        (ApiToken.expires_at.is_(None)) | (ApiToken.expires_at > bindparam("now")),
    )
)
"""The person behind a live token; built once, since it runs before every API call."""
"""``last_used_at`` is written at most this often, so API calls do not all write to the database."""


def token_state(row: ApiToken, *, now: datetime | None = None) -> str:
    """``revoked``, ``expired`` or ``active``."""
    if row.revoked_at is not None:
        return "revoked"
    if row.expires_at is not None and row.expires_at <= (now or utc_now()):
        return "expired"
    return "active"


def token_info(row: ApiToken) -> TokenInfo:
    return TokenInfo(
        id=row.id,
        label=row.label,
        hint=row.hint,
        created_at=row.created_at,
        expires_at=row.expires_at,
        last_used_at=row.last_used_at,
        revoked_at=row.revoked_at,
        state=token_state(row),
    )


def create_token(ctx: ServiceContext, *, label: str, days: int | None) -> TokenCreated:
    """A new token for the signed-in person, valid for ``days`` (None: until revoked)."""
    user_id = _own_id(ctx)
    label = label.strip()
    problems = []
    if not 1 <= len(label) <= MAX_LABEL_LENGTH:
        message = f"label: say what the token is for, in 1 to {MAX_LABEL_LENGTH} characters"
        problems.append(Problem(field="label", message=message))
    if days is not None and not 1 <= days <= MAX_DAYS:
        message = f"days: from 1 to {MAX_DAYS}, or none for a token that lasts until revoked"
        problems.append(Problem(field="days", message=message))
    if problems:
        raise InvalidInput(problems)
    secret = new_api_token()
    now = utc_now()
    with ctx.transaction() as session:
        row = ApiToken(
            user_id=user_id,
            label=label,
            hint=secret[:HINT_LENGTH],
            secret_sha256=digest(secret),
            created_at=now,
            expires_at=now + timedelta(days=days) if days is not None else None,
        )
        session.add(row)
        session.flush()
        record_audit(session, actor=ctx.actor, action="token_created", subject=f"token {row.id}", detail=label)
        return TokenCreated(token=token_info(row), secret=secret)


def revoke_token(ctx: ServiceContext, *, token_id: int) -> TokenInfo:
    """Revoke one of the signed-in person's tokens (revoking it again changes nothing)."""
    user_id = _own_id(ctx)
    with ctx.transaction() as session:
        row = session.get(ApiToken, token_id)
        if row is None or row.user_id != user_id:
            raise NotFound(f"you have no token {token_id}")
        if row.revoked_at is None:
            row.revoked_at = utc_now()
            record_audit(session, actor=ctx.actor, action="token_revoked", subject=f"token {row.id}", detail=row.label)
        return token_info(row)


def actor_for_token(ctx: ServiceContext, *, secret: str, address: str) -> Actor | None:
    """The person a valid token acts for, or None for a token that is unknown, expired or revoked."""
    if not secret.startswith(TOKEN_PREFIX):
        return None
    now = utc_now()
    with ctx.database.engine.connect() as connection:
        found = connection.execute(TOKEN_OWNER, {"digest": digest(secret), "now": now}).first()
        if found is None:
            return None
        token_id, last_used, user_id, name, role = found
        if last_used is None or now - last_used > LAST_USED_RESOLUTION:
            connection.execute(update(ApiToken).where(ApiToken.id == token_id).values(last_used_at=now))
            connection.commit()
    return Actor(name=name, kind="user", role=Role(role), user_id=user_id, via="API token", address=address)


def _own_id(ctx: ServiceContext) -> int:
    if ctx.actor.user_id is None:
        raise Forbidden("API tokens belong to a signed-in person")
    return ctx.actor.user_id
