"""Pages that decide who sees a case: access for referees and readers, session links, closing, the case's audit trail."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Depends, Form, Request
from fastapi.responses import HTMLResponse, Response

from app.services import access, audit, lifecycle, session_links
from app.services.context import ServiceContext
from app.web.identity import services
from app.web.params import FormRowId, RowId
from app.web.rendering import render, see_other

router = APIRouter(include_in_schema=False)
Services = Annotated[ServiceContext, Depends(services)]


def _case_section(request: Request, case_id: RowId, section: str) -> str:
    return f"{request.app.url_path_for('case_page', case_id=str(case_id))}#{section}"


@router.post("/cases/{case_id}/access", name="grant_access_form")
def grant_access_form(request: Request, ctx: Services, case_id: RowId, user_id: FormRowId) -> Response:
    access.grant_access(ctx, case_id=case_id, user_id=user_id)
    return see_other(_case_section(request, case_id, "access"))


@router.post("/cases/{case_id}/access/{user_id}/withdraw", name="withdraw_access_form")
def withdraw_access_form(request: Request, ctx: Services, case_id: RowId, user_id: RowId) -> Response:
    access.withdraw_access(ctx, case_id=case_id, user_id=user_id)
    return see_other(_case_section(request, case_id, "access"))


@router.post("/cases/{case_id}/close", name="close_case_form")
def close_case_form(request: Request, ctx: Services, case_id: RowId) -> Response:
    lifecycle.close_case(ctx, case_id=case_id)
    return see_other(_case_section(request, case_id, "state"))


@router.post("/cases/{case_id}/reopen", name="reopen_case_form")
def reopen_case_form(request: Request, ctx: Services, case_id: RowId) -> Response:
    lifecycle.reopen_case(ctx, case_id=case_id)
    return see_other(_case_section(request, case_id, "state"))


@router.get("/cases/{case_id}/audit", name="case_audit_page")
def case_audit_page(request: Request, ctx: Services, case_id: RowId, limit: int = audit.DEFAULT_LIMIT) -> HTMLResponse:
    trail = audit.case_trail(ctx, case_id=case_id, limit=limit)
    twin = str(request.app.url_path_for("api_case_audit", case_id=str(case_id))) + f"?limit={trail.limit}"
    return render(request, "audit.html", json_twin=twin, page=trail)


@router.post("/cases/{case_id}/refits/{refit_id}/links", name="open_link_form")
def open_link_form(
    request: Request,
    ctx: Services,
    case_id: RowId,
    refit_id: RowId,
    hours: Annotated[int, Form()] = 3,
    label: Annotated[str, Form()] = "",
) -> HTMLResponse:
    """The new link is shown on the answer itself, once: its key is not stored and cannot be shown again."""
    opened = session_links.open_link(ctx, case_id=case_id, refit_id=refit_id, hours=hours, label=label)
    follow_path = str(request.app.url_path_for("follow_page", key=opened.key))
    return render(request, "session_link_opened.html", json_twin=None, opened=opened, follow_path=follow_path)


@router.post("/cases/{case_id}/links/{link_id}/withdraw", name="withdraw_link_form")
def withdraw_link_form(request: Request, ctx: Services, case_id: RowId, link_id: RowId) -> Response:
    session_links.withdraw_link(ctx, case_id=case_id, link_id=link_id)
    return see_other(_case_section(request, case_id, "links"))
