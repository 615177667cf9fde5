"""Migrations: an empty database upgrades to head, matches the models, and survives a round trip."""

from __future__ import annotations

from pathlib import Path

import pytest
from alembic.autogenerate import compare_metadata
from alembic.runtime.migration import MigrationContext
from sqlalchemy import inspect
from sqlalchemy.exc import DatabaseError

from app.cli.main import main
from app.store import migrate
from app.store.database import Database
from app.store.models import Base


def schema_differences(database: Database) -> list[object]:
    with database.engine.connect() as connection:
        context = MigrationContext.configure(connection, opts={"compare_type": True})
        return list(compare_metadata(context, Base.metadata))


def test_an_empty_database_upgrades_to_head(database: Database) -> None:
    assert migrate.current_revision(database) is None
    migrate.upgrade(database)
    assert migrate.current_revision(database) == migrate.head_revision()


def test_the_migrated_schema_matches_the_models(migrated: Database) -> None:
    assert schema_differences(migrated) == []


def test_downgrade_to_base_and_upgrade_again(migrated: Database) -> None:
    migrate.downgrade(migrated, revision="base")
    assert migrate.current_revision(migrated) is None
    assert set(inspect(migrated.engine).get_table_names()) == {"alembic_version"}

    migrate.upgrade(migrated)
    assert migrate.current_revision(migrated) == migrate.head_revision()
    assert schema_differences(migrated) == []


def test_foreign_keys_are_enforced_again_after_a_migration(migrated: Database) -> None:
    with migrated.engine.connect() as connection:
        assert connection.exec_driver_sql("PRAGMA foreign_keys").scalar() == 1


def test_upgrading_twice_changes_nothing(migrated: Database) -> None:
    migrate.upgrade(migrated)
    assert migrate.current_revision(migrated) == migrate.head_revision()


def test_upgrading_keeps_existing_rows(database: Database) -> None:
    migrate.upgrade(database, revision="0001")
    with database.engine.begin() as connection:
        connection.exec_driver_sql(
            "INSERT INTO cases (title, reference, notes, created_at, last_activity) "
            "VALUES ('Kept', 'MS-1', '', '2026-01-01 00:00:00', '2026-01-01 00:00:00')"
        )
        connection.exec_driver_sql(
            "INSERT INTO events (case_id, at, kind, message) VALUES (1, '2026-01-01 00:00:00', 'case_opened', 'x')"
        )

    migrate.upgrade(database)

    with database.engine.connect() as connection:
        assert connection.exec_driver_sql("SELECT title, revision FROM cases").all() == [("Kept", 0)]
        assert connection.exec_driver_sql("SELECT count(*) FROM events").scalar() == 1


def test_the_db_command_creates_and_then_reports_an_up_to_date_database(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    data_dir = tmp_path / "server"
    assert main(["db", "upgrade", "--data-dir", str(data_dir)]) == 0
    assert f"from schema none to {migrate.head_revision()}" in capsys.readouterr().out
    assert main(["db", "upgrade", "--data-dir", str(data_dir)]) == 0
    assert "up to date" in capsys.readouterr().out
    assert (data_dir / "secondstage.sqlite3").is_file()


def test_upgrading_to_accounts_keeps_cases_open_and_the_trail_append_only(database: Database) -> None:
    migrate.upgrade(database, revision="0002")
    with database.engine.begin() as connection:
        connection.exec_driver_sql(
            "INSERT INTO cases (title, reference, notes, created_at, last_activity, revision) "
            "VALUES ('Kept', 'MS-1', '', '2026-01-01 00:00:00', '2026-01-01 00:00:00', 3)"
        )

    migrate.upgrade(database)

    with database.engine.begin() as connection:
        assert connection.exec_driver_sql("SELECT title, revision, closed_at FROM cases").all() == [("Kept", 3, None)]
        connection.exec_driver_sql(
            "INSERT INTO audit_entries (at, actor, actor_kind, address, action, subject, detail) "
            "VALUES ('2026-01-01 00:00:00', 'x', 'system', '', 'test', '', '')"
        )
    with pytest.raises(DatabaseError, match="the audit trail cannot be changed"):
        with database.engine.begin() as connection:
            connection.exec_driver_sql("UPDATE audit_entries SET detail = 'rewritten'")
