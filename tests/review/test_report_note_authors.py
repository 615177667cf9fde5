"""Every report that shows a reviewer's note names who saved it and when, escaping the name as it escapes the note.

The heading reads "Reviewer's note (name, YYYY-MM-DD HH:MM UTC)"; JSON carries
``author`` and ``saved_at`` (ISO 8601, UTC) in the item's judgement. A name is
user text: in Markdown (parsed with markdown-it-py, CommonMark plus tables) and
HTML (parsed as XML after the doctype) it must come out as text, never markup.
"""

from __future__ import annotations

import html
import json
import xml.etree.ElementTree as ET
from datetime import UTC, datetime, timedelta, timezone

import pytest
from markdown_it import MarkdownIt

from app.review.checklist import Judgement, build_checklist
from app.review.renderers.common import note_heading
from app.review.reports import REPORT_FORMATS
from tests.review.findings_builder import iv_findings

ITEM = "exclusion.argument"
NOTE = "Distance to the trainer may track store size."
SAVED_AT = datetime(2026, 12, 2, 14, 5, 41, tzinfo=UTC)
HOSTILE_NAME = "Ana <b>Kim</b> *x* _y_ | [z](http://example.org) & `co`"


def render(name: str, judgement: Judgement) -> str:
    findings = iv_findings()
    checklist = build_checklist(findings, judgements={ITEM: judgement})
    return REPORT_FORMATS[name].render(findings, checklist, data_file_name="store_sales.csv")


def signed(author: str | None = "Dana Reyes", saved_at: datetime | None = SAVED_AT) -> Judgement:
    return Judgement("concern", NOTE, author=author, saved_at=saved_at)


def flat(text: str) -> str:
    return " ".join(text.split())


def test_the_heading_names_the_author_and_the_minute_in_utc():
    assert note_heading(signed()) == "Reviewer's note (Dana Reyes, 2026-12-02 14:05 UTC)"
    assert note_heading(signed(author=None)) == "Reviewer's note (2026-12-02 14:05 UTC)"
    assert note_heading(signed(saved_at=None)) == "Reviewer's note (Dana Reyes)"
    assert note_heading(signed(author=None, saved_at=None)) == "Reviewer's note"


def test_a_time_elsewhere_is_given_in_utc_and_a_time_without_zone_is_taken_as_utc():
    berlin = SAVED_AT.astimezone(timezone(timedelta(hours=1)))
    assert note_heading(signed(saved_at=berlin)).endswith("2026-12-02 14:05 UTC)")
    assert note_heading(signed(saved_at=SAVED_AT.replace(tzinfo=None))).endswith("2026-12-02 14:05 UTC)")


def test_a_name_on_several_lines_is_printed_on_one():
    assert note_heading(signed(author="Dana\n  Reyes", saved_at=None)) == "Reviewer's note (Dana Reyes)"


def test_the_text_report_signs_the_note():
    assert f"Reviewer's note (Dana Reyes, 2026-12-02 14:05 UTC): {NOTE}" in flat(render("text", signed()))


@pytest.mark.parametrize("name", ["text", "markdown", "html"])
def test_an_unsigned_note_keeps_the_plain_heading(name):
    text = flat(html.unescape(render(name, Judgement("concern", NOTE))))
    assert "Reviewer's note: " in text or "Reviewer's note.**" in text
    assert "Reviewer's note (" not in text


def test_the_json_report_carries_author_and_iso_time():
    document = json.loads(render("json", signed()))
    judgement = next(entry["judgement"] for entry in document["checklist"] if entry["id"] == ITEM)
    assert judgement == {"standing": "concern", "note": NOTE, "author": "Dana Reyes", "saved_at": "2026-12-02T14:05:41+00:00"}
    assert datetime.fromisoformat(judgement["saved_at"]) == SAVED_AT


def test_the_json_report_says_null_for_what_is_not_known():
    document = json.loads(render("json", Judgement("concern", NOTE)))
    judgement = next(entry["judgement"] for entry in document["checklist"] if entry["id"] == ITEM)
    assert judgement["author"] is None and judgement["saved_at"] is None


