"""Fixtures for the storage tests: a fresh SQLite database in a temporary folder."""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path

import pytest

from app.store import migrate
from app.store.database import Database


@pytest.fixture
def database(tmp_path: Path) -> Iterator[Database]:
    """An empty database file (no tables yet); disposed after the test."""
    db = Database(f"sqlite:///{tmp_path / 'test.sqlite3'}")
    yield db
    db.dispose()


@pytest.fixture
def migrated(database: Database) -> Database:
    """The database upgraded to the newest schema."""
    migrate.upgrade(database)
    return database
