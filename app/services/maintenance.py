"""Keeping a data directory's database at the newest schema."""

from __future__ import annotations

from dataclasses import dataclass

from app.settings import Settings
from app.store import migrate
from app.store.database import Database


@dataclass(frozen=True)
class SchemaUpgrade:
    """The schema revision before and after an upgrade (None for an empty database)."""

    before: str | None
    after: str | None


def upgrade_database(settings: Settings) -> SchemaUpgrade:
    """Create or upgrade the database named by ``settings`` to the newest migration."""
    settings.data_dir.mkdir(parents=True, exist_ok=True)
    database = Database(settings.resolved_database_url)
    try:
        before = migrate.current_revision(database)
        migrate.upgrade(database)
        return SchemaUpgrade(before=before, after=migrate.current_revision(database))
    finally:
        database.dispose()
