"""Signed cookie values: the session cookie and the cookie that guards forms shown before sign-in.

The session cookie carries the session's secret signed with the server key
and a timestamp (itsdangerous), so a forged or stale cookie is refused without
a database query; the secret itself is then looked up by its digest. Both
cookies are HttpOnly and SameSite; ``Secure`` when the server says it is
reached through HTTPS.
"""

from __future__ import annotations

from dataclasses import dataclass

from itsdangerous import BadSignature, TimestampSigner

SESSION_COOKIE = "secondstage_session"
FORM_COOKIE = "secondstage_form"
"""Set with the sign-in and first-run forms; their hidden token must match it (no session exists yet)."""


@dataclass(frozen=True)
class CookieOptions:
    """Attributes every cookie of this server is set with."""

    secure: bool

    def attributes(self, *, max_age: int | None, same_site: str = "lax") -> dict[str, object]:
        return {"max_age": max_age, "path": "/", "httponly": True, "samesite": same_site, "secure": self.secure}


class CookieSigner:
    """Signs and checks cookie values under the server key, with a timestamp."""

    def __init__(self, key: bytes, *, purpose: str) -> None:
        self._signer = TimestampSigner(key, salt=f"secondstage {purpose}")

    def sign(self, value: str) -> str:
        """``value`` with its timestamp and signature."""
        return self._signer.sign(value).decode("ascii")

    def unsign(self, signed: str | None, *, max_age_seconds: float) -> str | None:
        """The value of a signed cookie, or None when it is missing, forged or older than ``max_age_seconds``."""
        if not signed:
            return None
        try:
            return self._signer.unsign(signed, max_age=int(max_age_seconds)).decode("ascii")
        except (BadSignature, UnicodeError):
            return None
