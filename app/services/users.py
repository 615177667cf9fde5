"""Accounts: adding, listing, removing people, their roles and passwords.

Stewards manage accounts (and the command line, which acts as the server).
Sign-in names are lower-case letters, digits and ``. _ - @``; passwords follow
:func:`app.auth.passwords.password_problems` and are kept as Argon2id hashes.
Resetting a password or removing an account ends that person's sign-ins at
once. The last steward can be neither removed nor given another role, so the
server always has someone who can manage it.
"""

from __future__ import annotations

import re

from sqlalchemy import func, select
from sqlalchemy.orm import Session

from app.auth.passwords import password_problems
from app.auth.roles import ROLE_DESCRIPTIONS, ROLE_LABELS, Role, ServerAction
from app.services.context import ServiceContext
from app.services.errors import Forbidden, InvalidInput, NotFound, Problem
from app.services.records import record_audit, require_on_server
from app.services.tokens import token_info
from app.services.views import AccountView, RoleInfo, UserInfo, UserList
from app.store.models import ApiToken, User, WebSession, utc_now

NAME_PATTERN = re.compile(r"[a-z0-9][a-z0-9._@-]{1,59}")
MAX_FULL_NAME = 200


def normalise_name(name: str) -> str:
    """A sign-in name as stored and compared: trimmed and lower-case."""
    return name.strip().lower()


def name_problems(name: str) -> list[Problem]:
    """What is wrong with a new sign-in name (already normalised)."""
    if NAME_PATTERN.fullmatch(name):
        return []
    return [
        Problem(
            field="name",
            message="name: 2 to 60 characters, letters, digits and . _ - @ only, starting with a letter or digit",
        )
    ]


def password_field_problems(password: str, *, name: str, field: str = "password") -> list[Problem]:
    """The password rules as field problems."""
    return [Problem(field=field, message=f"{field}: {message}") for message in password_problems(password, name=name)]


def checked_new_account(*, name: str, full_name: str, password: str, role: str | None = None) -> tuple[str, str]:
    """A new account's sign-in name and full name as stored; :class:`InvalidInput` lists every problem.

    The name, the role (when one is chosen) and the password are checked
    against their rules, and the full name against its length.
    """
    problems = new_account_problems(name=name, full_name=full_name, password=password, role=role)
    if problems:
        raise InvalidInput(problems)
    return normalise_name(name), full_name.strip()


def new_account_problems(*, name: str, full_name: str, password: str, role: str | None = None) -> list[Problem]:
    """Every problem with a new account's fields at once (see :func:`checked_new_account`)."""
    name = normalise_name(name)
    problems = name_problems(name)
    if role is not None:
        problems += _role_problems(role)
    problems += password_field_problems(password, name=name)
    if len(full_name.strip()) > MAX_FULL_NAME:
        problems.append(Problem(field="full_name", message=f"full_name: at most {MAX_FULL_NAME} characters"))
    return problems


def user_info(session: Session, user: User) -> UserInfo:
    """An account with its open sign-ins and active tokens counted."""
    now = utc_now()
    sessions = session.scalar(
        select(func.count()).select_from(WebSession).where(WebSession.user_id == user.id, WebSession.expires_at > now)
    )
    tokens = session.scalar(
        select(func.count())
        .select_from(ApiToken)
        .where(
            ApiToken.user_id == user.id,
            ApiToken.revoked_at.is_(None),
            (ApiToken.expires_at.is_(None)) | (ApiToken.expires_at > now),
        )
    )
    return UserInfo(
        id=user.id,
        name=user.name,
        full_name=user.full_name,
        role=user.role,
        created_at=user.created_at,
        password_changed_at=user.password_changed_at,
        open_sessions=sessions or 0,
        active_tokens=tokens or 0,
    )


def add_user(ctx: ServiceContext, *, name: str, role: str, password: str, full_name: str = "") -> UserInfo:
    """Create an account."""
    require_on_server(ctx.actor, ServerAction.MANAGE_ACCOUNTS)
    problems = new_account_problems(name=name, full_name=full_name, password=password, role=role)
    name, full_name = normalise_name(name), full_name.strip()
    with ctx.reading() as session:
        taken = session.scalar(select(User.id).where(User.name == name)) is not None
    if taken:
        problems.insert(0, _name_taken(name))
    if problems:
        raise InvalidInput(problems)
    password_hash = ctx.hasher.hash(password)
    with ctx.transaction() as session:
        if session.scalar(select(User.id).where(User.name == name)) is not None:
            raise InvalidInput([_name_taken(name)])
        user = User(name=name, full_name=full_name, role=role, password_hash=password_hash)
        session.add(user)
        session.flush()
        record_audit(session, actor=ctx.actor, action="user_added", subject=f"user {name}", detail=f"role {role}")
        return user_info(session, user)


def user_id_of(ctx: ServiceContext, *, name: str) -> int:
    """The id of the account with this sign-in name (for the command line)."""
    require_on_server(ctx.actor, ServerAction.MANAGE_ACCOUNTS)
    with ctx.reading() as session:
        user_id = session.scalar(select(User.id).where(User.name == normalise_name(name)))
    if user_id is None:
        raise NotFound(f"there is no account named '{normalise_name(name)}'")
    return user_id


