"""Small helpers shared by the page routes: rendering, cached pages, redirects, form reading."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from fastapi import Request
from fastapi.responses import HTMLResponse, RedirectResponse, Response
from starlette.datastructures import FormData

from app.services import cases, session_links
from app.services.context import ServiceContext
from app.services.datasets import format_bytes
from app.services.errors import FileTooLarge

UPLOAD_OVERHEAD_BYTES = 64 * 1024
"""Room for the multipart envelope and the other form fields around an uploaded file."""


def render(
    request: Request,
    template: str,
    *,
    json_twin: str | None,
    status_code: int = 200,
    **context: Any,
) -> HTMLResponse:
    """Render a page; ``json_twin`` is the path of the same result as JSON (linked from the page)."""
    templates = request.app.state.templates
    return templates.TemplateResponse(
        request, template, {"json_twin": json_twin, **context}, status_code=status_code
    )


def case_page_cached(request: Request, ctx: ServiceContext, *, case_id: int, render: Callable[[], Response]) -> Response:
    """A page of the case from the page cache, or freshly rendered when the case changed since.

    Reading the revision also checks the actor's access and answers
    :class:`NotFound` for a case that does not exist (or no longer does, or that
    the actor may not see) before any cached page could be served. Pages are
    kept per web session and role: they carry the session's form token and
    offer what the role may do.
    """
    revision = cases.case_revision(ctx, case_id=case_id)
    key = (request.url.path, request.url.query, revision, ctx.actor.session_id, ctx.actor.role)
    return request.app.state.pages.get_or_render(key, render)


def link_page_cached(request: Request, ctx: ServiceContext, *, key: str, render: Callable[[], Response]) -> Response:
    """A page of a session link from the page cache (shared by everyone following the link), or freshly rendered.

    The link is checked (open, not expired, not withdrawn) before any cached page could be served.
    """
    link = session_links.check_link(ctx, key=key)
    return request.app.state.pages.get_or_render((request.url.path, request.url.query, link.revision), render)


def see_other(path: str) -> RedirectResponse:
    """Redirect after a successful form post (POST, then GET)."""
    return RedirectResponse(path, status_code=303)


def is_htmx(request: Request) -> bool:
    """Whether the request comes from htmx (which then wants a fragment, not a page)."""
    return request.headers.get("HX-Request") == "true"


def check_declared_size(request: Request, *, limit: int) -> None:
    """Refuse an upload whose declared size is over the limit before reading any of it."""
    declared = request.headers.get("content-length")
    if declared is not None and declared.isdigit() and int(declared) > limit + UPLOAD_OVERHEAD_BYTES:
        raise FileTooLarge(
            f"the file is larger than this server accepts ({format_bytes(limit)}); nothing was stored"
        )


def form_lists(form: FormData) -> dict[str, list[str]]:
    """A form as a mapping of each field name to all its text values (files are left out)."""
    return {key: [value for value in form.getlist(key) if isinstance(value, str)] for key in form.keys()}
