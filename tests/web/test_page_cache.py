"""Cached pages are never stale: any change to a case shows on its next page view."""

from __future__ import annotations

from fastapi.responses import HTMLResponse
from fastapi.testclient import TestClient

from app.web.page_cache import PageCache
from tests.web.conftest import Reviewed


def test_a_saved_note_shows_on_the_next_view_of_a_cached_checklist(client: TestClient, reviewed: Reviewed) -> None:
    path = f"{reviewed.refit}/checklist"
    first = client.get(path).text
    assert client.get(path).text == first
    item_id = client.get(f"/api/v1{path}").json()["sections"][0]["items"][0]["id"]

    client.put(f"/api/v1{reviewed.refit}/judgements/{item_id}", json={"standing": None, "note": "Seen after caching."})

    assert "Seen after caching.</textarea>" in client.get(path).text


def test_a_new_refit_shows_on_the_cached_case_page(client: TestClient, reviewed: Reviewed) -> None:
    assert f"Refit {reviewed.refit_id + 1}" not in client.get(reviewed.case).text
    client.post(f"/api/v1/cases/{reviewed.case_id}/refits", json={"claim_id": reviewed.claim_id, "dataset_id": reviewed.dataset_id})
    assert f"Refit {reviewed.refit_id + 1}" in client.get(reviewed.case).text


def test_a_deleted_case_is_never_served_from_the_cache(client: TestClient, reviewed: Reviewed) -> None:
    for path in (reviewed.case, reviewed.refit, f"{reviewed.refit}/checklist"):
        assert client.get(path).status_code == 200
    client.delete(f"/api/v1/cases/{reviewed.case_id}")
    for path in (reviewed.case, reviewed.refit, f"{reviewed.refit}/checklist"):
        assert client.get(path).status_code == 404


def test_only_successful_pages_are_kept_and_the_oldest_go_first() -> None:
    cache = PageCache(size=2)
    renders: list[str] = []

    def page(text: str, status: int = 200) -> HTMLResponse:
        renders.append(text)
        return HTMLResponse(text, status_code=status)

    assert cache.get_or_render("failing", lambda: page("oops", 500)).status_code == 500
    cache.get_or_render("failing", lambda: page("oops", 500))
    for key in ("a", "b", "a", "c", "a", "b"):
        cache.get_or_render(key, lambda key=key: page(key))
    assert renders == ["oops", "oops", "a", "b", "c", "b"]


def test_a_cache_of_size_zero_keeps_nothing() -> None:
    cache = PageCache(size=0)
    renders: list[int] = []
    for _ in range(2):
        cache.get_or_render("a", lambda: renders.append(1) or HTMLResponse("a"))
    assert len(renders) == 2
