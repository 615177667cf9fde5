"""The app factory: ``create_app(settings)`` builds a server; nothing is created at import time."""

from __future__ import annotations

from collections.abc import AsyncIterator
from contextlib import asynccontextmanager
from importlib import metadata
from pathlib import Path

from fastapi import FastAPI
from fastapi.staticfiles import StaticFiles
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from app.services import refits
from app.services.context import ServiceContext
from app.settings import Settings
from app.web import api, pages
from app.web.errors import install_error_handlers
from app.web.figures import SvgCache
from app.web.page_cache import PageCache
from app.web.templating import RoutePaths, build_templates

STATIC_DIR = Path(__file__).resolve().parents[2] / "static"

CONTENT_SECURITY_POLICY = (
    "default-src 'self'; script-src 'self'; style-src 'self'; img-src 'self' data:; "
    "connect-src 'self'; font-src 'self'; form-action 'self'; frame-ancestors 'none'; base-uri 'none'"
)
"""Pages may load nothing from outside this server: replication data is confidential."""


def create_app(settings: Settings) -> FastAPI:
    """A SecondStage server for ``settings``.

    The database, file store and refit worker are opened when the server starts
    (the ASGI lifespan) and closed when it stops; refits left unfinished by a
    previous run are queued again.
    """

    @asynccontextmanager
    async def lifespan(app: FastAPI) -> AsyncIterator[None]:
        context = ServiceContext.open(settings)
        app.state.services = context
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
    install_error_handlers(app)
    app.add_middleware(SecurityHeaders)
    app.state.paths = RoutePaths(app)
    return app


class SecurityHeaders:
    """Adds a strict content security policy to pages and hardening headers to every response."""

    def __init__(self, app: ASGIApp) -> None:
        self.app = app

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return

        async def send_with_headers(message: Message) -> None:
            if message["type"] == "http.response.start":
                headers = list(message.get("headers", []))
                content_type = next((value for name, value in headers if name == b"content-type"), b"")
                headers += [
                    (b"x-content-type-options", b"nosniff"),
                    (b"referrer-policy", b"no-referrer"),
                    (b"x-frame-options", b"DENY"),
                ]
                if content_type.startswith(b"text/html"):
                    headers.append((b"content-security-policy", CONTENT_SECURITY_POLICY.encode()))
                    headers.append((b"cache-control", b"no-store"))
                message["headers"] = headers
            await send(message)

        await self.app(scope, receive, send_with_headers)


def _version() -> str:
    try:
        return metadata.version("secondstage")
    except metadata.PackageNotFoundError:
        return "unknown"
