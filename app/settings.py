"""Settings of a SecondStage server, read from keyword arguments or ``SECONDSTAGE_*`` variables.

Nothing here is created at import time: the server, the CLI and every test build
their own :class:`Settings` (tests with a temporary data directory).
"""

from __future__ import annotations

from pathlib import Path

from pydantic import Field
from pydantic_settings import BaseSettings, SettingsConfigDict

DATABASE_FILE = "secondstage.sqlite3"
FILES_FOLDER = "files"


class Settings(BaseSettings):
    """Where a server keeps its data and how much work it accepts.

    Attributes
    ----------
    data_dir
        One folder holds everything: the SQLite database and the uploaded files.
    database_url
        SQLAlchemy URL; defaults to SQLite inside ``data_dir``. A server database
        (``postgresql+psycopg://...``) can replace it.
    max_upload_bytes
        Uploads larger than this are refused before anything is stored.
    max_rows, max_columns
        Limits passed to the data-file reader.
    worker_threads
        Refits run on this many background threads inside the server process.
    refit_wait_seconds
        How long a request waits for a refit before showing its progress page;
        quick refits therefore open straight on their results.
    migrate_on_start
        Upgrade the database schema when the server starts.
    page_cache_entries
        Rendered case, results and checklist pages kept in memory, each valid
        until the case changes; 0 turns the cache off.
    """

    model_config = SettingsConfigDict(env_prefix="SECONDSTAGE_", extra="forbid")

    data_dir: Path = Path("secondstage-data")
    database_url: str | None = None
    max_upload_bytes: int = Field(default=512 * 1024 * 1024, ge=1)
    max_rows: int = Field(default=50_000_000, ge=1)
    max_columns: int = Field(default=5_000, ge=1)
    worker_threads: int = Field(default=1, ge=1, le=16)
    refit_wait_seconds: float = Field(default=3.0, ge=0.0, le=60.0)
    migrate_on_start: bool = True
    page_cache_entries: int = Field(default=256, ge=0)

    @property
    def resolved_database_url(self) -> str:
        """The database URL, with the SQLite default filled in."""
        if self.database_url:
            return self.database_url
        return f"sqlite:///{(self.data_dir / DATABASE_FILE).resolve()}"

    @property
    def files_dir(self) -> Path:
        """Folder of the content-addressed file store."""
        return self.data_dir / FILES_FOLDER
