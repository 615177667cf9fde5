"""Journal-club session links: results and checklist read-only, no data, no download, no editing; expiring and revocable."""

from __future__ import annotations

import re
from datetime import timedelta

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import update

from app.auth.actors import Actor
from app.auth.roles import Role
from app.services import access, cases, checklists, session_links
from app.services.errors import NotFound, NotReady
from app.store.models import Refit, SessionLink, utc_now
from tests.accounts import add_account
from tests.security.conftest import Shared


@pytest.fixture(scope="module")
def club(shared: Shared) -> TestClient:
    """A journal-club member's browser: no account, no cookie."""
    return TestClient(shared.app)


def pages_of(key: str, steps: int = 1) -> list[str]:
    return [f"/follow/{key}", f"/follow/{key}/checklist"] + [f"/follow/{key}/present/{step}" for step in range(steps)]


def test_a_link_shows_the_results_checklist_and_notes_without_a_sign_in(shared: Shared, club: TestClient) -> None:
    checklists.save_judgement(
        shared.ctx,
        case_id=shared.own.case_id,
        refit_id=shared.own.refit_id,
        item_id=shared.own.item_id,
        standing="concern",
        note="Ask for the pre-registration.",
    )
    key = session_links.open_link(shared.ctx, case_id=shared.own.case_id, refit_id=shared.own.refit_id, hours=2).key

    results = club.get(f"/follow/{key}")
    checklist = club.get(f"/follow/{key}/checklist")

    assert results.status_code == checklist.status_code == 200
    assert "Estimates" in results.text and "Diagnostics" in results.text
    assert "Ask for the pre-registration." in checklist.text
    assert "A flag is a reason to ask the authors" in checklist.text
    assert club.get(f"/follow/{key}/figures/estimates.svg").headers["content-type"].startswith("image/svg+xml")


def test_a_link_offers_no_form_no_download_no_data_and_no_way_into_the_case(shared: Shared, club: TestClient) -> None:
    key = session_links.open_link(shared.ctx, case_id=shared.own.case_id, refit_id=shared.own.refit_id, hours=2).key
    for path in pages_of(key, steps=3):
        text = club.get(path).text
        assert "<form" not in text and "<textarea" not in text and "<select" not in text, path
        for forbidden in ("/reports/", "/datasets/", "/cases/", "/api/v1/cases", "download"):
            assert forbidden not in text, (path, forbidden)
    twin = club.get(f"/api/v1/follow/{key}").json()
    assert "profile" not in twin and "datasets" not in twin
    assert set(twin["link"]) == {"label", "expires_at"}  # not who opened it


def test_the_presentation_steps_through_one_section_at_a_time(shared: Shared, club: TestClient) -> None:
    key = session_links.open_link(shared.ctx, case_id=shared.own.case_id, refit_id=shared.own.refit_id, hours=2).key
    sections = [section for section in club.get(f"/api/v1/follow/{key}").json()["sections"] if section["items"]]

    overview = club.get(f"/follow/{key}/present/0").text
    assert 'class="presentation"' in overview and f"Step 1 of {len(sections) + 1}" in overview
    assert 'rel="next"' in overview and 'rel="prev"' not in overview
    for step, section in enumerate(sections, start=1):
        page = club.get(f"/follow/{key}/present/{step}").text
        assert re.search(rf"<h1>\s*{re.escape(section['name'])}\s*</h1>", page), step
        assert page.count('class="present-item') == len(section["items"])
        assert 'rel="prev"' in page
    assert club.get(f"/follow/{key}/present/{len(sections) + 1}").status_code == 404


def test_a_withdrawn_link_stops_at_once_even_for_pages_already_seen(shared: Shared, club: TestClient) -> None:
    opened = session_links.open_link(shared.ctx, case_id=shared.own.case_id, refit_id=shared.own.refit_id, hours=2)
    for path in pages_of(opened.key):
        assert club.get(path).status_code == 200
    session_links.withdraw_link(shared.ctx, case_id=shared.own.case_id, link_id=opened.link.id)
    for path in [*pages_of(opened.key), f"/follow/{opened.key}/figures/estimates.svg", f"/api/v1/follow/{opened.key}"]:
        response = club.get(path)
        assert response.status_code == 404, path
        assert "expired or been withdrawn" in response.text


