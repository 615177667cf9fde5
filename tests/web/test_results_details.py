"""The results page shows what the presenters arrange: every nested table, caption, heading and cell, escaped.

Two demo cases are reviewed through the JSON API and their results pages read:
the weak-instrument case (bootstrap tests with few clusters, instrument
balance, Stock-Yogo values that are not exceeded) and the mediator case
(mediation estimates and arms).
"""

from __future__ import annotations

import html
import tomllib
from pathlib import Path
from typing import Any

import pytest
from fastapi.testclient import TestClient

from app.review import formatting
from app.web import presenters

CASES = Path(__file__).resolve().parents[2] / "seed_demo" / "cases"


def review(client: TestClient, slug: str) -> tuple[str, dict[str, Any]]:
    """Upload a demo case, enter its claim and refit it; returns the results page and the findings."""
    folder = CASES / slug
    case = client.post("/api/v1/cases", json={"title": slug}).json()["case"]["id"]
    files = {"file": ("data.csv", (folder / "data.csv").read_bytes(), "text/csv")}
    dataset = client.post(f"/api/v1/cases/{case}/datasets", files=files).json()["dataset"]["id"]
    spec = tomllib.loads((folder / "claim.toml").read_text(encoding="utf-8"))
    claim = client.post(f"/api/v1/cases/{case}/claims", json={"dataset_id": dataset, "spec": spec}).json()["claim"]["id"]
    refit = client.post(f"/api/v1/cases/{case}/refits", json={"claim_id": claim, "dataset_id": dataset}).json()
    assert refit["state"] == "finished", refit
    page = client.get(f"/cases/{case}/refits/{refit['id']}")
    assert page.status_code == 200
    return page.text, client.get(f"/api/v1/cases/{case}/refits/{refit['id']}").json()["findings"]


def page_text(page: str) -> str:
    """The page's text as a reader sees it: no word-break hints, entities decoded."""
    return html.unescape(page.replace("<wbr>", ""))


@pytest.mark.parametrize("slug", ["budgeting_app_card_debt", "tutoring_hours_exam"])
def test_every_nested_table_of_the_findings_is_on_the_page(client: TestClient, slug: str) -> None:
    page, findings = review(client, slug)
    text = page_text(page)
    for group in presenters.group_diagnostics(findings["diagnostics"]):
        for key, result in group.results:
            shown = presenters.details(key, result)
            for line in [*shown.lists, *shown.numbers]:
                assert f"<dt>{line.label}</dt><dd" in text and line.value in text, (key, line)
            for table in [*shown.coefficients, *shown.tables]:
                assert f"<caption>{table.caption}</caption>" in text, (key, table.caption)
                for column in table.columns:
                    assert f'<th scope="col">{column}</th>' in text, (key, column)
                for row in table.rows:
                    assert f'<th scope="row">{row[0]}</th>' + "".join(f"<td>{cell}</td>" for cell in row[1:]) in text, (
                        key,
                        row,
                    )


def test_the_few_clusters_case_shows_both_bootstrap_p_values_and_the_balance_by_covariate(client: TestClient) -> None:
    page, findings = review(client, "budgeting_app_card_debt")
    text = page_text(page)
    bootstrap = findings["diagnostics"]["wild_cluster_bootstrap"]
    wald_p = formatting.p_value_cell(bootstrap["wald"]["p_value"])
    assert "<caption>Bootstrap t-test of the 2SLS coefficient</caption>" in text
    assert f'<th scope="row">p-value</th><td>{wald_p}</td>' in text
    assert "<caption>Balance, covariate by covariate</caption>" in text
    assert '<th scope="row">prior_balance_k</th>' in text
    assert "<caption>Critical values: Size of the 2SLS Wald test</caption>" in text
    assert "Direct effect at which the interval reaches zero" in text


def test_the_mediator_case_shows_the_estimates_and_arms(client: TestClient) -> None:
    page, findings = review(client, "tutoring_hours_exam")
    text = page_text(page)
    estimates = findings["diagnostics"]["mediation"]["estimates"]
    assert "<caption>The mediator&#39;s effect under each estimator</caption>" in page
    assert f'<th scope="row">2SLS with the arms as instruments</th><td>{formatting.number(estimates["2sls"])}</td>' in text
    assert "<dt>Treatment arms</dt><dd>offer_app, offer_app_reminders</dd>" in text
