"""Backing up a data directory and bringing it back: a consistent copy of the database and the files.

A backup is a folder::

    manifest.json          format, time, schema revision, every file with its SHA-256
    secondstage.sqlite3    the database, copied with SQLite's online backup API
    files/ab/ab12...       every stored file the copied database refers to

The database is copied page by page while the server may keep running (the
online backup API sees one consistent state). Stored files never change once
written, so copying the files that *this copy* of the database refers to gives
a consistent pair; a file deleted between the two steps (its case was deleted
meanwhile) makes the copy start again. Every file is hashed as it is copied and
must match its name. The folder is written under a temporary name and renamed
when complete, so a half-written backup never looks like a backup.

Restoring checks the manifest, every hash and SQLite's integrity check before
anything is moved into place. The server must be stopped while restoring; it
upgrades the schema when it starts. The signing key is not part of a backup,
so everyone signs in again after a restore.
"""

from __future__ import annotations

import hashlib
import json
import os
import secrets
import shutil
import sqlite3
from collections.abc import Iterable, Iterator
from contextlib import closing, contextmanager
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

from app.errors import SecondStageError
from app.services.views import BackupReport, RestoreReport
from app.settings import DATABASE_FILE, FILES_FOLDER, Settings

BACKUP_FORMAT = 1
MANIFEST = "manifest.json"
COPY_ATTEMPTS = 3
CHUNK_BYTES = 1 << 20


class BackupError(SecondStageError):
    """A backup cannot be written or restored; the message says why."""


def backup(settings: Settings, *, target: Path) -> BackupReport:
    """Write a backup of the data directory named by ``settings`` into the new folder ``target``."""
    database = _sqlite_file(settings)
    if not database.is_file():
        raise BackupError(f"there is no database to back up at {database}")
    if target.exists():
        raise BackupError(f"{target} already exists; choose a new folder for the backup")
    target.parent.mkdir(parents=True, exist_ok=True)
    with _staging_folder(target, purpose="partial") as staging:
        for _ in range(COPY_ATTEMPTS):
            copy = staging / DATABASE_FILE
            copy.unlink(missing_ok=True)
            _snapshot(database, copy)
            hashes = _referenced_files(copy)
            shutil.rmtree(staging / FILES_FOLDER, ignore_errors=True)
            copied = _copy_files(settings.files_dir, staging / FILES_FOLDER, hashes)
            if copied is not None:
                break
        else:
            raise BackupError("stored files kept disappearing while the backup ran (cases being deleted); try again")
        manifest = {
            "format": BACKUP_FORMAT,
            "created_at": datetime.now(UTC).isoformat(timespec="seconds"),
            "schema_revision": _schema_revision(copy),
            "database": {"name": DATABASE_FILE, "sha256": _hash_file(copy), "bytes": copy.stat().st_size},
            "files": [{"sha256": sha256, "bytes": size} for sha256, size in sorted(copied.items())],
        }
        _write_json(staging / MANIFEST, manifest)
        _fsync_tree(staging)
        os.rename(staging, target)
    return BackupReport(
        folder=str(target),
        schema_revision=manifest["schema_revision"],
        cases=_count_cases(target / DATABASE_FILE),
        files=len(copied),
        total_bytes=manifest["database"]["bytes"] + sum(copied.values()),
    )


def restore(settings: Settings, *, source: Path, replace: bool = False) -> RestoreReport:
    """Bring back the backup in ``source`` as the data directory named by ``settings``.

    Parameters
    ----------
    replace
        The data directory already holds data: move it aside (to a sibling
        folder named in the report) instead of refusing.
    """
    if settings.database_url:
        raise BackupError("restore writes the default SQLite data directory; unset SECONDSTAGE_DATABASE_URL")
    manifest = verify(source)
    data_dir = settings.data_dir
    moved_aside: Path | None = None
    if data_dir.exists() and any(data_dir.iterdir()):
        if not replace:
            raise BackupError(f"{data_dir} already holds data; pass --replace to move it aside and restore")
    data_dir.parent.mkdir(parents=True, exist_ok=True)
    with _staging_folder(data_dir, purpose="restoring") as staging:
        _copy_verified(source / DATABASE_FILE, staging / DATABASE_FILE, manifest["database"]["sha256"])
        for entry in manifest["files"]:
            sha256 = entry["sha256"]
            source_file = _stored_path(source / FILES_FOLDER, sha256)
            _copy_verified(source_file, _stored_path(staging / FILES_FOLDER, sha256), sha256)
        _fsync_tree(staging)
        if data_dir.exists():
            if any(data_dir.iterdir()):
                stamp = datetime.now(UTC).strftime("%Y%m%dT%H%M%SZ")
                moved_aside = data_dir.with_name(f"{data_dir.name}.before-restore-{stamp}")
                os.rename(data_dir, moved_aside)
            else:
                data_dir.rmdir()
        os.rename(staging, data_dir)
    return RestoreReport(
        data_dir=str(data_dir),
        schema_revision=manifest["schema_revision"],
        cases=_count_cases(data_dir / DATABASE_FILE),
        files=len(manifest["files"]),
        moved_aside=str(moved_aside) if moved_aside is not None else None,
    )


