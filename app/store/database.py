"""The database connection: one engine and one session factory per server.

SQLite (the default) is opened in WAL mode with foreign keys enforced and a
busy timeout, so that the request threads and the refit worker can share it.
``secure_delete`` makes SQLite overwrite deleted content with zeros, so a
deleted case's rows do not linger in free pages of the database file.
JSON columns are written with ``allow_nan=False``: a NaN that slipped past the
engine fails loudly instead of being stored as text strict parsers reject.
"""

from __future__ import annotations

import functools
import json
from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any

from sqlalchemy import Engine, create_engine, event
from sqlalchemy.orm import Session, sessionmaker

SQLITE_PRAGMAS = (
    "PRAGMA journal_mode=WAL",
    "PRAGMA foreign_keys=ON",
    "PRAGMA busy_timeout=10000",
    "PRAGMA synchronous=NORMAL",
    "PRAGMA secure_delete=ON",
)


class Database:
    """An engine plus a session factory; call :meth:`dispose` when done."""

    def __init__(self, url: str) -> None:
        self.url = url
        self.engine: Engine = create_engine(
            url,
            json_serializer=functools.partial(json.dumps, allow_nan=False),
            connect_args={"check_same_thread": False} if url.startswith("sqlite") else {},
        )
        if self.engine.dialect.name == "sqlite":
            event.listen(self.engine, "connect", _sqlite_on_connect)
        self._sessions = sessionmaker(self.engine, expire_on_commit=False)

    @property
    def is_sqlite(self) -> bool:
        """Whether the backend is SQLite (migrations then run in batch mode)."""
        return self.engine.dialect.name == "sqlite"

    @contextmanager
    def transaction(self) -> Iterator[Session]:
        """A session inside one transaction: committed on success, rolled back on any error."""
        with self._sessions() as session, session.begin():
            yield session

    @contextmanager
    def reading(self) -> Iterator[Session]:
        """A session for reads only."""
        with self._sessions() as session:
            yield session

    def checkpoint(self) -> None:
        """Copy the write-ahead log into the database file and empty it (SQLite only).

        Called after a deletion, so that the deleted rows' old pages do not stay
        behind in the log file. Best effort: readers still open keep the log.
        """
        if not self.is_sqlite:
            return
        with self.engine.connect() as connection:
            connection.exec_driver_sql("PRAGMA wal_checkpoint(TRUNCATE)")

    def dispose(self) -> None:
        """Close every pooled connection."""
        self.engine.dispose()


def _sqlite_on_connect(connection: Any, _record: Any) -> None:
    cursor = connection.cursor()
    for pragma in SQLITE_PRAGMAS:
        cursor.execute(pragma)
    cursor.close()
