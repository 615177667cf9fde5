"""Migrations: an empty database upgrades to head, matches the models, and survives a round trip."""

from __future__ import annotations

from alembic.autogenerate import compare_metadata
from alembic.runtime.migration import MigrationContext
from sqlalchemy import inspect

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
