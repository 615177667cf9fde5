"""A newcomer's path in a real browser.

First, the README's first command: ``secondstage serve --demo`` prints a
one-time first-run link; the newcomer chooses the steward's name and password
there and lands on the finished demo reviews. Then, on an empty server: create
a case, upload the demo file, enter the claim through the form, refit, read the
comparison table, open the checklist, record a judgement and a note, reload and
find them, export Markdown. Then the same core flow with scripts off.
"""

from __future__ import annotations

import re
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

from tests.browser.conftest import Server, complete_first_run, start_server, stop_server

pytestmark = pytest.mark.browser

DEMO_DATA = Path(__file__).resolve().parents[2] / "seed_demo" / "cases" / "walking_blood_pressure" / "data.csv"
ROLES = {
    "systolic_bp": "outcome",
    "daily_steps_k": "focal regressor",
    "device_lottery": "instrument",
    "walkability_index": "instrument",
    "age": "control",
    "bmi": "control",
    "female": "control",
}
NOTE = "Ask which sample Table 3 uses; the walkability index may act directly."


def enter_claim(page: Any) -> None:
    """Fill the claim form as the manuscript states it."""
    page.get_by_label("Title", exact=True).fill("Walking lowers systolic blood pressure")
    for column, role in ROLES.items():
        page.get_by_label(f"Role of {column}").select_option(label=role)
    page.get_by_label("Estimator it reports").select_option(label="2SLS")
    page.get_by_label("Estimate", exact=True).fill("-2.85")
    page.get_by_label("Standard error", exact=True).fill("0.23")
    page.get_by_label("Observations").fill("2394")


@pytest.fixture
def demo_server(tmp_path: Path) -> Iterator[Server]:
    """``secondstage serve --demo``, exactly as the README's first command runs it."""
    process, running = start_server(tmp_path / "demo-data", tmp_path / "demo.log", demo=True)
    try:
        yield running
    finally:
        stop_server(process)


def test_serve_demo_opens_on_finished_reviews_after_the_first_run(browser: Any, demo_server: Server, shots: Any) -> None:
    context = browser.new_context(viewport={"width": 1280, "height": 900})
    page = context.new_page()
    outside: list[str] = []
    page.on("request", lambda request: None if request.url.startswith(demo_server.base) else outside.append(request.url))

    page.goto(demo_server.base + "/")
    page.get_by_text("This server has no account yet").wait_for()
    shots(page, "sign-in-before-the-first-run")
    complete_first_run(page, demo_server.first_run_link, name="newcomer")
    shots(page, "demo-cases")

    rows = page.locator("table tbody tr")
    assert rows.count() == 4
    assert page.locator(".verdict-badge").count() == 4
    page.locator("td .verdict-badge").first.click()
    page.get_by_role("heading", name=re.compile("^Checklist")).wait_for()
    assert page.locator("#verdict .verdict-badge").is_visible()
    assert page.get_by_text("A flag is a reason to ask the authors").is_visible()
    shots(page, "demo-checklist")

    page.goto(demo_server.first_run_link)
    assert page.get_by_role("heading", name="Not found").is_visible()
    assert outside == []
    context.close()


