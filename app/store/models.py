"""Typed SQLAlchemy models of everything a server stores.

A *case* holds dataset versions, claim versions, refits and its history. A
refit's inputs and findings never change once written; its ``review_*``
columns cache the checklist summary (verdict, serious items, reproduction)
that the reviewer's judgements can change, so that the triage overview needs
no findings parsing.

People: *users* (with a role), their *web sessions* and *API tokens*, the
*case access* rows that let referees and readers see a case, journal-club
*session links*, and the append-only *audit entries*. Secrets (sessions,
tokens, links) are stored as SHA-256 digests only; passwords as Argon2id hashes.
"""

from __future__ import annotations

from datetime import UTC, datetime
from typing import Any

from sqlalchemy import (
    JSON,
    BigInteger,
    CheckConstraint,
    DateTime,
    ForeignKey,
    Index,
    Integer,
    MetaData,
    String,
    Text,
    TypeDecorator,
    UniqueConstraint,
)
from sqlalchemy.engine import Dialect
from sqlalchemy.orm import DeclarativeBase, Mapped, mapped_column, relationship

NAMING_CONVENTION = {
    "ix": "ix_%(table_name)s_%(column_0_N_name)s",
    "uq": "uq_%(table_name)s_%(column_0_N_name)s",
    "ck": "ck_%(table_name)s_%(constraint_name)s",
    "fk": "fk_%(table_name)s_%(column_0_name)s_%(referred_table_name)s",
    "pk": "pk_%(table_name)s",
}

REFIT_STATES = ("waiting", "running", "finished", "failed")
"""Life of a refit: queued, computing, done with findings, or stopped with a reason."""

JUDGEMENT_STANDINGS = ("sound", "concern", "serious")

ACCOUNT_ROLES = ("steward", "coordinator", "referee", "reader")
"""Roles of people on a server (see :mod:`app.auth.roles` for what each may do)."""


def utc_now() -> datetime:
    """The current time, timezone-aware in UTC."""
    return datetime.now(UTC)


class UtcDateTime(TypeDecorator[datetime]):
    """A timestamp stored as naive UTC and read back as timezone-aware UTC.

    SQLite keeps no time zone; storing UTC and re-attaching it on read keeps
    comparisons and display consistent on every backend.
    """

    impl = DateTime
    cache_ok = True

    def process_bind_param(self, value: datetime | None, dialect: Dialect) -> datetime | None:
        if value is None:
            return None
        if value.tzinfo is None:
            raise ValueError("timestamps must be timezone-aware")
        return value.astimezone(UTC).replace(tzinfo=None)

    def process_result_value(self, value: datetime | None, dialect: Dialect) -> datetime | None:
        return None if value is None else value.replace(tzinfo=UTC)


def _in(column: str, values: tuple[str, ...]) -> str:
    quoted = ", ".join(f"'{value}'" for value in values)
    return f"{column} IN ({quoted})"


class Base(DeclarativeBase):
    """Declarative base with the constraint naming convention used by the migrations."""

    metadata = MetaData(naming_convention=NAMING_CONVENTION)
    # Ids are never reused after a delete: URLs and cached figures of a deleted case stay dead.
    __table_args__: Any = {"sqlite_autoincrement": True}
    type_annotation_map = {datetime: UtcDateTime, dict[str, Any]: JSON}


class Case(Base):
    """One manuscript under review."""

    __tablename__ = "cases"

    id: Mapped[int] = mapped_column(primary_key=True)
    title: Mapped[str] = mapped_column(String(300))
    reference: Mapped[str] = mapped_column(String(100), default="")
    notes: Mapped[str] = mapped_column(Text, default="")
    created_at: Mapped[datetime] = mapped_column(default=utc_now)
    last_activity: Mapped[datetime] = mapped_column(default=utc_now)
    revision: Mapped[int] = mapped_column(Integer, default=0, server_default="0")
    """Raised by one on every change to anything the case holds (pages cached per revision)."""
    closed_at: Mapped[datetime | None]
    """When the review was closed; closed cases are read-only and purged after the retention period."""

    datasets: Mapped[list[Dataset]] = relationship(
        back_populates="case", cascade="all, delete-orphan", passive_deletes=True, order_by="Dataset.version"
    )
    claims: Mapped[list[Claim]] = relationship(
        back_populates="case",
        cascade="all, delete-orphan",
        passive_deletes=True,
        order_by="(Claim.number, Claim.version)",
    )
    refits: Mapped[list[Refit]] = relationship(
        back_populates="case", cascade="all, delete-orphan", passive_deletes=True, order_by="Refit.id"
    )
    events: Mapped[list[Event]] = relationship(
        back_populates="case", cascade="all, delete-orphan", passive_deletes=True, order_by="Event.id"
    )
    access: Mapped[list[CaseAccess]] = relationship(
        back_populates="case", cascade="all, delete-orphan", passive_deletes=True, order_by="CaseAccess.id"
    )


