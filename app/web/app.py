"""The app factory: ``create_app(settings)`` builds a server; nothing is created at import time."""

from __future__ import annotations

import logging
from collections.abc import AsyncIterator
from contextlib import asynccontextmanager
from importlib import metadata
from pathlib import Path

from fastapi import FastAPI
from fastapi.staticfiles import StaticFiles
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from app.auth.keys import new_secret
from app.services import refits, sign_in
from app.services.context import ServiceContext
from app.settings import Settings
from app.web import api, follow_pages, pages, people_pages, sharing_pages
from app.web.errors import install_error_handlers
from app.web.identity import FirstRunKey, ServerKeys
from app.web.figures import SvgCache
from app.web.page_cache import PageCache
from app.web.templating import RoutePaths, build_templates

STATIC_DIR = Path(__file__).resolve().parents[2] / "static"
STATIC_PREFIX = "/static/"

log = logging.getLogger(__name__)

CONTENT_SECURITY_POLICY = (
    "default-src 'self'; script-src 'self'; style-src 'self'; img-src 'self' data:; "
    "connect-src 'self'; font-src 'self'; object-src 'none'; form-action 'self'; frame-ancestors 'none'; "
    "base-uri 'none'"
)
"""Responses may load nothing from outside this server (replication data is confidential), nor be framed."""

PERMISSIONS_POLICY = "camera=(), microphone=(), geolocation=(), payment=(), usb=(), interest-cohort=()"

FIRST_RUN_PATH = "/welcome/"


def create_app(settings: Settings, *, first_run_key: str | None = None) -> FastAPI:
    """A SecondStage server for ``settings``.

    The database, file store and refit worker are opened when the server starts
    (the ASGI lifespan) and closed when it stops; refits left unfinished by a
    previous run are queued again.

    While the server has no account, the first-run page at
    ``/welcome/<first_run_key>`` creates its first steward. ``secondstage
    serve`` passes the key it prints; without one, a key is made here and
    logged once.
    """

    @asynccontextmanager
    async def lifespan(app: FastAPI) -> AsyncIterator[None]:
        context = ServiceContext.open(settings)
        app.state.services = context
        app.state.keys = ServerKeys.of(settings)
        app.state.first_run = None
        if sign_in.first_run_needed(context):
            key = first_run_key or new_secret()
            app.state.first_run = FirstRunKey(key)
            if first_run_key is None:
                log.warning("No account exists yet: open %s%s to create the first steward", FIRST_RUN_PATH, key)
        refits.resume_unfinished(context)
        try:
            yield
        finally:
            context.close()

    app = FastAPI(
        title="SecondStage",
        summary="Re-check a manuscript's causal claim: refit it, run the diagnostics, review the checklist.",
        version=_version(),
        lifespan=lifespan,
        docs_url=None,
        redoc_url=None,
        openapi_url="/api/v1/openapi.json",
    )
    app.state.settings = settings
    app.state.templates = build_templates()
    app.state.figures = SvgCache()
    app.state.pages = PageCache(size=settings.page_cache_entries)
    app.mount("/static", StaticFiles(directory=STATIC_DIR), name="static")
    app.include_router(api.router)
    app.include_router(pages.router)
    app.include_router(sharing_pages.router)
    app.include_router(people_pages.router)
    app.include_router(follow_pages.router)
    install_error_handlers(app)
    app.add_middleware(SecurityHeaders, https=settings.secure_cookies)
    app.state.paths = RoutePaths(app)
    return app


class SecurityHeaders:
    """Adds a strict content security policy and hardening headers to every response.

    Pages, figures and API answers are never stored by the browser or a proxy
    (``no-store``): they hold confidential manuscript data, and a lab computer
    is shared. Static files may be. A server reached through HTTPS (``https``)
    also tells browsers to use nothing else.
    """

    def __init__(self, app: ASGIApp, *, https: bool = False) -> None:
        self.app = app
        self.https = https

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return

        async def send_with_headers(message: Message) -> None:
            if message["type"] == "http.response.start":
                headers = list(message.get("headers", []))
                present = {name for name, _ in headers}
                headers += [
                    (b"content-security-policy", CONTENT_SECURITY_POLICY.encode()),
                    (b"x-content-type-options", b"nosniff"),
                    (b"referrer-policy", b"no-referrer"),
                    (b"x-frame-options", b"DENY"),
                    (b"cross-origin-opener-policy", b"same-origin"),
                    (b"cross-origin-resource-policy", b"same-origin"),
                    (b"permissions-policy", PERMISSIONS_POLICY.encode()),
                ]
                if not scope["path"].startswith(STATIC_PREFIX) and b"cache-control" not in present:
                    headers.append((b"cache-control", b"no-store"))
                if self.https:
                    headers.append((b"strict-transport-security", b"max-age=31536000"))
                message["headers"] = headers
            await send(message)

        await self.app(scope, receive, send_with_headers)


def _version() -> str:
    try:
        return metadata.version("secondstage")
    except metadata.PackageNotFoundError:
        return "unknown"
