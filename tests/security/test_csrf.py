"""Form tokens: every state-changing request made with the sign-in cookie is refused without this session's token.

Generated from the route table like the access matrix: every POST, PUT and
DELETE route, sent by a signed-in steward (who may do everything) without the
token, or with another session's token, must answer 403 and change nothing:
not a row in any table, not a file in the store. Requests made with an API
token carry no ambient credential and need no form token.
"""

from __future__ import annotations

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import func, select

from app.store.models import Base
from tests.accounts import form_token, sign_in
from tests.security.conftest import Shared
from tests.security.routes import ENDPOINTS, Endpoint, request_for

PRE_SESSION_FORMS = {"sign_in_form", "first_run_form"}
"""Forms shown before sign-in carry their own token (tested below)."""

CHANGING = [
    endpoint
    for endpoint in ENDPOINTS
    if endpoint.method in ("POST", "PUT", "DELETE", "PATCH") and endpoint.name not in PRE_SESSION_FORMS
]


def snapshot(shared: Shared) -> dict[str, int]:
    """Rows in every table and files in the store."""
    counts: dict[str, int] = {}
    with shared.ctx.reading() as session:
        for table in Base.metadata.sorted_tables:
            counts[table.name] = session.scalar(select(func.count()).select_from(table)) or 0
    counts["stored files"] = sum(1 for path in shared.ctx.settings.files_dir.glob("??/*") if path.is_file())
    return counts


@pytest.fixture(scope="module")
def tokenless(shared: Shared) -> TestClient:
    """A steward's browser that sends no form token by itself."""
    client = TestClient(shared.app)
    sign_in(client, "steward", send_token=False)
    return client


@pytest.mark.parametrize("endpoint", CHANGING, ids=lambda endpoint: f"{endpoint.method} {endpoint.path}")
def test_a_change_without_the_form_token_is_refused_and_changes_nothing(
    shared: Shared, tokenless: TestClient, endpoint: Endpoint
) -> None:
    request = request_for(shared, endpoint, "steward", "own")
    before = snapshot(shared)

    response = tokenless.request(follow_redirects=False, **request)

    assert response.status_code == 403, response.text[:300]
    if endpoint.is_api:
        assert response.json()["error"]["code"] == "form_token_refused"
    else:
        assert "reload the page" in response.text
    assert snapshot(shared) == before


@pytest.mark.parametrize("endpoint", CHANGING, ids=lambda endpoint: f"{endpoint.method} {endpoint.path}")
def test_another_sessions_token_is_refused(shared: Shared, tokenless: TestClient, endpoint: Endpoint) -> None:
    other_session = TestClient(shared.app)
    stolen = sign_in(other_session, "steward", send_token=False)
    request = request_for(shared, endpoint, "steward", "own")
    headers = {"X-CSRF-Token": stolen}

    response = tokenless.request(follow_redirects=False, headers=headers, **request)

    assert response.status_code == 403


def test_the_token_in_the_form_field_is_accepted(shared: Shared, tokenless: TestClient) -> None:
    token = form_token(tokenless.get("/account").text)
    response = tokenless.post("/cases", data={"csrf_token": token, "title": "Field token"}, follow_redirects=False)
    assert response.status_code == 303


def test_an_upload_carries_its_token_before_the_file(shared: Shared, tokenless: TestClient) -> None:
    """The upload is checked as it streams in: a token after the file comes too late, whatever the file's size."""
    token = form_token(tokenless.get("/account").text)
    path = f"/cases/{shared.own.case_id}/datasets"
    before = snapshot(shared)

    after_the_file = tokenless.post(
        path, files=[("file", ("late.csv", shared.csv, "text/csv")), ("csrf_token", (None, token))], follow_redirects=False
    )
    assert after_the_file.status_code == 403
    assert snapshot(shared) == before

    first = tokenless.post(
        path, files=[("csrf_token", (None, token)), ("file", ("first.csv", shared.csv, "text/csv"))], follow_redirects=False
    )
    assert first.status_code == 303


def test_an_api_token_needs_no_form_token(shared: Shared) -> None:
    client = TestClient(shared.app, headers={"Authorization": f"Bearer {shared.token}"})
    response = client.put(
        f"/api/v1/cases/{shared.own.case_id}/refits/{shared.own.refit_id}/judgements/{shared.own.item_id}",
        json={"standing": None, "note": "scripted"},
    )
    assert response.status_code == 200


def test_the_sign_in_form_needs_the_token_of_its_own_cookie(shared: Shared) -> None:
    browser = TestClient(shared.app)
    page = browser.get("/sign-in")
    attempt = {"name": "steward", "password": "correct horse battery"}

    assert browser.post("/sign-in", data=attempt, follow_redirects=False).status_code == 403
    stranger = TestClient(shared.app)
    foreign = form_token(stranger.get("/sign-in").text)
    assert browser.post("/sign-in", data={**attempt, "csrf_token": foreign}, follow_redirects=False).status_code == 403
    own = form_token(page.text)
    assert browser.post("/sign-in", data={**attempt, "csrf_token": own}, follow_redirects=False).status_code == 303
