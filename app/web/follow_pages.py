"""What a journal club sees through a session link: results, checklist, and a presentation in large type.

No sign-in: the link's key is the permission, checked (open, not expired, not
withdrawn) on every request. The pages are read-only: no forms, no data
profile, no data file, no report export, no link into the case. Their JSON
twin is ``/api/v1/follow/{key}``.
"""

from __future__ import annotations

from typing import Literal

from fastapi import APIRouter, Request
from fastapi.responses import HTMLResponse, Response

from app.services import session_links
from app.services.context import ServiceContext
from app.services.errors import NotFound
from app.services.views import ChecklistSection, FollowView
from app.web import figures, presenters
from app.web.rendering import link_page_cached, render

router = APIRouter(include_in_schema=False)


def _server(request: Request) -> ServiceContext:
    return request.app.state.services


def _twin(request: Request, key: str) -> str:
    return str(request.app.url_path_for("api_follow", key=key))


@router.get("/follow/{key}", name="follow_page")
def follow_page(request: Request, key: str) -> Response:
    ctx = _server(request)

    def build() -> HTMLResponse:
        view = session_links.follow(ctx, key=key)
        return render(
            request,
            "follow_results.html",
            json_twin=_twin(request, key),
            page=view,
            key=key,
            **presenters.results_body(view.findings),
        )

    return link_page_cached(request, ctx, key=key, render=build)


@router.get("/follow/{key}/checklist", name="follow_checklist_page")
def follow_checklist_page(request: Request, key: str) -> Response:
    ctx = _server(request)

    def build() -> HTMLResponse:
        view = session_links.follow(ctx, key=key)
        return render(request, "follow_checklist.html", json_twin=_twin(request, key), page=view, key=key)

    return link_page_cached(request, ctx, key=key, render=build)


@router.get("/follow/{key}/present/{step}", name="follow_present_page")
def follow_present_page(request: Request, key: str, step: int) -> Response:
    """Step 0 is the claim and its verdict; each further step one checklist section, in large type."""
    ctx = _server(request)

    def build() -> HTMLResponse:
        view = session_links.follow(ctx, key=key)
        sections = presentation_sections(view)
        if not 0 <= step <= len(sections):
            raise NotFound(f"this presentation has steps 0 to {len(sections)}")
        return render(
            request,
            "follow_present.html",
            json_twin=_twin(request, key),
            page=view,
            key=key,
            step=step,
            steps=len(sections) + 1,
            section=sections[step - 1] if step else None,
        )

    return link_page_cached(request, ctx, key=key, render=build)


@router.get("/follow/{key}/figures/{figure}.svg", name="follow_figure")
def follow_figure(request: Request, key: str, figure: Literal["estimates", "first-stage"]) -> Response:
    ctx = _server(request)
    link = session_links.check_link(ctx, key=key)
    svg = request.app.state.figures.get_or_render(
        (link.refit_id, figure), lambda: figures.figure_svg(session_links.follow(ctx, key=key).findings, figure=figure)
    )
    if svg is None:
        raise NotFound(f"this refit has no {figure} figure")
    return Response(svg, media_type="image/svg+xml")


def presentation_sections(view: FollowView) -> list[ChecklistSection]:
    """The checklist sections that hold items, in order: one presentation step each."""
    return [section for section in view.sections if section.items]