class Dataset(Base):
    """One uploaded version of a case's replication file; the bytes live in the file store."""

    __tablename__ = "datasets"
    __table_args__ = (UniqueConstraint("case_id", "version"), {"sqlite_autoincrement": True})

    id: Mapped[int] = mapped_column(primary_key=True)
    case_id: Mapped[int] = mapped_column(ForeignKey("cases.id", ondelete="CASCADE"), index=True)
    version: Mapped[int] = mapped_column(Integer)
    sha256: Mapped[str] = mapped_column(String(64), index=True)
    original_name: Mapped[str] = mapped_column(String(255))
    file_format: Mapped[str] = mapped_column(String(20))
    size_bytes: Mapped[int] = mapped_column(BigInteger)
    n_rows: Mapped[int] = mapped_column(BigInteger)
    n_columns: Mapped[int] = mapped_column(Integer)
    profile: Mapped[dict[str, Any]] = mapped_column(deferred=True)
    uploaded_at: Mapped[datetime] = mapped_column(default=utc_now)

    case: Mapped[Case] = relationship(back_populates="datasets")


class Claim(Base):
    """One version of a claim. Editing a claim adds a version with the same ``number``."""

    __tablename__ = "claims"
    __table_args__ = (UniqueConstraint("case_id", "number", "version"), {"sqlite_autoincrement": True})

    id: Mapped[int] = mapped_column(primary_key=True)
    case_id: Mapped[int] = mapped_column(ForeignKey("cases.id", ondelete="CASCADE"), index=True)
    number: Mapped[int] = mapped_column(Integer)
    version: Mapped[int] = mapped_column(Integer)
    title: Mapped[str] = mapped_column(String(300), default="")
    spec: Mapped[dict[str, Any]]
    spec_sha256: Mapped[str] = mapped_column(String(64))
    change_note: Mapped[str] = mapped_column(Text, default="")
    drafted_on_id: Mapped[int | None] = mapped_column(ForeignKey("datasets.id", ondelete="SET NULL"))
    created_at: Mapped[datetime] = mapped_column(default=utc_now)

    case: Mapped[Case] = relationship(back_populates="claims")


