"""The report formats: Markdown tables parse, HTML is well-formed and self-contained, JSON is strict.

Markdown is parsed with markdown-it-py (CommonMark plus tables); HTML with
the standard library's XML parser after the doctype line. Text from the claim
that looks like markup (a ``|`` in a column name, ``<script>`` in a title)
must come out as text.
"""

from __future__ import annotations

import html
import json
import re
import xml.etree.ElementTree as ET

import pytest
from markdown_it import MarkdownIt

from app.review.checklist import Judgement, build_checklist
from app.review.renderers.common import CAUTION
from app.review.renderers.markdown import inline
from app.review.reports import REPORT_FORMATS
from tests.review.findings_builder import iv_findings, result, row, with_claim, with_covariance, with_diagnostic, with_rows

HOSTILE_TITLE = "Sales <script>alert('x')</script> | & more *bold* `code` [link](http://example.org)"


def flagged_findings() -> dict:
    """A claim with a serious and a concern item, a hostile title and a pipe in a column name."""
    findings = with_claim(iv_findings(), title=HOSTILE_TITLE, claimed={"estimate": "0.91"})
    findings["outcome"] = "sales|net"
    findings["sample"]["columns"]["outcome"] = "sales|net"
    findings["claim"]["outcome"] = "sales|net"
    return with_diagnostic(findings, "hansen_j", result(25.0, 1e-6, df=1, distribution="chi2"))


def render(name: str, findings: dict, **options) -> str:
    checklist = build_checklist(findings, **options)
    return REPORT_FORMATS[name].render(findings, checklist, data_file_name="store_sales.csv")


def markdown_tables(text: str) -> list[list[int]]:
    """Cells per row for every table markdown-it finds."""
    tables, cells = [], None
    for token in MarkdownIt("commonmark").enable("table").parse(text):
        if token.type == "table_open":
            cells = []
        elif token.type == "tr_open":
            cells.append(0)
        elif token.type in ("th_open", "td_open"):
            cells[-1] += 1
        elif token.type == "table_close":
            tables.append(cells)
    return tables


@pytest.mark.parametrize("findings", [iv_findings(), flagged_findings()], ids=["healthy", "flagged"])
def test_markdown_tables_are_intact(findings):
    text = render("markdown", findings)
    tables = markdown_tables(text)
    assert len(tables) == 3, "estimates, key diagnostics and full checklist"
    for rows in tables:
        assert len(set(rows)) == 1, rows
    checklist_rows = tables[-1]
    assert len(checklist_rows) == 1 + len(build_checklist(findings).items)


def test_markdown_lists_points_for_the_authors_with_questions():
    text = render("markdown", flagged_findings())
    assert "## Points to raise with the authors" in text
    assert "**Question to the authors.**" in text
    assert "The instruments agree with each other (serious)" in text
    assert "| 2SLS (claimed) |" in text


def test_markdown_keeps_claim_text_from_becoming_markup():
    html = MarkdownIt("commonmark").enable("table").render(render("markdown", flagged_findings()))
    assert "<script>" not in html
    assert "<em>bold</em>" not in html
    assert 'href="http://example.org"' not in html


@pytest.mark.parametrize("text", ["1. First point", "12) twelve", "# heading", "- dash", "> quote", "== rule"])
def test_markdown_text_that_would_start_a_block_renders_as_the_same_words(text):
    # Reference: a CommonMark parser renders the escaped text as one paragraph holding the words unchanged.
    html = MarkdownIt("commonmark").render(inline(text))
    assert html == f"<p>{text.replace('>', '&gt;')}</p>\n"


def parse_html(text: str) -> ET.Element:
    assert text.startswith("<!DOCTYPE html>\n")
    return ET.fromstring(text.split("\n", 1)[1])


@pytest.mark.parametrize("findings", [iv_findings(), flagged_findings()], ids=["healthy", "flagged"])
def test_html_is_well_formed_and_self_contained(findings):
    text = render("html", findings)
    root = parse_html(text)
    assert root.tag == "html"
    tags = {element.tag for element in root.iter()}
    assert not tags & {"script", "link", "img", "iframe", "object"}
    for element in root.iter():
        for attribute in ("src", "href"):
            assert attribute not in element.attrib
    assert not re.search(r"url\(|@import|https?://", root.find("head/style").text)


def test_html_shows_hostile_text_as_text():
    root = parse_html(render("html", flagged_findings()))
    assert root.find("body/h1").text.endswith(HOSTILE_TITLE)
    assert not [element for element in root.iter() if element.tag == "script"]


