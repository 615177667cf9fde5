"""Form tokens against cross-site request forgery.

A signed-in browser sends its session cookie with every request, also with
requests another site makes it send. Every state-changing request that is
authenticated by the session cookie must therefore carry a token that only
this server's own pages know: in the form field ``csrf_token`` or the header
``X-CSRF-Token``. The token is an HMAC of the session's secret under the server
key, so it changes with every sign-in and needs no storage.

Forms shown before sign-in (sign-in, first run) use the double-submit pattern:
a random value in an HttpOnly cookie, and its HMAC in the form.

Requests authenticated by an API token carry no ambient credential and need no
form token.
"""

from __future__ import annotations

from app.auth.keys import keyed_digest, same

FIELD = "csrf_token"
HEADER = "X-CSRF-Token"
SAFE_METHODS = frozenset({"GET", "HEAD", "OPTIONS"})


def session_token(key: bytes, session_secret: str) -> str:
    """The form token of one web session."""
    return keyed_digest(key, "form token", session_secret)


def pre_session_token(key: bytes, form_cookie: str) -> str:
    """The form token that matches a pre-session form cookie."""
    return keyed_digest(key, "pre-session form token", form_cookie)


def accepted(expected: str, given: str | None) -> bool:
    """Whether a submitted token is the expected one."""
    return same(expected, given)