def verify(source: Path) -> dict[str, Any]:
    """Check a backup folder (manifest, every hash, the database's integrity); returns its manifest."""
    try:
        manifest = json.loads((source / MANIFEST).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        raise BackupError(f"{source} is not a SecondStage backup (no readable {MANIFEST})") from None
    if not isinstance(manifest, dict) or manifest.get("format") != BACKUP_FORMAT:
        raise BackupError(f"{source} was written in a backup format this version cannot read")
    database = source / DATABASE_FILE
    if not database.is_file() or _hash_file(database) != manifest["database"]["sha256"]:
        raise BackupError(f"the database in {source} is missing or does not match its manifest")
    with closing(_read_only(database)) as connection:
        if connection.execute("PRAGMA integrity_check").fetchone()[0] != "ok":
            raise BackupError(f"the database in {source} fails SQLite's integrity check")
    for entry in manifest["files"]:
        path = _stored_path(source / FILES_FOLDER, entry["sha256"])
        if not path.is_file() or _hash_file(path) != entry["sha256"]:
            raise BackupError(f"the stored file {entry['sha256']} in {source} is missing or damaged")
    return manifest


@contextmanager
def _staging_folder(final: Path, *, purpose: str) -> Iterator[Path]:
    """A new private folder beside ``final`` to fill and then rename to it; removed again if anything fails.

    A backup or a restored data directory thus appears whole or not at all.
    """
    staging = final.parent / f".{final.name}.{purpose}-{secrets.token_hex(4)}"
    staging.mkdir(mode=0o700)
    try:
        yield staging
    except BaseException:
        shutil.rmtree(staging, ignore_errors=True)
        raise


def _read_only(database: Path) -> sqlite3.Connection:
    """A read-only connection (the path as a file URI, so no character in it is taken for a URI option)."""
    return sqlite3.connect(f"{database.resolve().as_uri()}?mode=ro", uri=True)


def _sqlite_file(settings: Settings) -> Path:
    database = settings.database_file
    if database is None:
        raise BackupError("backup copies SQLite databases; back up a server database with its own tools")
    return database


def _snapshot(database: Path, copy: Path) -> None:
    """A consistent copy of a live SQLite database, as one self-contained file (no write-ahead log)."""
    with closing(sqlite3.connect(database)) as source, closing(sqlite3.connect(copy)) as target:
        source.backup(target)
        target.execute("PRAGMA journal_mode=DELETE")
        target.commit()


def _referenced_files(database: Path) -> set[str]:
    with closing(_read_only(database)) as connection:
        return {row[0] for row in connection.execute("SELECT DISTINCT sha256 FROM datasets")}


def _copy_files(store: Path, target: Path, hashes: Iterable[str]) -> dict[str, int] | None:
    """Copy the stored files with these hashes; None when one has disappeared (the copy must start again)."""
    copied = {}
    for sha256 in hashes:
        source = _stored_path(store, sha256)
        if not source.is_file():
            return None
        copied[sha256] = _copy_verified(source, _stored_path(target, sha256), sha256)
    return copied


def _copy_verified(source: Path, target: Path, sha256: str) -> int:
    """Copy a file while hashing it; refuse (and leave nothing) when the bytes do not match ``sha256``."""
    target.parent.mkdir(parents=True, exist_ok=True)
    digest = hashlib.sha256()
    size = 0
    with source.open("rb") as reader, target.open("xb") as writer:
        while chunk := reader.read(CHUNK_BYTES):
            digest.update(chunk)
            writer.write(chunk)
            size += len(chunk)
        writer.flush()
        os.fsync(writer.fileno())
    if digest.hexdigest() != sha256:
        target.unlink()
        raise BackupError(f"the stored file {sha256} is damaged: its bytes no longer match its SHA-256")
    return size


def _stored_path(root: Path, sha256: str) -> Path:
    if len(sha256) != 64 or any(c not in "0123456789abcdef" for c in sha256):
        raise BackupError(f"not a SHA-256 file name: {sha256!r}")
    return root / sha256[:2] / sha256


def _hash_file(path: Path) -> str:
    digest = hashlib.sha256()
    with path.open("rb") as handle:
        while chunk := handle.read(CHUNK_BYTES):
            digest.update(chunk)
    return digest.hexdigest()


def _schema_revision(database: Path) -> str | None:
    with closing(_read_only(database)) as connection:
        try:
            row = connection.execute("SELECT version_num FROM alembic_version").fetchone()
        except sqlite3.DatabaseError:
            return None
    return row[0] if row else None


def _count_cases(database: Path) -> int:
    with closing(_read_only(database)) as connection:
        return int(connection.execute("SELECT count(*) FROM cases").fetchone()[0])


def _write_json(path: Path, data: object) -> None:
    with path.open("x", encoding="utf-8") as handle:
        json.dump(data, handle, indent=2)
        handle.write("\n")
        handle.flush()
        os.fsync(handle.fileno())


def _fsync_tree(root: Path) -> None:
    """Make a folder's new names durable before it is renamed into place."""
    for folder in [root, *(path for path in root.rglob("*") if path.is_dir())]:
        descriptor = os.open(folder, os.O_RDONLY)
        try:
            os.fsync(descriptor)
        finally:
            os.close(descriptor)