def test_an_expired_link_is_refused(shared: Shared, club: TestClient) -> None:
    opened = session_links.open_link(shared.ctx, case_id=shared.own.case_id, refit_id=shared.own.refit_id, hours=1)
    assert club.get(f"/follow/{opened.key}").status_code == 200
    with shared.ctx.transaction() as session:
        session.execute(
            update(SessionLink).where(SessionLink.id == opened.link.id).values(expires_at=utc_now() - timedelta(seconds=1))
        )
    assert club.get(f"/follow/{opened.key}").status_code == 404
    assert club.get(f"/follow/{opened.key}/checklist").status_code == 404


def test_a_guessed_key_opens_nothing(shared: Shared, club: TestClient) -> None:
    real = session_links.open_link(shared.ctx, case_id=shared.own.case_id, refit_id=shared.own.refit_id, hours=1).key
    assert len(real) >= 43
    for guess in (real[:-1], real[:-1] + ("A" if real[-1] != "A" else "B"), "1", "../../etc/passwd", "%00"):
        assert club.get(f"/follow/{guess}").status_code == 404, guess


def test_links_last_no_longer_than_the_server_allows(shared: Shared) -> None:
    limit = shared.ctx.settings.session_link_max_hours
    answer = shared.clients["referee"].post(
        f"/api/v1/cases/{shared.own.case_id}/refits/{shared.own.refit_id}/links", json={"hours": limit + 1}
    )
    assert answer.status_code == 422 and answer.json()["error"]["problems"][0]["field"] == "hours"


def test_a_link_needs_a_finished_refit(shared: Shared) -> None:
    with shared.ctx.transaction() as session:
        running = Refit(
            case_id=shared.own.case_id,
            claim_id=shared.own.claim_id,
            dataset_id=shared.own.dataset_id,
            state="running",
            dataset_sha256="0" * 64,
            claim_sha256="0" * 64,
        )
        session.add(running)
        session.flush()
        refit_id = running.id
    with pytest.raises(NotReady):
        session_links.open_link(shared.ctx, case_id=shared.own.case_id, refit_id=refit_id, hours=1)
    with shared.ctx.transaction() as session:
        session.delete(session.get(Refit, refit_id))


def test_the_case_page_lists_links_with_their_state_but_never_their_key(shared: Shared) -> None:
    opened = session_links.open_link(
        shared.as_user("referee"), case_id=shared.own.case_id, refit_id=shared.own.refit_id, hours=1, label="Methods club"
    )
    page = shared.clients["referee"].get(f"/cases/{shared.own.case_id}").text
    assert f"Link {opened.link.id}: Methods club" in page
    assert opened.key not in page


def test_a_referee_sees_and_withdraws_only_the_links_they_opened(shared: Shared) -> None:
    colleague = shared.unique("colleague")
    colleague_id = add_account(shared.ctx, colleague, "referee")
    access.grant_access(shared.ctx, case_id=shared.own.case_id, user_id=colleague_id)
    as_colleague = shared.ctx.acting_as(Actor(name=colleague, kind="user", role=Role.REFEREE, user_id=colleague_id))
    theirs = session_links.open_link(as_colleague, case_id=shared.own.case_id, refit_id=shared.own.refit_id, hours=1)
    mine = session_links.open_link(shared.as_user("referee"), case_id=shared.own.case_id, refit_id=shared.own.refit_id, hours=1)

    seen = {link.id for link in cases.get_case(shared.as_user("referee"), case_id=shared.own.case_id).links}

    assert mine.link.id in seen and theirs.link.id not in seen
    assert colleague not in shared.clients["referee"].get(f"/cases/{shared.own.case_id}").text
    with pytest.raises(NotFound):
        session_links.withdraw_link(shared.as_user("referee"), case_id=shared.own.case_id, link_id=theirs.link.id)
    coordinator_sees = {link.id for link in cases.get_case(shared.as_user("coordinator"), case_id=shared.own.case_id).links}
    assert {mine.link.id, theirs.link.id} <= coordinator_sees