class Refit(Base):
    """One computation of a claim version on a dataset version.

    ``findings`` is ``Findings.to_dict()``; ``variants`` holds the claimed
    estimator's standard error under other variance estimators (see
    :func:`app.review.reproduction.covariance_variants`), computed when the
    claim reports a standard error.
    """

    __tablename__ = "refits"
    __table_args__ = (
        CheckConstraint(_in("state", REFIT_STATES), name="state"),
        Index("ix_refits_case_id_state", "case_id", "state"),
        {"sqlite_autoincrement": True},
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    case_id: Mapped[int] = mapped_column(ForeignKey("cases.id", ondelete="CASCADE"))
    claim_id: Mapped[int] = mapped_column(ForeignKey("claims.id", ondelete="CASCADE"), index=True)
    dataset_id: Mapped[int] = mapped_column(ForeignKey("datasets.id", ondelete="CASCADE"), index=True)
    state: Mapped[str] = mapped_column(String(20), default="waiting")
    stage: Mapped[str] = mapped_column(String(200), default="")
    error: Mapped[str | None] = mapped_column(Text)
    created_at: Mapped[datetime] = mapped_column(default=utc_now)
    started_at: Mapped[datetime | None]
    finished_at: Mapped[datetime | None]
    findings: Mapped[dict[str, Any] | None] = mapped_column(deferred=True)
    variants: Mapped[dict[str, Any] | None] = mapped_column(deferred=True)
    schema_version: Mapped[int | None] = mapped_column(Integer)
    dataset_sha256: Mapped[str] = mapped_column(String(64))
    claim_sha256: Mapped[str] = mapped_column(String(64))
    review_verdict: Mapped[str | None] = mapped_column(String(40))
    review_verdict_label: Mapped[str | None] = mapped_column(String(200))
    review_serious: Mapped[int | None] = mapped_column(Integer)
    review_reproduction: Mapped[str | None] = mapped_column(String(40))

    case: Mapped[Case] = relationship(back_populates="refits")
    claim: Mapped[Claim] = relationship()
    dataset: Mapped[Dataset] = relationship()
    judgements: Mapped[list[Judgement]] = relationship(
        back_populates="refit", cascade="all, delete-orphan", passive_deletes=True
    )


class Judgement(Base):
    """The reviewer's own standing and note on one checklist item of one refit."""

    __tablename__ = "judgements"
    __table_args__ = (
        UniqueConstraint("refit_id", "item_id"),
        CheckConstraint(f"standing IS NULL OR {_in('standing', JUDGEMENT_STANDINGS)}", name="standing"),
        {"sqlite_autoincrement": True},
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    refit_id: Mapped[int] = mapped_column(ForeignKey("refits.id", ondelete="CASCADE"))
    item_id: Mapped[str] = mapped_column(String(100))
    standing: Mapped[str | None] = mapped_column(String(20))
    note: Mapped[str] = mapped_column(Text, default="")
    updated_at: Mapped[datetime] = mapped_column(default=utc_now)
    """When it was last saved; a save must name the time it was loaded with (see :mod:`app.services.checklists`)."""
    author: Mapped[str] = mapped_column(String(100), default="", server_default="")
    """Sign-in name of whoever saved it last (empty for judgements saved before authors were kept)."""
    author_user_id: Mapped[int | None] = mapped_column(ForeignKey("users.id", ondelete="SET NULL"))
    """That person's account while it exists."""

    refit: Mapped[Refit] = relationship(back_populates="judgements")


class Event(Base):
    """One line of a case's history (created, file uploaded, claim revised, refit finished...)."""

    __tablename__ = "events"

    id: Mapped[int] = mapped_column(primary_key=True)
    case_id: Mapped[int] = mapped_column(ForeignKey("cases.id", ondelete="CASCADE"), index=True)
    at: Mapped[datetime] = mapped_column(default=utc_now)
    kind: Mapped[str] = mapped_column(String(40))
    message: Mapped[str] = mapped_column(Text)

    case: Mapped[Case] = relationship(back_populates="events")


class User(Base):
    """A person who signs in; ``name`` is what they type, ``password_hash`` an Argon2id hash."""

    __tablename__ = "users"
    __table_args__ = (
        UniqueConstraint("name"),
        CheckConstraint(_in("role", ACCOUNT_ROLES), name="role"),
        {"sqlite_autoincrement": True},
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    name: Mapped[str] = mapped_column(String(60))
    full_name: Mapped[str] = mapped_column(String(200), default="")
    role: Mapped[str] = mapped_column(String(20))
    password_hash: Mapped[str] = mapped_column(String(255))
    created_at: Mapped[datetime] = mapped_column(default=utc_now)
    password_changed_at: Mapped[datetime] = mapped_column(default=utc_now)


class WebSession(Base):
    """One sign-in from one browser; the cookie holds the secret, the row only its digest."""

    __tablename__ = "web_sessions"
    __table_args__ = (UniqueConstraint("secret_sha256"), {"sqlite_autoincrement": True})

    id: Mapped[int] = mapped_column(primary_key=True)
    user_id: Mapped[int] = mapped_column(ForeignKey("users.id", ondelete="CASCADE"), index=True)
    secret_sha256: Mapped[str] = mapped_column(String(64))
    created_at: Mapped[datetime] = mapped_column(default=utc_now)
    expires_at: Mapped[datetime]
    address: Mapped[str] = mapped_column(String(64), default="")


class ApiToken(Base):
    """A secret for scripted use of the JSON API, acting as its user; shown once, stored as a digest."""

    __tablename__ = "api_tokens"
    __table_args__ = (UniqueConstraint("secret_sha256"), {"sqlite_autoincrement": True})

    id: Mapped[int] = mapped_column(primary_key=True)
    user_id: Mapped[int] = mapped_column(ForeignKey("users.id", ondelete="CASCADE"), index=True)
    label: Mapped[str] = mapped_column(String(100))
    hint: Mapped[str] = mapped_column(String(12))
    """The first characters of the token, so that its owner can tell tokens apart."""
    secret_sha256: Mapped[str] = mapped_column(String(64))
    created_at: Mapped[datetime] = mapped_column(default=utc_now)
    expires_at: Mapped[datetime | None]
    last_used_at: Mapped[datetime | None]
    revoked_at: Mapped[datetime | None]


class CaseAccess(Base):
    """A referee assigned to a case, or a reader it is shared with (stewards and coordinators need none)."""

    __tablename__ = "case_access"
    __table_args__ = (UniqueConstraint("case_id", "user_id"), {"sqlite_autoincrement": True})

    id: Mapped[int] = mapped_column(primary_key=True)
    case_id: Mapped[int] = mapped_column(ForeignKey("cases.id", ondelete="CASCADE"))
    user_id: Mapped[int] = mapped_column(ForeignKey("users.id", ondelete="CASCADE"), index=True)
    granted_at: Mapped[datetime] = mapped_column(default=utc_now)
    granted_by: Mapped[str] = mapped_column(String(100))

    case: Mapped[Case] = relationship(back_populates="access")
    user: Mapped[User] = relationship()


class SessionLink(Base):
    """A read-only link to one refit's results and checklist for a journal club; expires, can be withdrawn."""

    __tablename__ = "session_links"
    __table_args__ = (UniqueConstraint("secret_sha256"), {"sqlite_autoincrement": True})

    id: Mapped[int] = mapped_column(primary_key=True)
    case_id: Mapped[int] = mapped_column(ForeignKey("cases.id", ondelete="CASCADE"), index=True)
    refit_id: Mapped[int] = mapped_column(ForeignKey("refits.id", ondelete="CASCADE"), index=True)
    label: Mapped[str] = mapped_column(String(200), default="")
    secret_sha256: Mapped[str] = mapped_column(String(64))
    created_by: Mapped[str] = mapped_column(String(100))
    created_by_id: Mapped[int | None] = mapped_column(ForeignKey("users.id", ondelete="SET NULL"))
    """The account that opened the link (None for the server itself, or once the account is removed)."""
    created_at: Mapped[datetime] = mapped_column(default=utc_now)
    expires_at: Mapped[datetime]
    revoked_at: Mapped[datetime | None]


class AuditEntry(Base):
    """One line of the audit trail: who (``actor``), when (``at``), what (``action``, ``subject``, ``detail``).

    Never changed once written (on SQLite a trigger refuses updates). Entries
    about a case go with the case when it is deleted; the deletion itself is
    recorded without a case id, naming the case and counting what went with it.
    """

    __tablename__ = "audit_entries"
    __table_args__ = (Index("ix_audit_entries_action_at", "action", "at"), {"sqlite_autoincrement": True})

    id: Mapped[int] = mapped_column(primary_key=True)
    at: Mapped[datetime] = mapped_column(default=utc_now)
    actor: Mapped[str] = mapped_column(String(100))
    actor_kind: Mapped[str] = mapped_column(String(20))
    actor_user_id: Mapped[int | None] = mapped_column(Integer)
    """The acting user's id when it was written (kept as a number: the user may since be removed)."""
    address: Mapped[str] = mapped_column(String(64), default="")
    action: Mapped[str] = mapped_column(String(40))
    case_id: Mapped[int | None] = mapped_column(ForeignKey("cases.id", ondelete="CASCADE"), index=True)
    subject: Mapped[str] = mapped_column(String(300), default="")
    detail: Mapped[str] = mapped_column(Text, default="")
