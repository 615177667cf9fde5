"""Saving a judgement from the checklist page and the API: authors shown, stale saves and refusals answered clearly."""

from __future__ import annotations

from datetime import datetime
from urllib.parse import quote

import pytest
from fastapi.testclient import TestClient

from app.web.templating import dom_id
from tests.web.conftest import Reviewed


@pytest.fixture
def item_id(client: TestClient, reviewed: Reviewed) -> str:
    checklist = client.get(f"/api/v1{reviewed.refit}/checklist").json()
    return str(checklist["sections"][0]["items"][0]["id"])


def iso(json_time: str) -> str:
    """A time from the JSON API as the page writes it (Python's ISO form)."""
    return datetime.fromisoformat(json_time).isoformat()


def api_save(client: TestClient, reviewed: Reviewed, item_id: str, **body: object) -> object:
    return client.put(f"/api/v1{reviewed.refit}/judgements/{item_id}", json=body)


def form_save(client: TestClient, reviewed: Reviewed, item_id: str, *, htmx: bool, **fields: str) -> object:
    headers = {"HX-Request": "true"} if htmx else {}
    return client.post(f"{reviewed.refit}/checklist/{item_id}", data=fields, headers=headers, follow_redirects=False)


def test_the_api_refuses_a_save_from_an_older_version(client: TestClient, reviewed: Reviewed, item_id: str) -> None:
    first = api_save(client, reviewed, item_id, note="First reading.", loaded_at=None)
    assert first.status_code == 200
    saved_at = first.json()["item"]["saved_at"]

    stale = api_save(client, reviewed, item_id, note="A reading from an old page.", loaded_at=None)

    assert stale.status_code == 409
    error = stale.json()["error"]
    assert error["code"] == "changed_meanwhile"
    assert error["message"].startswith("steward changed this note at ")
    assert error["message"].endswith("; reload to see it, your change was not saved")
    checklist = client.get(f"/api/v1{reviewed.refit}/checklist").json()
    item = checklist["sections"][0]["items"][0]
    assert item["judgement"]["note"] == "First reading."
    assert (item["saved_by"], item["saved_at"]) == ("steward", saved_at)
    assert api_save(client, reviewed, item_id, note="Revised.", loaded_at=saved_at).status_code == 200


def test_the_form_refuses_a_stale_save_and_keeps_nothing(client: TestClient, reviewed: Reviewed, item_id: str) -> None:
    assert form_save(client, reviewed, item_id, htmx=False, note="From the first tab.", loaded_at="none").status_code == 303

    stale = form_save(client, reviewed, item_id, htmx=False, note="From the second tab.", loaded_at="none")

    assert stale.status_code == 409
    assert "reload to see it" in stale.text
    page = client.get(f"{reviewed.refit}/checklist").text
    assert "From the first tab." in page and "From the second tab." not in page


def test_an_htmx_save_answers_with_the_new_version_for_the_form(
    client: TestClient, reviewed: Reviewed, item_id: str
) -> None:
    key = dom_id(item_id)
    saved = form_save(client, reviewed, item_id, htmx=True, note="Typed.", loaded_at="none")
    assert saved.status_code == 200
    saved_at = client.get(f"/api/v1{reviewed.refit}/checklist").json()["sections"][0]["items"][0]["saved_at"]
    assert f'id="loaded-{key}" value="{iso(saved_at)}" hx-swap-oob="true"' in saved.text
    assert "Saved by steward, " in saved.text

    again = form_save(client, reviewed, item_id, htmx=True, note="Typed more.", loaded_at=saved_at)
    assert again.status_code == 200


def test_a_refused_htmx_save_gets_its_reason_as_plain_text(client: TestClient, reviewed: Reviewed, item_id: str) -> None:
    form_save(client, reviewed, item_id, htmx=True, note="First.", loaded_at="none")

    stale = form_save(client, reviewed, item_id, htmx=True, note="Second.", loaded_at="none")

    assert stale.status_code == 409
    assert stale.headers["content-type"].startswith("text/plain")
    assert stale.text.startswith("steward changed this note at ")


def test_a_save_on_a_closed_case_gets_its_reason_as_plain_text(
    client: TestClient, reviewed: Reviewed, item_id: str
) -> None:
    assert client.post(f"/api/v1/cases/{reviewed.case_id}/close").status_code == 200

    refused = form_save(client, reviewed, item_id, htmx=True, note="Too late.", loaded_at="none")

    assert refused.status_code == 409
    assert refused.text == f"case {reviewed.case_id} is closed, so nothing in it can change; a coordinator can reopen it"


def test_the_checklist_page_names_who_saved_each_note(client: TestClient, reviewed: Reviewed, item_id: str) -> None:
    form_save(client, reviewed, item_id, htmx=False, note="Worth asking.", loaded_at="none")
    item = client.get(f"/api/v1{reviewed.refit}/checklist").json()["sections"][0]["items"][0]

    page = client.get(f"{reviewed.refit}/checklist").text

    stamp = item["saved_at"][:16].replace("T", " ") + " UTC"
    assert f'id="saved-{dom_id(item_id)}" class="saved" >Saved by steward, {stamp}</span>' in page
    assert f'name="loaded_at" id="loaded-{dom_id(item_id)}" value="{iso(item["saved_at"])}"' in page


def test_an_ended_sign_in_sends_an_htmx_save_back_to_the_checklist(
    client: TestClient, reviewed: Reviewed, item_id: str
) -> None:
    client.cookies.clear()
    checklist = f"{reviewed.refit}/checklist"
    headers = {"HX-Request": "true", "HX-Current-URL": f"http://testserver{checklist}"}

    answer = client.post(f"{checklist}/{item_id}", data={"note": "x"}, headers=headers)

    assert answer.status_code == 401
    assert answer.headers["HX-Redirect"] == f"/sign-in?next={quote(checklist, safe='')}"


@pytest.mark.parametrize("current", ["http://elsewhere.example/cases/1", "javascript:alert(1)", "", "http://testserver//evil.example/"])
def test_an_htmx_sign_in_redirect_never_points_off_the_site(
    client: TestClient, reviewed: Reviewed, item_id: str, current: str
) -> None:
    client.cookies.clear()
    headers = {"HX-Request": "true", "HX-Current-URL": current}

    answer = client.post(f"{reviewed.refit}/checklist/{item_id}", data={"note": "x"}, headers=headers)

    assert answer.headers["HX-Redirect"] == "/sign-in"
