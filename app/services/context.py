"""What every service call needs: settings, the database, the file store, the worker, and who is acting."""

from __future__ import annotations

import dataclasses
import threading
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from datetime import timedelta

from sqlalchemy.orm import Session

from app.auth.actors import SERVER, Actor
from app.auth.passwords import Hasher
from app.auth.rate_limit import RefusalTally
from app.services.jobs import JobRunner
from app.settings import Settings
from app.store import migrate
from app.store.database import Database
from app.store.files import FileStore


REFUSAL_ENTRY_EVERY = timedelta(minutes=1)
"""At most one audit entry per account this often for sign-in attempts refused by the limits."""


@dataclass
class ServiceContext:
    """The resources of one running server (or CLI command, or test), and the actor of the call.

    Build it with :meth:`open` and release it with :meth:`close`. A request
    works on :meth:`acting_as` of the server's context: the same resources,
    its own actor. Services check what ``actor`` may do (see
    :mod:`app.services.records`).
    """

    settings: Settings
    database: Database
    files: FileStore
    jobs: JobRunner
    hasher: Hasher
    files_lock: threading.Lock = field(default_factory=threading.Lock)
    """Held while a file is added or removed, so a delete never races an upload of the same bytes."""
    refusals: RefusalTally = field(default_factory=lambda: RefusalTally(every=REFUSAL_ENTRY_EVERY))
    """Sign-in attempts refused by the limits and not yet in the audit trail (see :mod:`app.services.sign_in`)."""
    actor: Actor = SERVER
    """Who is acting; the server itself unless :meth:`acting_as` says otherwise."""

    @classmethod
    def open(cls, settings: Settings) -> ServiceContext:
        """Create the data directory, connect, migrate (if configured) and start the worker."""
        settings.data_dir.mkdir(parents=True, exist_ok=True)
        database = Database(settings.resolved_database_url)
        if settings.migrate_on_start:
            migrate.upgrade(database)
        return cls(
            settings=settings,
            database=database,
            files=FileStore(settings.files_dir),
            jobs=JobRunner(threads=settings.worker_threads),
            hasher=Hasher(time_cost=settings.password_time_cost, memory_kib=settings.password_memory_kib),
        )

    def acting_as(self, actor: Actor) -> ServiceContext:
        """This context's resources, used on behalf of ``actor``."""
        return dataclasses.replace(self, actor=actor)

    def close(self) -> None:
        """Stop the worker (running refits finish first), record refused sign-ins not yet recorded, close the stores."""
        from app.services.sign_in import record_untold_refusals  # sign_in builds on this module

        self.jobs.shutdown()
        record_untold_refusals(self)
        self.files.close()
        self.database.dispose()

    @contextmanager
    def transaction(self) -> Iterator[Session]:
        """One unit of work: committed on success, rolled back on any error."""
        with self.database.transaction() as session:
            yield session

    @contextmanager
    def reading(self) -> Iterator[Session]:
        """A read-only session."""
        with self.database.reading() as session:
            yield session
