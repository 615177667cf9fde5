"""Random secrets, their stored digests, and the server's signing key.

Session secrets, API tokens, session-link keys and the first-run key are 256
random bits from :mod:`secrets`; the database keeps only their SHA-256 digest,
so a copy of the database opens no session, token or link. A plain hash is
enough for secrets this long (no guessing attack can succeed), and it keeps the
lookup of every request to one indexed query.
"""

from __future__ import annotations

import hashlib
import hmac
import os
import secrets
from pathlib import Path

SECRET_BYTES = 32
TOKEN_PREFIX = "sst_"
"""API tokens start with this, so a leaked one is easy to recognise in logs and code."""


def new_secret() -> str:
    """A fresh URL-safe secret of 256 random bits."""
    return secrets.token_urlsafe(SECRET_BYTES)


def new_api_token() -> str:
    """A fresh API token: the prefix and a secret."""
    return TOKEN_PREFIX + new_secret()


def digest(secret: str) -> str:
    """The SHA-256 hex digest under which a secret is stored."""
    return hashlib.sha256(secret.encode("utf-8", "surrogatepass")).hexdigest()


def keyed_digest(key: bytes, *parts: str) -> str:
    """An HMAC-SHA-256 of ``parts`` under the server key (form tokens)."""
    message = "\x1f".join(parts).encode("utf-8", "surrogatepass")
    return hmac.new(key, message, hashlib.sha256).hexdigest()


def same(expected: str, given: str | None) -> bool:
    """Constant-time comparison of two secrets (False for a missing one)."""
    return given is not None and hmac.compare_digest(expected.encode(), given.encode("utf-8", "surrogatepass"))


def load_or_create_key(path: Path) -> bytes:
    """The signing key kept in ``path``; created (owner-only, written atomically) when absent."""
    try:
        return bytes.fromhex(path.read_text(encoding="ascii").strip())
    except FileNotFoundError:
        pass
    path.parent.mkdir(parents=True, exist_ok=True)
    key = secrets.token_bytes(SECRET_BYTES)
    temporary = path.with_name(f".{path.name}.{secrets.token_hex(4)}")
    descriptor = os.open(temporary, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
    with os.fdopen(descriptor, "w", encoding="ascii") as handle:
        handle.write(key.hex())
        handle.flush()
        os.fsync(handle.fileno())
    try:
        os.link(temporary, path)
    except FileExistsError:
        return bytes.fromhex(path.read_text(encoding="ascii").strip())
    finally:
        temporary.unlink()
    return key
