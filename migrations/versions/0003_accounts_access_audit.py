"""Accounts, per-case access, session links and the audit trail; cases can be closed.

Adds ``users``, ``web_sessions``, ``api_tokens``, ``case_access``,
``session_links``, ``audit_entries`` and ``cases.closed_at``. On SQLite a
trigger makes ``audit_entries`` append-only (any UPDATE is aborted); rows still
go when their case is deleted.

Revision ID: 0003
Revises: 0002
Created: 2026-12-03
"""

from __future__ import annotations

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op

revision: str = "0003"
down_revision: str | None = "0002"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None

APPEND_ONLY_TRIGGER = """
CREATE TRIGGER audit_entries_append_only BEFORE UPDATE ON audit_entries
BEGIN
    SELECT RAISE(ABORT, 'the audit trail cannot be changed');
END
"""


def upgrade() -> None:
    with op.batch_alter_table("cases") as batch:
        batch.add_column(sa.Column("closed_at", sa.DateTime(), nullable=True))

    op.create_table(
        "users",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("name", sa.String(length=60), nullable=False),
        sa.Column("full_name", sa.String(length=200), nullable=False),
        sa.Column("role", sa.String(length=20), nullable=False),
        sa.Column("password_hash", sa.String(length=255), nullable=False),
        sa.Column("created_at", sa.DateTime(), nullable=False),
        sa.Column("password_changed_at", sa.DateTime(), nullable=False),
        sa.CheckConstraint(
            "role IN ('steward', 'coordinator', 'referee', 'reader')", name=op.f("ck_users_role")
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_users")),
        sa.UniqueConstraint("name", name=op.f("uq_users_name")),
        sqlite_autoincrement=True,
    )

    op.create_table(
        "web_sessions",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("user_id", sa.Integer(), nullable=False),
        sa.Column("secret_sha256", sa.String(length=64), nullable=False),
        sa.Column("created_at", sa.DateTime(), nullable=False),
        sa.Column("expires_at", sa.DateTime(), nullable=False),
        sa.Column("address", sa.String(length=64), nullable=False),
        sa.ForeignKeyConstraint(
            ["user_id"], ["users.id"], name=op.f("fk_web_sessions_user_id_users"), ondelete="CASCADE"
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_web_sessions")),
        sa.UniqueConstraint("secret_sha256", name=op.f("uq_web_sessions_secret_sha256")),
        sqlite_autoincrement=True,
    )
    with op.batch_alter_table("web_sessions") as batch:
        batch.create_index(batch.f("ix_web_sessions_user_id"), ["user_id"])

    op.create_table(
        "api_tokens",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("user_id", sa.Integer(), nullable=False),
        sa.Column("label", sa.String(length=100), nullable=False),
        sa.Column("hint", sa.String(length=12), nullable=False),
        sa.Column("secret_sha256", sa.String(length=64), nullable=False),
        sa.Column("created_at", sa.DateTime(), nullable=False),
        sa.Column("expires_at", sa.DateTime(), nullable=True),
        sa.Column("last_used_at", sa.DateTime(), nullable=True),
        sa.Column("revoked_at", sa.DateTime(), nullable=True),
        sa.ForeignKeyConstraint(
            ["user_id"], ["users.id"], name=op.f("fk_api_tokens_user_id_users"), ondelete="CASCADE"
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_api_tokens")),
        sa.UniqueConstraint("secret_sha256", name=op.f("uq_api_tokens_secret_sha256")),
        sqlite_autoincrement=True,
    )
    with op.batch_alter_table("api_tokens") as batch:
        batch.create_index(batch.f("ix_api_tokens_user_id"), ["user_id"])

    op.create_table(
        "case_access",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("case_id", sa.Integer(), nullable=False),
        sa.Column("user_id", sa.Integer(), nullable=False),
        sa.Column("granted_at", sa.DateTime(), nullable=False),
        sa.Column("granted_by", sa.String(length=100), nullable=False),
        sa.ForeignKeyConstraint(
            ["case_id"], ["cases.id"], name=op.f("fk_case_access_case_id_cases"), ondelete="CASCADE"
        ),
        sa.ForeignKeyConstraint(
            ["user_id"], ["users.id"], name=op.f("fk_case_access_user_id_users"), ondelete="CASCADE"
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_case_access")),
        sa.UniqueConstraint("case_id", "user_id", name=op.f("uq_case_access_case_id_user_id")),
        sqlite_autoincrement=True,
    )
    with op.batch_alter_table("case_access") as batch:
        batch.create_index(batch.f("ix_case_access_user_id"), ["user_id"])

    op.create_table(
        "session_links",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("case_id", sa.Integer(), nullable=False),
        sa.Column("refit_id", sa.Integer(), nullable=False),
        sa.Column("label", sa.String(length=200), nullable=False),
        sa.Column("secret_sha256", sa.String(length=64), nullable=False),
        sa.Column("created_by", sa.String(length=100), nullable=False),
        sa.Column("created_by_id", sa.Integer(), nullable=True),
        sa.Column("created_at", sa.DateTime(), nullable=False),
        sa.Column("expires_at", sa.DateTime(), nullable=False),
        sa.Column("revoked_at", sa.DateTime(), nullable=True),
        sa.ForeignKeyConstraint(
            ["case_id"], ["cases.id"], name=op.f("fk_session_links_case_id_cases"), ondelete="CASCADE"
        ),
        sa.ForeignKeyConstraint(
            ["created_by_id"], ["users.id"], name=op.f("fk_session_links_created_by_id_users"), ondelete="SET NULL"
        ),
        sa.ForeignKeyConstraint(
            ["refit_id"], ["refits.id"], name=op.f("fk_session_links_refit_id_refits"), ondelete="CASCADE"
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_session_links")),
        sa.UniqueConstraint("secret_sha256", name=op.f("uq_session_links_secret_sha256")),
        sqlite_autoincrement=True,
    )
    with op.batch_alter_table("session_links") as batch:
        batch.create_index(batch.f("ix_session_links_case_id"), ["case_id"])
        batch.create_index(batch.f("ix_session_links_refit_id"), ["refit_id"])

    op.create_table(
        "audit_entries",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("at", sa.DateTime(), nullable=False),
        sa.Column("actor", sa.String(length=100), nullable=False),
        sa.Column("actor_kind", sa.String(length=20), nullable=False),
        sa.Column("actor_user_id", sa.Integer(), nullable=True),
        sa.Column("address", sa.String(length=64), nullable=False),
        sa.Column("action", sa.String(length=40), nullable=False),
        sa.Column("case_id", sa.Integer(), nullable=True),
        sa.Column("subject", sa.String(length=300), nullable=False),
        sa.Column("detail", sa.Text(), nullable=False),
        sa.ForeignKeyConstraint(
            ["case_id"], ["cases.id"], name=op.f("fk_audit_entries_case_id_cases"), ondelete="CASCADE"
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_audit_entries")),
        sqlite_autoincrement=True,
    )
    with op.batch_alter_table("audit_entries") as batch:
        batch.create_index("ix_audit_entries_action_at", ["action", "at"])
        batch.create_index(batch.f("ix_audit_entries_case_id"), ["case_id"])
    if op.get_bind().dialect.name == "sqlite":
        op.execute(APPEND_ONLY_TRIGGER)


def downgrade() -> None:
    if op.get_bind().dialect.name == "sqlite":
        op.execute("DROP TRIGGER IF EXISTS audit_entries_append_only")
    with op.batch_alter_table("audit_entries") as batch:
        batch.drop_index(batch.f("ix_audit_entries_case_id"))
        batch.drop_index("ix_audit_entries_action_at")
    op.drop_table("audit_entries")
    with op.batch_alter_table("session_links") as batch:
        batch.drop_index(batch.f("ix_session_links_refit_id"))
        batch.drop_index(batch.f("ix_session_links_case_id"))
    op.drop_table("session_links")
    with op.batch_alter_table("case_access") as batch:
        batch.drop_index(batch.f("ix_case_access_user_id"))
    op.drop_table("case_access")
    with op.batch_alter_table("api_tokens") as batch:
        batch.drop_index(batch.f("ix_api_tokens_user_id"))
    op.drop_table("api_tokens")
    with op.batch_alter_table("web_sessions") as batch:
        batch.drop_index(batch.f("ix_web_sessions_user_id"))
    op.drop_table("web_sessions")
    op.drop_table("users")
    with op.batch_alter_table("cases") as batch:
        batch.drop_column("closed_at")
