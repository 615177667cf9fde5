"""Initial schema: cases, datasets, claims, refits, judgements, events.

Revision ID: 0001
Revises:
Created: 2026-12-01
"""

from __future__ import annotations

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op

revision: str = "0001"
down_revision: str | None = None
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def upgrade() -> None:
    op.create_table(
        "cases",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("title", sa.String(length=300), nullable=False),
        sa.Column("reference", sa.String(length=100), nullable=False),
        sa.Column("notes", sa.Text(), nullable=False),
        sa.Column("created_at", sa.DateTime(), nullable=False),
        sa.Column("last_activity", sa.DateTime(), nullable=False),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_cases")),
        sqlite_autoincrement=True,
    )
    op.create_table(
        "datasets",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("case_id", sa.Integer(), nullable=False),
        sa.Column("version", sa.Integer(), nullable=False),
        sa.Column("sha256", sa.String(length=64), nullable=False),
        sa.Column("original_name", sa.String(length=255), nullable=False),
        sa.Column("file_format", sa.String(length=20), nullable=False),
        sa.Column("size_bytes", sa.BigInteger(), nullable=False),
        sa.Column("n_rows", sa.BigInteger(), nullable=False),
        sa.Column("n_columns", sa.Integer(), nullable=False),
        sa.Column("profile", sa.JSON(), nullable=False),
        sa.Column("uploaded_at", sa.DateTime(), nullable=False),
        sa.ForeignKeyConstraint(
            ["case_id"], ["cases.id"], name=op.f("fk_datasets_case_id_cases"), ondelete="CASCADE"
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_datasets")),
        sa.UniqueConstraint("case_id", "version", name=op.f("uq_datasets_case_id_version")),
        sqlite_autoincrement=True,
    )
    with op.batch_alter_table("datasets") as batch:
        batch.create_index(batch.f("ix_datasets_case_id"), ["case_id"])
        batch.create_index(batch.f("ix_datasets_sha256"), ["sha256"])

    op.create_table(
        "events",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("case_id", sa.Integer(), nullable=False),
        sa.Column("at", sa.DateTime(), nullable=False),
        sa.Column("kind", sa.String(length=40), nullable=False),
        sa.Column("message", sa.Text(), nullable=False),
        sa.ForeignKeyConstraint(["case_id"], ["cases.id"], name=op.f("fk_events_case_id_cases"), ondelete="CASCADE"),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_events")),
        sqlite_autoincrement=True,
    )
    with op.batch_alter_table("events") as batch:
        batch.create_index(batch.f("ix_events_case_id"), ["case_id"])

    op.create_table(
        "claims",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("case_id", sa.Integer(), nullable=False),
        sa.Column("number", sa.Integer(), nullable=False),
        sa.Column("version", sa.Integer(), nullable=False),
        sa.Column("title", sa.String(length=300), nullable=False),
        sa.Column("spec", sa.JSON(), nullable=False),
        sa.Column("spec_sha256", sa.String(length=64), nullable=False),
        sa.Column("change_note", sa.Text(), nullable=False),
        sa.Column("drafted_on_id", sa.Integer(), nullable=True),
        sa.Column("created_at", sa.DateTime(), nullable=False),
        sa.ForeignKeyConstraint(["case_id"], ["cases.id"], name=op.f("fk_claims_case_id_cases"), ondelete="CASCADE"),
        sa.ForeignKeyConstraint(
            ["drafted_on_id"], ["datasets.id"], name=op.f("fk_claims_drafted_on_id_datasets"), ondelete="SET NULL"
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_claims")),
        sa.UniqueConstraint("case_id", "number", "version", name=op.f("uq_claims_case_id_number_version")),
        sqlite_autoincrement=True,
    )
    with op.batch_alter_table("claims") as batch:
        batch.create_index(batch.f("ix_claims_case_id"), ["case_id"])

    op.create_table(
        "refits",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("case_id", sa.Integer(), nullable=False),
        sa.Column("claim_id", sa.Integer(), nullable=False),
        sa.Column("dataset_id", sa.Integer(), nullable=False),
        sa.Column("state", sa.String(length=20), nullable=False),
        sa.Column("stage", sa.String(length=200), nullable=False),
        sa.Column("error", sa.Text(), nullable=True),
        sa.Column("created_at", sa.DateTime(), nullable=False),
        sa.Column("started_at", sa.DateTime(), nullable=True),
        sa.Column("finished_at", sa.DateTime(), nullable=True),
        sa.Column("findings", sa.JSON(), nullable=True),
        sa.Column("variants", sa.JSON(), nullable=True),
        sa.Column("schema_version", sa.Integer(), nullable=True),
        sa.Column("dataset_sha256", sa.String(length=64), nullable=False),
        sa.Column("claim_sha256", sa.String(length=64), nullable=False),
        sa.Column("review_verdict", sa.String(length=40), nullable=True),
        sa.Column("review_verdict_label", sa.String(length=200), nullable=True),
        sa.Column("review_serious", sa.Integer(), nullable=True),
        sa.Column("review_reproduction", sa.String(length=40), nullable=True),
        sa.CheckConstraint(
            "state IN ('waiting', 'running', 'finished', 'failed')", name=op.f("ck_refits_state")
        ),
        sa.ForeignKeyConstraint(["case_id"], ["cases.id"], name=op.f("fk_refits_case_id_cases"), ondelete="CASCADE"),
        sa.ForeignKeyConstraint(
            ["claim_id"], ["claims.id"], name=op.f("fk_refits_claim_id_claims"), ondelete="CASCADE"
        ),
        sa.ForeignKeyConstraint(
            ["dataset_id"], ["datasets.id"], name=op.f("fk_refits_dataset_id_datasets"), ondelete="CASCADE"
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_refits")),
        sqlite_autoincrement=True,
    )
    with op.batch_alter_table("refits") as batch:
        batch.create_index("ix_refits_case_id_state", ["case_id", "state"])
        batch.create_index(batch.f("ix_refits_claim_id"), ["claim_id"])
        batch.create_index(batch.f("ix_refits_dataset_id"), ["dataset_id"])

    op.create_table(
        "judgements",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("refit_id", sa.Integer(), nullable=False),
        sa.Column("item_id", sa.String(length=100), nullable=False),
        sa.Column("standing", sa.String(length=20), nullable=True),
        sa.Column("note", sa.Text(), nullable=False),
        sa.Column("updated_at", sa.DateTime(), nullable=False),
        sa.CheckConstraint(
            "standing IS NULL OR standing IN ('sound', 'concern', 'serious')", name=op.f("ck_judgements_standing")
        ),
        sa.ForeignKeyConstraint(
            ["refit_id"], ["refits.id"], name=op.f("fk_judgements_refit_id_refits"), ondelete="CASCADE"
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_judgements")),
        sa.UniqueConstraint("refit_id", "item_id", name=op.f("uq_judgements_refit_id_item_id")),
        sqlite_autoincrement=True,
    )


def downgrade() -> None:
    op.drop_table("judgements")
    with op.batch_alter_table("refits") as batch:
        batch.drop_index(batch.f("ix_refits_dataset_id"))
        batch.drop_index(batch.f("ix_refits_claim_id"))
        batch.drop_index("ix_refits_case_id_state")
    op.drop_table("refits")
    with op.batch_alter_table("claims") as batch:
        batch.drop_index(batch.f("ix_claims_case_id"))
    op.drop_table("claims")
    with op.batch_alter_table("events") as batch:
        batch.drop_index(batch.f("ix_events_case_id"))
    op.drop_table("events")
    with op.batch_alter_table("datasets") as batch:
        batch.drop_index(batch.f("ix_datasets_sha256"))
        batch.drop_index(batch.f("ix_datasets_case_id"))
    op.drop_table("datasets")
    op.drop_table("cases")