def test_from_an_empty_server_to_an_exported_report(
    browser: Any, server: Server, steward: dict[str, Any], shots: Any, tmp_path: Path
) -> None:
    base = server.base
    context = browser.new_context(viewport={"width": 1280, "height": 900}, accept_downloads=True, storage_state=steward)
    page = context.new_page()
    outside: list[str] = []
    page.on("request", lambda request: None if request.url.startswith(base) else outside.append(request.url))

    page.goto(base + "/")
    shots(page, "empty-server")
    page.get_by_role("link", name="Open a case").first.click()
    page.get_by_label("Title").fill("Walking and blood pressure")
    page.get_by_label("Manuscript reference").fill("HPR-2026-0412")
    shots(page, "new-case")
    page.get_by_role("button", name="Open the case").click()
    page.get_by_role("heading", name="Walking and blood pressure").wait_for()
    shots(page, "case-page")

    page.get_by_role("link", name="Upload a data file").click()
    page.get_by_label("Choose the data file, or drop it here").set_input_files(str(DEMO_DATA))
    shots(page, "upload")
    page.get_by_role("button", name="Upload and profile").click()
    page.get_by_role("heading", name=re.compile("Data version 1: data.csv")).wait_for()
    assert page.get_by_role("img", name=re.compile("Histogram of systolic_bp")).is_visible()
    shots(page, "profile")

    page.get_by_role("link", name="Enter a claim on this data").click()
    enter_claim(page)
    page.locator("#claim-problems").get_by_text("nothing to correct so far").wait_for()
    shots(page, "claim-form")
    page.get_by_role("button", name="Save and refit now").click()

    page.get_by_role("heading", name="Estimates").wait_for(timeout=30_000)
    table = page.get_by_role("table").filter(has_text="the manuscript and every estimator")
    manuscript = table.get_by_role("row").filter(has_text="Manuscript (2SLS)")
    assert "-2.85" in manuscript.inner_text()
    tsls = table.get_by_role("row").filter(has=page.get_by_role("rowheader", name=re.compile("^2SLS")))
    assert re.search(r"-2\.8\d\d", tsls.inner_text())
    assert page.get_by_text("A flag is a reason to ask the authors").is_visible()
    figure = page.get_by_role("img", name=re.compile("^Effect of daily_steps_k"))
    figure.scroll_into_view_if_needed()
    page.wait_for_function("image => image.complete && image.naturalWidth > 0", arg=figure.element_handle())
    shots(page, "results")

    page.get_by_role("link", name="Checklist and verdict").click()
    first = page.locator("article.item").first
    title = first.get_by_role("heading").inner_text()
    first.get_by_label("Your judgement").select_option(label="Concern: ask the authors")
    first.get_by_label("Your note").fill(NOTE)
    first.locator(".saved").get_by_text(re.compile("Saved")).wait_for()
    page.locator("#judged-count").get_by_text("1 of").wait_for()
    shots(page, "judgement")

    page.reload()
    first = page.locator("article.item").filter(has=page.get_by_role("heading", name=title))
    assert first.get_by_label("Your note").input_value() == NOTE
    assert first.get_by_label("Your judgement").input_value() == "concern"
    shots(page, "after-reload")

    with page.expect_download() as download_info:
        page.get_by_role("link", name=re.compile("^Markdown")).click()
    report = tmp_path / download_info.value.suggested_filename
    download_info.value.save_as(report)
    assert report.suffix == ".md"
    assert NOTE in report.read_text(encoding="utf-8")

    assert outside == []
    context.close()


def test_the_core_flow_works_with_scripts_off(browser: Any, server: Server, steward: dict[str, Any], shots: Any) -> None:
    context = browser.new_context(viewport={"width": 1280, "height": 900}, java_script_enabled=False, storage_state=steward)
    page = context.new_page()

    page.goto(server.base + "/cases/new")
    page.get_by_label("Title").fill("Scripts off")
    page.get_by_role("button", name="Open the case").click()
    page.get_by_role("link", name="Upload a data file").click()
    page.get_by_label("Choose the data file, or drop it here").set_input_files(str(DEMO_DATA))
    page.get_by_role("button", name="Upload and profile").click()
    page.get_by_role("link", name="Enter a claim on this data").click()
    enter_claim(page)
    page.get_by_role("button", name="Save and refit now").click()
    page.get_by_role("heading", name="Estimates").wait_for(timeout=30_000)
    shots(page, "results-without-scripts")

    page.get_by_role("link", name="Checklist and verdict").click()
    first = page.locator("article.item").first
    first.get_by_label("Your judgement").select_option(label="Sound: nothing to ask")
    first.get_by_role("button", name="Save").click()
    page.wait_for_load_state()
    assert page.locator("article.item").first.get_by_label("Your judgement").input_value() == "sound"
    shots(page, "judgement-without-scripts")
    context.close()


def test_every_control_has_a_label_and_the_skip_link_comes_first(
    browser: Any, server: Server, steward: dict[str, Any]
) -> None:
    context = browser.new_context(storage_state=steward)
    page = context.new_page()
    page.goto(server.base + "/")
    page.keyboard.press("Tab")
    assert page.evaluate("document.activeElement.textContent") == "Skip to the content"

    cases = page.locator("table a").first
    if cases.count():
        cases.click()
    for path in ("/cases/new", "/", "/account", "/people", "/sign-in"):
        page.goto(server.base + path)
        unlabelled = page.evaluate(
            """() => [...document.querySelectorAll('input:not([type=hidden]), select, textarea')]
                 .filter(el => !(el.labels && el.labels.length) && !el.getAttribute('aria-label'))
                 .map(el => el.name)"""
        )
        assert unlabelled == [], path
    context.close()
