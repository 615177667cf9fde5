"""In a real browser: a note the server refuses to save says so beside the item, and the typed text stays.

The steward opens the checklist of a reviewed case and types a note, which is
saved as it is typed. Meanwhile the case is closed (as another person would,
from another tab); the next words typed are refused with 409, and the page
says "Not saved" with the server's reason, in the item's live status, while
the note keeps every word typed.
"""

from __future__ import annotations

from typing import Any

import pytest

from tests.browser.conftest import ARTIFACTS, Server, refit_walking_demo

pytestmark = pytest.mark.browser


def reviewed_case(page: Any, base: str) -> tuple[int, int, str]:
    """A case with the walking demo refitted, made through the API with the page's session and form token."""
    page.goto(base + "/account")
    headers = {"X-CSRF-Token": page.locator('input[name="csrf_token"]').first.input_value()}
    case, refit = refit_walking_demo(page.context.request, base, headers, "Refused saves")
    return case, refit, headers["X-CSRF-Token"]


def test_a_refused_save_is_shown_beside_the_item_and_the_note_is_kept(
    browser: Any, server: Server, steward: dict[str, Any]
) -> None:
    context = browser.new_context(storage_state=steward)
    page = context.new_page()
    case, refit, token = reviewed_case(page, server.base)
    page.goto(f"{server.base}/cases/{case}/refits/{refit}/checklist")
    form = page.locator("form.judgement").first
    note = form.get_by_label("Your note")
    status = form.get_by_role("status")

    note.fill("Ask for the first stage by region.")
    status.get_by_text("Saved by steward").wait_for()

    closed = page.context.request.post(f"{server.base}/api/v1/cases/{case}/close", headers={"X-CSRF-Token": token})
    assert closed.status == 200
    note.press_sequentially(" And the sample sizes.")

    status.get_by_text(f"Not saved: case {case} is closed").wait_for()
    assert note.input_value() == "Ask for the first stage by region. And the sample sizes."
    folder = ARTIFACTS / "refused-save"
    folder.mkdir(parents=True, exist_ok=True)
    form.screenshot(path=str(folder / "01-not-saved.png"))
    context.close()
