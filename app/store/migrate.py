"""Run the Alembic migrations in ``migrations/`` against a :class:`~app.store.database.Database`.

Alembic is configured in code (script location and connection), so no
alembic.ini is needed and the URL always comes from the server's settings.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

from alembic import command
from alembic.config import Config
from alembic.runtime.migration import MigrationContext
from alembic.script import ScriptDirectory
from sqlalchemy import Connection

from app.store.database import Database

MIGRATIONS_DIR = Path(__file__).resolve().parents[2] / "migrations"


def alembic_config(connection: Connection) -> Config:
    """An Alembic configuration bound to an open connection."""
    config = Config()
    config.set_main_option("script_location", str(MIGRATIONS_DIR))
    config.attributes["connection"] = connection
    return config


def upgrade(database: Database, *, revision: str = "head") -> None:
    """Upgrade the schema to ``revision`` (default: the newest)."""
    _run(database, lambda config: command.upgrade(config, revision))


def downgrade(database: Database, *, revision: str) -> None:
    """Downgrade the schema to ``revision`` (``"base"`` removes every table)."""
    _run(database, lambda config: command.downgrade(config, revision))


def current_revision(database: Database) -> str | None:
    """The revision the database is at, or None for an empty database."""
    with database.engine.connect() as connection:
        return MigrationContext.configure(connection).get_current_revision()


def head_revision() -> str:
    """The newest revision in ``migrations/versions``."""
    head = ScriptDirectory(str(MIGRATIONS_DIR)).get_current_head()
    if head is None:
        raise RuntimeError("migrations/versions holds no revision")
    return head


def _run(database: Database, action: Callable[[Config], None]) -> None:
    with database.engine.connect() as connection:
        if database.is_sqlite:
            # Batch mode recreates tables; with foreign keys enforced that would
            # cascade-delete child rows. The pragma only works outside a transaction.
            connection.exec_driver_sql("PRAGMA foreign_keys=OFF")
            connection.commit()
        try:
            action(alembic_config(connection))
            connection.commit()
        finally:
            if database.is_sqlite:
                connection.exec_driver_sql("PRAGMA foreign_keys=ON")
                connection.commit()
