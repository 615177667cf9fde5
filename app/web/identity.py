"""Who sends a request, and whether a state-changing request carries this server's form token.

Pages are reached with the web session cookie; the JSON API with the same
cookie or with ``Authorization: Bearer <API token>``. The dependency
:func:`services` resolves the person (:class:`SignInRequired` when there is
none), checks the form token of every state-changing request made with the
cookie (:class:`FormTokenRefused`), and hands the route a service context
acting as that person. Streamed uploads use :func:`upload_services`: their
form token is checked by the upload reader, from the header or from the form
field that precedes the file (see :mod:`app.web.uploads`).

The first-run key (:class:`FirstRunKey`) lets the one person who started the
server create its first steward.
"""

from __future__ import annotations

import threading
from dataclasses import dataclass
from typing import Annotated
from urllib.parse import urlencode, urlsplit

from fastapi import Depends, Request
from starlette.concurrency import run_in_threadpool

from app.auth import csrf
from app.auth.actors import Actor
from app.auth.cookies import FORM_COOKIE, SESSION_COOKIE, CookieOptions, CookieSigner
from app.auth.keys import digest, load_or_create_key, new_secret, same
from app.errors import SecondStageError
from app.services import sign_in, tokens
from app.services.context import ServiceContext
from app.services.errors import Forbidden
from app.settings import Settings

API_PREFIX = "/api/"
FORM_COOKIE_SECONDS = 3600
SIGN_IN_PATH = "/sign-in"


class SignInRequired(SecondStageError):
    """No valid web session (pages) or API token (API) came with the request."""


class FormTokenRefused(Forbidden):
    """A state-changing request made with the session cookie lacks this server's form token."""


@dataclass(frozen=True)
class ServerKeys:
    """The signing key and what is built from it: cookie signers and cookie attributes."""

    key: bytes
    sessions: CookieSigner
    forms: CookieSigner
    cookies: CookieOptions

    @classmethod
    def of(cls, settings: Settings) -> ServerKeys:
        """The configured key, or the one kept in the data directory (created on first use)."""
        if settings.secret_key is not None:
            key = settings.secret_key.get_secret_value().encode()
        else:
            key = load_or_create_key(settings.secret_key_file)
        return cls(
            key=key,
            sessions=CookieSigner(key, purpose="session"),
            forms=CookieSigner(key, purpose="form"),
            cookies=CookieOptions(secure=settings.secure_cookies),
        )


class FirstRunKey:
    """The one-time key of the first-run page, kept only as a digest; usable until the first steward exists."""

    def __init__(self, key: str) -> None:
        self._digest = digest(key)
        self._used = False
        self.lock = threading.Lock()
        """Held while the first steward is created, so two submissions cannot both succeed."""

    def matches(self, key: str) -> bool:
        return not self._used and same(self._digest, digest(key))

    def use_up(self) -> None:
        self._used = True


def client_address(request: Request) -> str:
    """The client's address as the server sees it (a reverse proxy's, unless uvicorn trusts its headers)."""
    return request.client.host if request.client is not None else ""


async def current_actor(request: Request) -> Actor:
    """The person behind the request (a FastAPI dependency).

    Sets ``request.state.actor`` and, for web sessions, the session's secret
    and form token. A web session is looked up right here on the event loop:
    one prebuilt, read-only, indexed query (SQLite readers never wait for
    writers) costs less than the switch to a worker thread it would otherwise
    add to every page. An API token may record when it was last used (a
    write), so it is looked up on a worker thread.
    """
    state = request.app.state
    ctx: ServiceContext = state.services
    address = client_address(request)
    request.state.csrf_token = None
    authorization = request.headers.get("authorization")
    if authorization is not None and request.url.path.startswith(API_PREFIX):
        scheme, _, secret = authorization.partition(" ")
        actor = None
        if scheme.lower() == "bearer":
            actor = await run_in_threadpool(tokens.actor_for_token, ctx, secret=secret.strip(), address=address)
        if actor is None:
            raise SignInRequired("this API token is unknown, expired or revoked (send Authorization: Bearer <token>)")
        request.state.actor = actor
        return actor
    keys: ServerKeys = state.keys
    secret = keys.sessions.unsign(
        request.cookies.get(SESSION_COOKIE), max_age_seconds=ctx.settings.session_hours * 3600
    )
    actor = sign_in.actor_for_session(ctx, secret=secret, address=address) if secret else None
    if actor is None:
        raise SignInRequired("sign in to continue" if secret is None else "your sign-in has ended; sign in again")
    request.state.actor = actor
    request.state.session_secret = secret
    request.state.csrf_token = csrf.session_token(keys.key, secret)
    return actor