def list_users(ctx: ServiceContext) -> UserList:
    """Every account, by name, and the roles."""
    require_on_server(ctx.actor, ServerAction.MANAGE_ACCOUNTS)
    with ctx.reading() as session:
        users = session.scalars(select(User).order_by(User.name)).all()
        return UserList(
            users=[user_info(session, user) for user in users],
            roles=[RoleInfo(code=role, label=ROLE_LABELS[role], description=ROLE_DESCRIPTIONS[role]) for role in Role],
        )


def remove_user(ctx: ServiceContext, *, user_id: int) -> UserInfo:
    """Remove an account with its sign-ins, tokens and case access; its audit entries keep its name."""
    require_on_server(ctx.actor, ServerAction.MANAGE_ACCOUNTS)
    if user_id == ctx.actor.user_id:
        raise Forbidden("you cannot remove your own account; another steward can")
    with ctx.transaction() as session:
        user = _load(session, user_id)
        _keep_a_steward(session, user, new_role=None)
        info = user_info(session, user)
        session.delete(user)
        record_audit(
            session, actor=ctx.actor, action="user_removed", subject=f"user {user.name}", detail=f"role {user.role}"
        )
    return info


def set_role(ctx: ServiceContext, *, user_id: int, role: str) -> UserInfo:
    """Give an account another role (takes effect on that person's next request)."""
    require_on_server(ctx.actor, ServerAction.MANAGE_ACCOUNTS)
    if problems := _role_problems(role):
        raise InvalidInput(problems)
    with ctx.transaction() as session:
        user = _load(session, user_id)
        if user.role != role:
            _keep_a_steward(session, user, new_role=role)
            record_audit(
                session, actor=ctx.actor, action="role_changed", subject=f"user {user.name}", detail=f"{user.role} to {role}"
            )
            user.role = role
        return user_info(session, user)


def reset_password(ctx: ServiceContext, *, user_id: int, password: str) -> UserInfo:
    """Set a new password for someone; their sign-ins end (API tokens stay)."""
    require_on_server(ctx.actor, ServerAction.MANAGE_ACCOUNTS)
    with ctx.reading() as session:
        name = _load(session, user_id).name
    if problems := password_field_problems(password, name=name):
        raise InvalidInput(problems)
    password_hash = ctx.hasher.hash(password)
    with ctx.transaction() as session:
        user = _load(session, user_id)
        _set_password(session, user, password_hash)
        record_audit(
            session, actor=ctx.actor, action="password_reset", subject=f"user {user.name}", detail="sign-ins ended"
        )
        return user_info(session, user)


def change_own_password(ctx: ServiceContext, *, current: str, new: str) -> UserInfo:
    """The signed-in person changes their password; their other sign-ins end, this one stays."""
    user_id = _own_id(ctx)
    with ctx.reading() as session:
        user = _load(session, user_id)
        stored, name = user.password_hash, user.name
    if not ctx.hasher.verify(stored, current):
        raise InvalidInput([Problem(field="current", message="current password: this is not your current password")])
    if problems := password_field_problems(new, name=name, field="new password"):
        raise InvalidInput(problems)
    password_hash = ctx.hasher.hash(new)
    with ctx.transaction() as session:
        user = _load(session, user_id)
        _set_password(session, user, password_hash, keep_session=ctx.actor.session_id)
        record_audit(
            session, actor=ctx.actor, action="password_changed", subject=f"user {user.name}", detail="other sign-ins ended"
        )
        return user_info(session, user)


def account(ctx: ServiceContext) -> AccountView:
    """The signed-in person's account and API tokens."""
    user_id = _own_id(ctx)
    with ctx.reading() as session:
        user = _load(session, user_id)
        tokens = session.scalars(
            select(ApiToken).where(ApiToken.user_id == user_id).order_by(ApiToken.id.desc())
        ).all()
        return AccountView(
            user=user_info(session, user),
            role_description=ROLE_DESCRIPTIONS[Role(user.role)],
            tokens=[token_info(token) for token in tokens],
        )


def _own_id(ctx: ServiceContext) -> int:
    if ctx.actor.user_id is None:
        raise Forbidden("only a signed-in person has an account page")
    return ctx.actor.user_id


def _load(session: Session, user_id: int) -> User:
    user = session.get(User, user_id)
    if user is None:
        raise NotFound(f"there is no account {user_id}")
    return user


def _name_taken(name: str) -> Problem:
    return Problem(field="name", message=f"name: there is already an account named '{name}'")


def _role_problems(role: str) -> list[Problem]:
    if role in set(Role):
        return []
    return [Problem(field="role", message=f"role: one of {', '.join(Role)}")]


def _keep_a_steward(session: Session, user: User, *, new_role: str | None) -> None:
    """Refuse to remove (``new_role`` None) or demote the last steward."""
    if user.role != Role.STEWARD or new_role == Role.STEWARD:
        return
    stewards = session.scalar(select(func.count()).select_from(User).where(User.role == Role.STEWARD))
    if stewards == 1:
        raise Forbidden(f"'{user.name}' is the only steward; make someone else a steward first")


def _set_password(session: Session, user: User, password_hash: str, *, keep_session: int | None = None) -> None:
    user.password_hash = password_hash
    user.password_changed_at = utc_now()
    for row in session.scalars(select(WebSession).where(WebSession.user_id == user.id)).all():
        if row.id != keep_session:
            session.delete(row)