def markdown_tree(text: str) -> ET.Element:
    """The Markdown rendered by markdown-it-py (XHTML output) as an XML tree."""
    rendered = MarkdownIt("commonmark", {"xhtmlOut": True}).enable("table").render(text)
    return ET.fromstring(f"<div>{rendered}</div>")


def test_markdown_signs_the_note_in_the_points_and_in_the_full_checklist():
    tree = markdown_tree(render("markdown", signed()))
    headings = [strong for strong in tree.iter("strong") if "".join(strong.itertext()).startswith("Reviewer's note")]
    assert ["".join(strong.itertext()) for strong in headings] == ["Reviewer's note (Dana Reyes, 2026-12-02 14:05 UTC)."]
    cells = ["".join(td.itertext()) for td in tree.iter("td") if "Reviewer's note" in "".join(td.itertext())]
    assert cells == [f"concern (reviewer; automatic: for the reviewer). Reviewer's note (Dana Reyes, 2026-12-02 14:05 UTC): {NOTE}"]


def test_markdown_prints_a_name_with_markup_characters_as_text():
    text = render("markdown", signed(author=HOSTILE_NAME))
    tree = markdown_tree(text)
    expected = f"Reviewer's note ({HOSTILE_NAME}, 2026-12-02 14:05 UTC)"
    headings = [strong for strong in tree.iter("strong") if "".join(strong.itertext()).startswith("Reviewer's note")]
    assert ["".join(strong.itertext()) for strong in headings] == [f"{expected}."]
    cells = [td for td in tree.iter("td") if "Reviewer's note" in "".join(td.itertext())]
    assert len(cells) == 1 and f"{expected}: {NOTE}" in "".join(cells[0].itertext())
    assert not list(headings[0]) and not list(cells[0]), "no emphasis, code or link inside the name"
    assert not list(tree.iter("a")) and not list(tree.iter("b"))
    rows = [len(tr.findall("td")) for tr in tree.iter("tr") if tr.findall("td")]
    assert len(set(rows[-len(build_checklist(iv_findings()).items):])) == 1, "the checklist table keeps its columns"


def html_tree(text: str) -> ET.Element:
    doctype, _, document = text.partition("\n")
    assert doctype == "<!DOCTYPE html>"
    return ET.fromstring(document)


def test_html_signs_the_note_in_the_item_and_in_the_full_checklist():
    tree = html_tree(render("html", signed()))
    notes = ["".join(p.itertext()) for p in tree.iter("p") if "".join(p.itertext()).startswith("Reviewer's note")]
    assert notes == [f"Reviewer's note (Dana Reyes, 2026-12-02 14:05 UTC): {NOTE}"] * 2


def test_html_prints_a_name_with_markup_characters_as_text():
    text = render("html", signed(author=HOSTILE_NAME))
    tree = html_tree(text)
    notes = ["".join(p.itertext()) for p in tree.iter("p") if "".join(p.itertext()).startswith("Reviewer's note")]
    assert notes == [f"Reviewer's note ({HOSTILE_NAME}, 2026-12-02 14:05 UTC): {NOTE}"] * 2
    assert not list(tree.iter("b"))
    assert "Ana &lt;b&gt;Kim&lt;/b&gt;" in text


def test_a_note_on_several_lines_starts_no_markdown_block():
    note = "First point.\n# Heading-shaped line\n- list-shaped line\n\n    code-shaped line"
    tree = markdown_tree(render("markdown", Judgement("concern", note, author="Dana Reyes", saved_at=SAVED_AT)))
    blocks = [element for tag in ("h1", "h2", "h3", "li", "pre") for element in tree.iter(tag)]
    assert not [element.tag for element in blocks if "-shaped line" in "".join(element.itertext())]
    paragraphs = ["".join(p.itertext()) for p in tree.iter("p") if "".join(p.itertext()).startswith("Reviewer's note")]
    assert paragraphs == ["Reviewer's note (Dana Reyes, 2026-12-02 14:05 UTC). First point. # Heading-shaped line - list-shaped line code-shaped line"]
