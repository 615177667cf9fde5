"""The app's route table as a list of endpoints, and a valid request for each (for the access and CSRF tests).

Requests that would destroy what later requests need (deleting or closing a
case, withdrawing access or a link, changing or removing an account, revoking
a token) are aimed at fresh throwaway objects made for that one request.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from fastapi.routing import APIRoute, iter_route_contexts
from starlette.routing import Mount, Route

from app.services import access
from app.settings import Settings
from app.web.app import create_app
from tests.security.conftest import CaseIds, Shared

FRESH_CASE = {"delete_case_form", "api_delete_case", "close_case_form", "api_close_case"}
"""Routes whose success would spoil the shared cases: they get a new case of their own."""


@dataclass(frozen=True)
class Endpoint:
    """One method of one route of the app."""

    name: str
    method: str
    path: str

    @property
    def is_api(self) -> bool:
        return self.path.startswith("/api/")


def endpoints() -> list[Endpoint]:
    """Every method of every route in the app's route table, included routers flattened (the static files aside)."""
    app = create_app(Settings(data_dir=Path("unused")))
    found = []
    for route in iter_route_contexts(app.routes):
        if isinstance(route.original_route, Mount):
            assert route.path == "/static", f"an unexpected mounted app at {route.path}"
            continue
        assert isinstance(route.original_route, (APIRoute, Route)), route
        for method in sorted(route.methods or ()):
            if method != "HEAD":
                found.append(Endpoint(name=route.name, method=method, path=route.path))
    return found


ENDPOINTS = endpoints()


def request_for(shared: Shared, endpoint: Endpoint, principal: str, which: str) -> dict[str, Any]:
    """Method, URL and a valid body for one cell of the matrix (fresh objects where success destroys)."""
    ids = shared.own if which == "own" else shared.other
    name = endpoint.name
    user = "referee" if principal == "referee token" else principal
    params: dict[str, Callable[[], Any]] = {
        "case_id": lambda: shared.fresh_case(own=which == "own") if name in FRESH_CASE else ids.case_id,
        "dataset_id": lambda: ids.dataset_id,
        "claim_id": lambda: ids.claim_id,
        "refit_id": lambda: ids.refit_id,
        "item_id": lambda: ids.item_id,
        "format_name": lambda: "markdown",
        "figure": lambda: "estimates",
        "key": lambda: shared.link_key,
        "step": lambda: 0,
        "user_id": lambda: _user_param(shared, name, ids),
        "link_id": lambda: shared.fresh_link(ids, opener=user),
        "token_id": lambda: shared.fresh_token(user) if user != "anonymous" else 1,
    }
    path = endpoint.path.format(**{key: make() for key, make in params.items() if "{" + key + "}" in endpoint.path})
    return {"method": endpoint.method, "url": path, **_body(shared, name, ids)}


def _user_param(shared: Shared, name: str, ids: CaseIds) -> int:
    """Access routes name the bystander (given access first when it is to be withdrawn); account routes a fresh account."""
    if name in ("withdraw_access_form", "api_withdraw_access"):
        access.grant_access(shared.ctx, case_id=ids.case_id, user_id=shared.bystander_id)
        return shared.bystander_id
    if name == "api_grant_access":
        return shared.bystander_id
    return shared.fresh_user()


def _body(shared: Shared, name: str, ids: CaseIds) -> dict[str, Any]:
    claim = {"dataset_id": ids.dataset_id, "spec": shared.spec}
    bodies: dict[str, dict[str, Any]] = {
        "api_create_case": {"json": {"title": "Matrix case"}},
        "api_check_claim": {"json": claim},
        "api_create_claim": {"json": claim},
        "api_revise_claim": {"json": {**claim, "change_note": "matrix"}},
        "api_start_refit": {"json": {"claim_id": ids.claim_id, "dataset_id": ids.dataset_id}},
        "api_save_judgement": {"json": {"standing": None, "note": "matrix"}},
        "api_open_session_link": {"json": {"hours": 1}},
        "api_upload_dataset": {"files": {"file": ("matrix.csv", shared.csv, "text/csv")}},
        "upload_form": {"files": {"file": ("matrix.csv", shared.csv, "text/csv")}},
        "create_case_form": {"data": {"title": "Matrix case"}},
        "start_refit_form": {"data": {"claim_id": ids.claim_id, "dataset_id": ids.dataset_id}},
        "judgement_form": {"data": {"standing": "", "note": "matrix"}},
        "grant_access_form": {"data": {"user_id": shared.bystander_id}},
        "open_link_form": {"data": {"hours": 1}},
        "create_claim_form": {"data": {"dataset_id": ids.dataset_id}},
        "revise_claim_form": {"data": {"dataset_id": ids.dataset_id}},
        "check_claim_form": {"data": {"dataset_id": ids.dataset_id}},
        "add_person_form": {"data": {"name": shared.unique("added"), "role": "reader", "password": "a long password"}},
        "person_role_form": {"data": {"role": "reader"}},
        "person_password_form": {"data": {"password": "another long password"}},
        "remove_person_form": {"data": {"confirm": "yes"}},
        "password_form": {"data": {"current": "not the password", "new": "x" * 12, "repeat": "x" * 12}},
        "create_token_form": {"data": {"label": "matrix"}},
        "compare_page": {"params": {"before": ids.refit_id, "after": ids.refit_id}},
        "api_compare_refits": {"params": {"before": ids.refit_id, "after": ids.refit_id}},
    }
    return bodies.get(name, {})


