"""A content-addressed file store: every file is kept once, under its SHA-256.

Writes are atomic: the bytes go to a temporary file in the store's own
``incoming`` folder (same file system), are hashed on the way, fsynced, and
only then renamed to ``<first two hex digits>/<sha256>``. A crash or an
oversized upload leaves no file under a hash name. The original file name is
metadata kept by the caller, never part of the path.

The fsync runs on a helper thread while the caller reads and checks the
received file; :meth:`FileStore.keep` waits for it before the rename.
"""

from __future__ import annotations

import hashlib
import os
import tempfile
from collections.abc import Iterator
from concurrent.futures import Future, ThreadPoolExecutor
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Protocol

CHUNK_BYTES = 1 << 20


class FileExceedsLimit(Exception):
    """The incoming file exceeded the size limit; nothing was kept."""

    def __init__(self, limit: int) -> None:
        super().__init__(f"the file is larger than the limit of {limit} bytes")
        self.limit = limit


class Readable(Protocol):
    """Anything with a binary ``read(size)`` that returns ``b""`` at the end."""

    def read(self, size: int = -1, /) -> bytes | memoryview: ...


@dataclass(frozen=True)
class IncomingFile:
    """A fully written temporary file that is not yet in the store; ``synced`` ends when it is on disk."""

    path: Path
    sha256: str
    size_bytes: int
    synced: Future[None]


class FileStore:
    """Content-addressed files under ``root``."""

    def __init__(self, root: Path) -> None:
        self.root = root
        self.incoming_dir = root / "incoming"
        self.incoming_dir.mkdir(parents=True, exist_ok=True)
        self._syncer = ThreadPoolExecutor(max_workers=1, thread_name_prefix="secondstage-fsync")

    def close(self) -> None:
        """Wait for pending fsyncs and stop the helper thread."""
        self._syncer.shutdown(wait=True)

    def path_for(self, sha256: str) -> Path:
        """Where the file with this hash lives (it may not exist)."""
        if len(sha256) != 64 or any(c not in "0123456789abcdef" for c in sha256):
            raise ValueError(f"not a SHA-256 hex digest: {sha256!r}")
        return self.root / sha256[:2] / sha256

    def contains(self, sha256: str) -> bool:
        """Whether a file with this hash is stored."""
        return self.path_for(sha256).is_file()

    @contextmanager
    def receive(self, source: Readable, *, limit: int, suffix: str = "") -> Iterator[IncomingFile]:
        """Copy ``source`` into a temporary file while hashing it.

        The temporary file exists only inside the ``with`` block: call
        :meth:`keep` inside the block to move it into the store; otherwise it is
        deleted on exit, also when an error is raised. ``suffix`` (e.g. ``.csv``)
        lets readers that look at the name see the right extension.

        Raises
        ------
        FileExceedsLimit
            When more than ``limit`` bytes arrive.
        """
        descriptor, name = tempfile.mkstemp(dir=self.incoming_dir, suffix=suffix)
        path = Path(name)
        synced: Future[None] | None = None
        try:
            digest = hashlib.sha256()
            size = 0
            with os.fdopen(descriptor, "wb") as target:
                while chunk := source.read(CHUNK_BYTES):
                    size += len(chunk)
                    if size > limit:
                        raise FileExceedsLimit(limit)
                    digest.update(chunk)
                    target.write(chunk)
            synced = self._syncer.submit(_fsync_file, path)
            yield IncomingFile(path=path, sha256=digest.hexdigest(), size_bytes=size, synced=synced)
        finally:
            # A kept file was synced in keep(); a discarded one (already stored, refused)
            # needs no durability, so its sync is not waited for.
            if synced is not None:
                synced.cancel()
            path.unlink(missing_ok=True)

    def keep(self, incoming: IncomingFile) -> Path:
        """Move a received file to its hash name (a no-op if that content is already stored)."""
        target = self.path_for(incoming.sha256)
        if target.is_file():
            return target
        target.parent.mkdir(exist_ok=True)
        incoming.synced.result()
        os.replace(incoming.path, target)
        _fsync_directory(target.parent)
        return target

    def delete(self, sha256: str) -> None:
        """Remove a stored file, if present."""
        self.path_for(sha256).unlink(missing_ok=True)


def _fsync_file(path: Path) -> None:
    """Force a written file's bytes to disk (nothing to do if it was discarded meanwhile)."""
    try:
        descriptor = os.open(path, os.O_RDONLY)
    except FileNotFoundError:
        return
    try:
        os.fsync(descriptor)
    finally:
        os.close(descriptor)


def _fsync_directory(folder: Path) -> None:
    """Make a rename durable: fsync the directory that holds the new name."""
    descriptor = os.open(folder, os.O_RDONLY)
    try:
        os.fsync(descriptor)
    finally:
        os.close(descriptor)
