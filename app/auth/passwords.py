"""Passwords: the rules a new password must meet, and Argon2id hashing with argon2-cffi.

Only hashes are stored. Verifying a name that has no account still runs one
Argon2 verification against a throw-away hash, so the time a refusal takes
does not tell whether the account exists.
"""

from __future__ import annotations

import secrets

from argon2 import PasswordHasher
from argon2.exceptions import InvalidHashError, VerificationError, VerifyMismatchError

MIN_LENGTH = 10
MAX_LENGTH = 1024
"""Longer passwords are refused: hashing megabytes of input would tie up the server."""


def password_problems(password: str, *, name: str) -> list[str]:
    """What is wrong with a new password (empty when it is acceptable).

    The rules follow NIST SP 800-63B: a minimum length, no composition rules,
    and not the account name itself.
    """
    problems = []
    if len(password) < MIN_LENGTH:
        problems.append(f"the password must have at least {MIN_LENGTH} characters")
    if len(password) > MAX_LENGTH:
        problems.append(f"the password must have at most {MAX_LENGTH} characters")
    if password.strip().casefold() == name.strip().casefold():
        problems.append("the password must not be the account name")
    if password and not password.strip():
        problems.append("the password must not be only spaces")
    return problems


class Hasher:
    """Argon2id hashing with the server's work factors."""

    def __init__(self, *, time_cost: int, memory_kib: int) -> None:
        self._hasher = PasswordHasher(time_cost=time_cost, memory_cost=memory_kib, parallelism=1)
        self._decoy: str | None = None

    def hash(self, password: str) -> str:
        """A new Argon2id hash of ``password``."""
        return self._hasher.hash(password)

    def verify(self, stored: str | None, password: str) -> bool:
        """Whether ``password`` matches the stored hash; with no stored hash, spend the same time and say no."""
        if len(password) > MAX_LENGTH:
            return False
        if stored is None:
            if self._decoy is None:
                self._decoy = self._hasher.hash(secrets.token_urlsafe(16))
            self._matches(self._decoy, password)
            return False
        return self._matches(stored, password)

    def _matches(self, stored: str, password: str) -> bool:
        try:
            return self._hasher.verify(stored, password)
        except (VerifyMismatchError, VerificationError, InvalidHashError):
            return False

    def needs_rehash(self, stored: str) -> bool:
        """Whether a stored hash was made with other work factors than the server's."""
        try:
            return self._hasher.check_needs_rehash(stored)
        except InvalidHashError:
            return True
