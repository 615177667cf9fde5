"""Two people on one server, in a real browser: each sees only the manuscript they were given.

The steward adds an editor (coordinator) and two referees. The editor sets up
two cases through the JSON API with an API token, then gives one referee the
first case on its page. That referee signs in, sees only that case (the other
does not exist for her), annotates its checklist and opens a session link; a
journal-club member follows the link without an account and reads the
checklist and the presentation, with nothing to edit or download.
"""

from __future__ import annotations

import re
from typing import Any

import pytest

from tests.accounts import PASSWORD
from tests.browser.conftest import Server, refit_walking_demo, sign_in

pytestmark = pytest.mark.browser

NOTE = "The lottery instrument looks clean; ask how the walkability index was built."


def add_person(page: Any, name: str, role: str) -> None:
    """Add an account on the People page."""
    form = page.locator("form").filter(has=page.get_by_role("button", name="Add the account"))
    form.get_by_label("Name to sign in with").fill(name)
    form.get_by_label("Role").select_option(label=role)
    form.get_by_label("First password").fill(PASSWORD)
    form.get_by_role("button", name="Add the account").click()
    page.get_by_text("Account added").wait_for()


def api_token(page: Any) -> str:
    """Create an API token on the account page and read it from the one page that shows it."""
    page.get_by_role("link", name=re.compile("editor")).first.click()
    page.get_by_label("What it is for").fill("setting up cases")
    page.get_by_role("button", name="Create a token").click()
    return page.get_by_label(re.compile("Token")).input_value()


def reviewed_case(request: Any, base: str, token: str, title: str) -> int:
    """A case with the walking demo uploaded, its claim entered and refitted, through the API with a token."""
    return refit_walking_demo(request, base, {"Authorization": f"Bearer {token}"}, title)[0]


def test_an_editor_assigns_a_referee_who_sees_only_that_case_and_a_club_follows_read_only(
    browser: Any, server: Server, steward: dict[str, Any], shots: Any
) -> None:
    base = server.base
    outside: list[str] = []

    def watch(context: Any) -> Any:
        page = context.new_page()
        page.on("request", lambda request: None if request.url.startswith(base) else outside.append(request.url))
        return page

    admin = browser.new_context(storage_state=steward)
    page = watch(admin)
    page.goto(base + "/people")
    add_person(page, "editor", "Coordinator")
    add_person(page, "rosa", "Referee")
    add_person(page, "omar", "Referee")
    shots(page, "people")
    admin.close()

    editor = browser.new_context()
    page = watch(editor)
    sign_in(page, base, "editor")
    token = api_token(page)
    assigned = reviewed_case(editor.request, base, token, "School meals and attention")
    unassigned = reviewed_case(editor.request, base, token, "Night shifts and sleep")
    page.goto(f"{base}/cases/{assigned}")
    page.get_by_label("Give access to").select_option(label="rosa, referee")
    page.get_by_role("button", name="Give access").click()
    page.locator("#access").wait_for()
    assert page.locator("ul.people").get_by_text("rosa").is_visible()
    shots(page, "editor-assigns")
    editor.close()

    referee = browser.new_context()
    page = watch(referee)
    sign_in(page, base, "rosa")
    titles = page.locator("td.case-title a").all_inner_texts()
    assert titles == ["School meals and attention"]
    shots(page, "referee-sees-one-case")
    missing = page.goto(f"{base}/cases/{unassigned}")
    assert missing is not None and missing.status == 404
    assert page.get_by_role("heading", name="Not found").is_visible()

    page.goto(f"{base}/cases/{assigned}")
    assert page.locator("#access").count() == 0
    page.get_by_role("link", name="checklist").first.click()
    item = page.locator("article.item").first
    item.get_by_label("Your note").fill(NOTE)
    item.locator(".saved").get_by_text(re.compile("Saved")).wait_for()
    shots(page, "referee-annotates")

    page.get_by_text("Open a session link for a journal club").click()
    page.get_by_label("Label").fill("Methods club")
    page.get_by_role("button", name="Open a session link").click()
    link = base + page.get_by_label(re.compile("Session link")).input_value()
    referee.close()

    club = browser.new_context(accept_downloads=False)
    page = watch(club)
    page.goto(link + "/checklist")
    page.get_by_role("heading", name=re.compile("^Checklist")).wait_for()
    assert page.get_by_text(NOTE).is_visible()
    assert page.locator("form, textarea, select, input").count() == 0
    assert page.get_by_role("link", name=re.compile("Markdown|Export|download", re.IGNORECASE)).count() == 0
    shots(page, "club-checklist")

    page.get_by_role("link", name="Present").click()
    page.get_by_text(re.compile("^Step 1 of")).wait_for()
    page.keyboard.press("ArrowRight")
    page.get_by_text(re.compile("^Step 2 of")).wait_for()
    assert page.locator("article.present-item").count() >= 1
    shots(page, "club-presentation")

    page.goto(f"{base}/cases/{assigned}")
    assert page.url.startswith(f"{base}/sign-in")
    assert outside == []
    club.close()
