"""Settings of a SecondStage server, read from keyword arguments or ``SECONDSTAGE_*`` variables.

Nothing here is created at import time: the server, the CLI and every test build
their own :class:`Settings` (tests with a temporary data directory).
"""

from __future__ import annotations

from pathlib import Path

from pydantic import Field, SecretStr
from pydantic_settings import BaseSettings, SettingsConfigDict

DATABASE_FILE = "secondstage.sqlite3"
FILES_FOLDER = "files"
SECRET_KEY_FILE = "secret.key"
MiB = 1024 * 1024


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
    max_cells, max_unpacked_bytes, max_compression_ratio
        Further reader limits: rows times columns, the unpacked size of a
        compressed file (xlsx parts, compressed R files), and the largest
        unpacked/packed ratio of a large part (decompression bombs).
    secret_key
        Signs session cookies and form tokens. When unset, a random key is
        created once in ``data_dir/secret.key`` (readable by its owner only).
    session_hours
        How long a sign-in lasts before the person must sign in again.
    secure_cookies
        Send cookies over HTTPS only; turn on when the server is reached through HTTPS.
    sign_in_window_minutes, sign_in_failures_per_account, sign_in_failures_per_address
        Failed sign-ins allowed per account (since its last success) and per
        address within the window; further attempts are refused until the
        oldest failure leaves the window.
    password_time_cost, password_memory_kib
        Argon2id work factors for new password hashes; stored hashes made with
        other factors are upgraded at their next successful sign-in.
    session_link_max_hours
        The longest a journal-club session link may stay valid.
    retention_days
        Closed cases older than this (counted from their closing) are purged
        by ``secondstage purge``; unset keeps closed cases until deleted.
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
    max_cells: int = Field(default=1_000_000_000, ge=1)
    max_unpacked_bytes: int = Field(default=2048 * MiB, ge=1)
    max_compression_ratio: float = Field(default=100.0, gt=1.0)
    secret_key: SecretStr | None = None
    session_hours: float = Field(default=12.0, gt=0.0, le=24 * 30)
    secure_cookies: bool = False
    sign_in_window_minutes: float = Field(default=15.0, gt=0.0)
    sign_in_failures_per_account: int = Field(default=5, ge=1)
    sign_in_failures_per_address: int = Field(default=20, ge=1)
    password_time_cost: int = Field(default=3, ge=1)
    password_memory_kib: int = Field(default=64 * 1024, ge=8)
    session_link_max_hours: int = Field(default=7 * 24, ge=1)
    retention_days: int | None = Field(default=None, ge=1)

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

    @property
    def database_file(self) -> Path | None:
        """The SQLite database file, or None when a server database is configured."""
        if self.database_url and not self.database_url.startswith("sqlite:///"):
            return None
        if self.database_url:
            return Path(self.database_url.removeprefix("sqlite:///"))
        return self.data_dir / DATABASE_FILE

    @property
    def secret_key_file(self) -> Path:
        """Where the generated signing key is kept when ``secret_key`` is unset."""
        return self.data_dir / SECRET_KEY_FILE
