"""Judgements name their author: ``judgements.author`` and ``judgements.author_user_id``.

The author is the sign-in name of the person who last saved the judgement (kept
as text, so it survives the account's removal); ``author_user_id`` points at the
account while it exists. Judgements saved before this revision have an empty
author.

Revision ID: 0004
Revises: 0003
Created: 2026-12-05
"""

from __future__ import annotations

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op

revision: str = "0004"
down_revision: str | None = "0003"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def upgrade() -> None:
    with op.batch_alter_table("judgements", table_kwargs={"sqlite_autoincrement": True}) as batch:
        batch.add_column(sa.Column("author", sa.String(length=100), server_default="", nullable=False))
        batch.add_column(sa.Column("author_user_id", sa.Integer(), nullable=True))
        batch.create_foreign_key(
            op.f("fk_judgements_author_user_id_users"), "users", ["author_user_id"], ["id"], ondelete="SET NULL"
        )


def downgrade() -> None:
    with op.batch_alter_table("judgements", table_kwargs={"sqlite_autoincrement": True}) as batch:
        batch.drop_constraint(op.f("fk_judgements_author_user_id_users"), type_="foreignkey")
        batch.drop_column("author_user_id")
        batch.drop_column("author")
