"""The database connection: WAL mode, enforced foreign keys, UTC timestamps, no NaN in JSON."""

from __future__ import annotations

import math
from datetime import UTC, datetime, timedelta, timezone

import pytest
from sqlalchemy import select
from sqlalchemy.exc import IntegrityError, StatementError

from app.store.database import Database
from app.store.models import NAMING_CONVENTION, Base, Case, Dataset


def test_sqlite_runs_in_wal_mode_with_foreign_keys(migrated: Database) -> None:
    with migrated.engine.connect() as connection:
        assert connection.exec_driver_sql("PRAGMA journal_mode").scalar() == "wal"
        assert connection.exec_driver_sql("PRAGMA foreign_keys").scalar() == 1


def test_a_dataset_needs_an_existing_case(migrated: Database) -> None:
    with pytest.raises(IntegrityError), migrated.transaction() as session:
        session.add(
            Dataset(
                case_id=999,
                version=1,
                sha256="0" * 64,
                original_name="x.csv",
                file_format="csv",
                size_bytes=1,
                n_rows=1,
                n_columns=1,
                profile={},
            )
        )


def test_timestamps_come_back_in_utc(migrated: Database) -> None:
    moment = datetime(2026, 3, 1, 9, 30, tzinfo=timezone(timedelta(hours=2)))
    with migrated.transaction() as session:
        session.add(Case(title="t", created_at=moment, last_activity=moment))
    with migrated.reading() as session:
        case = session.scalars(select(Case)).one()
    assert case.created_at == moment
    assert case.created_at.tzinfo == UTC


def test_naive_timestamps_are_refused(migrated: Database) -> None:
    with pytest.raises(StatementError), migrated.transaction() as session:
        session.add(Case(title="t", created_at=datetime(2026, 1, 1), last_activity=datetime(2026, 1, 1)))


def test_nan_never_reaches_a_json_column(migrated: Database) -> None:
    with pytest.raises(StatementError), migrated.transaction() as session:
        case = Case(title="t")
        session.add(case)
        session.flush()
        session.add(
            Dataset(
                case_id=case.id,
                version=1,
                sha256="0" * 64,
                original_name="x.csv",
                file_format="csv",
                size_bytes=1,
                n_rows=1,
                n_columns=1,
                profile={"mean": math.nan},
            )
        )
    with migrated.reading() as session:
        assert session.scalars(select(Case)).all() == []


def test_every_constraint_is_named_by_the_convention() -> None:
    prefixes = {kind: pattern.split("%")[0] for kind, pattern in NAMING_CONVENTION.items()}
    for table in Base.metadata.tables.values():
        for constraint in table.constraints:
            kind = type(constraint).__name__
            expected = {
                "PrimaryKeyConstraint": prefixes["pk"],
                "ForeignKeyConstraint": prefixes["fk"],
                "UniqueConstraint": prefixes["uq"],
                "CheckConstraint": prefixes["ck"],
            }[kind]
            assert str(constraint.name).startswith(expected), (table.name, constraint.name)
        for index in table.indexes:
            assert str(index.name).startswith(prefixes["ix"]), (table.name, index.name)