async def services(request: Request, actor: Annotated[Actor, Depends(current_actor)]) -> ServiceContext:
    """The service context acting as the request's person, after the form-token check of a state-changing request."""
    if request.method not in csrf.SAFE_METHODS and request.state.csrf_token is not None:
        given = request.headers.get(csrf.HEADER)
        if given is None and _is_plain_form(request):
            value = (await request.form()).get(csrf.FIELD)
            given = value if isinstance(value, str) else None
        check_form_token(request, given)
    return request.app.state.services.acting_as(actor)


async def upload_services(request: Request, actor: Annotated[Actor, Depends(current_actor)]) -> ServiceContext:
    """Like :func:`services`, but the body is a streamed upload: its form token is checked by the upload reader."""
    return request.app.state.services.acting_as(actor)


def check_form_token(request: Request, given: str | None) -> None:
    """Refuse a state-changing request whose form token is not this session's (no check for API tokens)."""
    expected = request.state.csrf_token
    if expected is not None and not csrf.accepted(expected, given):
        raise FormTokenRefused(
            "this form did not come from a page of this server, or it is older than your sign-in; "
            "reload the page and send it again"
        )


def sign_in_location(request: Request) -> str:
    """The sign-in page, with a page to come back to as ``next``.

    For a page asked for, that page; for a request htmx sends from a page (a
    note saved as it is typed), the page it was sent from, which htmx names in
    ``HX-Current-URL``, when that page is on this server; otherwise none. The
    sign-in page checks ``next`` again with :func:`safe_next`.
    """
    if request.headers.get("HX-Request") == "true":
        target = _same_site_page(request, request.headers.get("HX-Current-URL", ""))
    elif request.method == "GET":
        target = request.url.path + (f"?{request.url.query}" if request.url.query else "")
    else:
        target = None
    if target is None or safe_next(target) == "/":
        return SIGN_IN_PATH
    return f"{SIGN_IN_PATH}?{urlencode({'next': target})}"


def _same_site_page(request: Request, url: str) -> str | None:
    """The path and query of ``url`` when it is a page of this server (same host), else None."""
    try:
        parts = urlsplit(url)
    except ValueError:
        return None
    if parts.netloc != request.headers.get("host", "") or parts.scheme not in ("http", "https"):
        return None
    return parts.path + (f"?{parts.query}" if parts.query else "")


def safe_next(target: str | None) -> str:
    """A path on this server to go to after signing in; anything else (another site, a scheme) becomes ``/``."""
    if not target or not target.startswith("/") or target.startswith(("//", "/\\")) or any(c in target for c in "\r\n\\"):
        return "/"
    return target


def new_form_cookie() -> str:
    """A fresh value for the pre-session form cookie."""
    return new_secret()


def pre_session_token(request: Request, form_cookie: str) -> str:
    """The form token that goes with a pre-session form cookie."""
    return csrf.pre_session_token(request.app.state.keys.key, form_cookie)


def check_pre_session_token(request: Request, given: str | None) -> None:
    """Refuse a sign-in or first-run form whose token does not match its form cookie."""
    keys: ServerKeys = request.app.state.keys
    cookie = keys.forms.unsign(request.cookies.get(FORM_COOKIE), max_age_seconds=FORM_COOKIE_SECONDS)
    if cookie is None or not csrf.accepted(csrf.pre_session_token(keys.key, cookie), given):
        raise FormTokenRefused("this form has expired or did not come from this server; reload the page and try again")


def _is_plain_form(request: Request) -> bool:
    """A urlencoded form, whose token field is read here; multipart bodies are uploads, checked as they stream."""
    return request.headers.get("content-type", "").startswith("application/x-www-form-urlencoded")