def test_json_is_the_findings_plus_checklist_and_verdict():
    findings = flagged_findings()
    document = json.loads(render("json", findings), parse_constant=pytest.fail)
    assert {key: document[key] for key in findings} == json.loads(json.dumps(findings))
    assert document["verdict"]["code"] == "not_reproduced"
    sections = {entry["section"] for entry in document["checklist"]}
    assert sections == {"reproduction", "omitted_causes", "relevance", "exclusion", "overidentification", "inference", "design"}


def test_text_report_shows_summary_estimates_diagnostics_and_checklist():
    text = render("text", flagged_findings(), judgements={"exclusion.argument": Judgement("concern", "Distance to trainer may track store size.")})
    for heading in ("VERDICT: COULD NOT BE REPRODUCED", "MODEL AND SAMPLE", "EFFECT OF TRAINING_HOURS ON SALES|NET", "KEY DIAGNOSTICS", "CHECKLIST"):
        assert heading in text
    assert "->2SLS" in text
    flat = " ".join(text.split())
    assert "[concern (reviewer; automatic: for the reviewer)]" in flat
    assert "Reviewer's note: Distance to trainer may track store size." in flat
    assert max(len(line) for line in text.splitlines()) <= 100


@pytest.mark.parametrize("name", sorted(REPORT_FORMATS))
def test_every_report_carries_the_cautions(name):
    text = render(name, iv_findings())
    flat = " ".join(text.split()).replace("\\", "")
    assert "confidential" in flat
    assert "not proof of an error or of misconduct" in flat
    assert "the reviewer decides" in flat
    for sentence in CAUTION if name != "script" else CAUTION[:1]:
        assert " ".join(sentence.split()) in flat


def test_the_json_report_holds_the_cautions_under_their_own_key():
    assert json.loads(render("json", iv_findings()))["caution"] == list(CAUTION)


def test_formats_declare_media_type_and_extension():
    assert set(REPORT_FORMATS) == {"markdown", "html", "json", "script", "text"}
    for name, report in REPORT_FORMATS.items():
        assert report.name == name
        assert report.extension.startswith(".")
        assert "/" in report.media_type


def test_reviewer_notes_reach_every_report():
    judgement = {"exclusion.monotonicity": Judgement("sound", "Nobody avoids training because of the lottery.")}
    for name in ("text", "markdown", "html", "json"):
        assert "Nobody avoids training because of the lottery." in render(name, iv_findings(), judgements=judgement)


def test_the_refit_warnings_reach_every_report():
    findings = iv_findings()
    findings["warnings"] = ["'tenure_years' is nearly collinear with (intercept)"]
    for name in ("text", "markdown", "html"):
        assert "nearly collinear" in render(name, findings)


def heckman_findings(covariance: str, clusters: dict[str, int] | None = None) -> dict:
    """A selected-sample claim whose table holds Heckman's row (corrected covariance, never clustered)."""
    findings = with_covariance(
        with_claim(iv_findings(), design="selection", instruments=[], selected="employed", claimed={"estimator": "ols"}),
        covariance,
        clusters=clusters,
    )
    findings["estimators"] += [{"code": "heckman_two_step", "name": "Heckman two-step"}]
    return with_rows(findings, row("heckman_two_step", 0.5, 0.05))


@pytest.mark.parametrize("name", ["text", "markdown", "html", "json"])
def test_the_heckman_row_is_footnoted_with_its_own_covariance(name):
    flat = html.unescape(" ".join(render(name, heckman_findings("robust")).split()).replace("\\", ""))
    assert "Heckman two-step*" in flat or name == "json"
    assert "Heckman two-step: standard errors from Heckman's (1979) corrected covariance" in flat or name == "json"
    assert "corrected covariance, which assumes homoskedastic normal errors" in flat
    assert "not from the heteroskedasticity-robust (HC1) estimator of the other rows" in flat


@pytest.mark.parametrize("name", ["text", "markdown", "html", "json"])
def test_a_clustered_claim_is_told_the_heckman_errors_are_not_clustered(name):
    flat = " ".join(render(name, heckman_findings("cluster", {"region": 30})).split()).replace("\\", "")
    assert "the claim clusters its standard errors, but these are not clustered" in flat


def test_rows_using_the_claims_covariance_carry_no_note():
    text = render("text", iv_findings())
    assert "*" not in text.split("KEY DIAGNOSTICS")[0]
    assert json.loads(render("json", iv_findings()))["estimate_notes"] == {}
