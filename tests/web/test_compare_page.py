"""The comparison page says why the claim changed and names claim fields as the claim form does."""

from __future__ import annotations

from typing import Any

import pytest
from fastapi.testclient import TestClient

from app.web import labels
from tests.web.conftest import Reviewed

NOTE = "authors' reply: sector effects and the sample size as printed in Table 3"


@pytest.fixture
def compared(client: TestClient, reviewed: Reviewed, demo_spec: dict[str, Any]) -> tuple[str, dict[str, Any]]:
    base = f"/api/v1/cases/{reviewed.case_id}"
    spec = {
        **demo_spec,
        "controls": [],
        "categorical": [{"column": "age", "reference": 40}],
        "claimed": {**(demo_spec.get("claimed") or {}), "n_obs": 1234},
        "bootstrap": {"replications": 499},
    }
    revised = client.post(
        f"{base}/claims/{reviewed.claim_id}/versions",
        json={"dataset_id": reviewed.dataset_id, "spec": spec, "change_note": NOTE},
    )
    assert revised.status_code == 201, revised.text
    refit = client.post(f"{base}/refits", json={"claim_id": revised.json()["claim"]["id"], "dataset_id": reviewed.dataset_id})
    query = f"?before={reviewed.refit_id}&after={refit.json()['id']}"
    page = client.get(f"/cases/{reviewed.case_id}/compare{query}")
    assert page.status_code == 200
    return page.text, client.get(f"{base}/compare{query}").json()


def test_the_page_and_its_twin_carry_the_change_note(compared: tuple[str, dict[str, Any]]) -> None:
    page, twin = compared
    assert twin["change_note_after"] == NOTE and twin["change_note_before"] == ""
    assert "Why the claim was revised" in page
    assert "authors&#39; reply: sector effects" in page


def test_claim_fields_are_named_and_written_in_plain_words(compared: tuple[str, dict[str, Any]]) -> None:
    page, twin = compared
    fields = {change["field"] for change in twin["claim_changes"]}
    assert {"categorical", "claimed.n_obs", "bootstrap.replications"} <= fields
    assert "<th scope=\"row\">Observations</th>" in page
    assert "<th scope=\"row\">Bootstrap replications</th>" in page
    assert "<th scope=\"row\">Categorical controls</th>" in page
    assert "age (reference level 40)" in page
    for raw in ("claimed.n_obs", "bootstrap.replications", "{&#39;column&#39;", "&#39;reference&#39;"):
        assert raw not in page


@pytest.mark.parametrize(
    ("field", "value", "words"),
    [
        ("categorical", [{"column": "sector", "reference": None}], "sector"),
        ("categorical", [{"column": "sector", "reference": "retail"}, {"column": "region", "reference": 3}], "sector (reference level retail); region (reference level 3)"),
        ("filters", [{"column": "age", "op": ">=", "value": 25}, {"column": "region", "op": "in", "value": ["north", "south"]}], "age >= 25; region in north, south"),
        ("instruments", ["lottery", "distance"], "lottery, distance"),
        ("instrument_subsets", [["lottery"], ["distance", "rainfall"]], "lottery; distance, rainfall"),
        ("intercept", False, "no"),
        ("covariance", "cluster", "Cluster-robust"),
        ("claimed.estimator", "liml", "LIML"),
        ("weights", None, "not set"),
        ("controls", [], "none"),
    ],
)
def test_claim_values_in_words(field: str, value: object, words: str) -> None:
    assert labels.claim_value(field, value) == words


def test_every_field_of_the_claim_spec_has_a_label() -> None:
    from app.services.diffs import flatten
    from app.spec import ClaimSpec

    fields = {"outcome": "wage", "endogenous": ["school"], "instruments": ["lottery"], "claimed": {"estimate": "0.1"}}
    spec = ClaimSpec.model_validate(fields).model_dump(mode="json")
    assert [field for field in flatten(spec) if field not in labels.CLAIM_FIELDS] == []
