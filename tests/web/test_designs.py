"""Every study design refits and renders: results, checklist and figures answer without a server error."""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
import pytest
from fastapi.testclient import TestClient

from app.web import labels, presenters

from tests.design_simulation import (
    MediationDesign,
    PanelDesign,
    SelectionDesign,
    mediation_sample,
    panel_sample,
    selection_sample,
)
from tests.simulation import IvDesign, iv_claim, iv_sample

DESIGNS: dict[str, tuple[Any, dict[str, Any]]] = {
    "regression": (
        lambda rng: iv_sample(IvDesign(), rng),
        {"design": "regression", "outcome": "outcome", "endogenous": ["focal"], "controls": ["w1", "w2"]},
    ),
    "iv clustered": (
        lambda rng: iv_sample(IvDesign(n_clusters=60), rng),
        iv_claim(IvDesign(), covariance="cluster", cluster=["cluster"], claimed={"estimate": "0.5", "std_error": "0.05"}),
    ),
    "panel": (
        lambda rng: panel_sample(PanelDesign(n_units=150), rng),
        {
            "design": "panel",
            "outcome": "outcome",
            "endogenous": ["focal"],
            "controls": ["control", "steady"],
            "unit": "firm",
            "time": "period",
            "claimed": {"estimator": "random_effects", "estimate": "0.9"},
        },
    ),
    "selection": (
        lambda rng: selection_sample(SelectionDesign(), rng),
        {
            "design": "selection",
            "outcome": "outcome",
            "endogenous": ["regressor"],
            "selected": "selected",
            "selection_covariates": ["excluded"],
        },
    ),
    "mediation": (
        lambda rng: mediation_sample(MediationDesign(), rng),
        {
            "design": "mediation",
            "outcome": "outcome",
            "mediator": "mediator",
            "treatment": ["arm_a", "arm_b"],
            "controls": ["baseline"],
            "claimed": {"estimator": "ols", "estimate": "1.1"},
        },
    ),
}


@pytest.mark.parametrize("design", DESIGNS)
def test_each_design_renders_its_results_and_checklist(client: TestClient, design: str) -> None:
    generate, spec = DESIGNS[design]
    frame: pd.DataFrame = generate(np.random.default_rng(11))
    case = client.post("/api/v1/cases", json={"title": f"A {design} claim"}).json()["case"]["id"]
    dataset = client.post(
        f"/api/v1/cases/{case}/datasets", files={"file": ("data.csv", frame.to_csv(index=False).encode(), "text/csv")}
    ).json()["dataset"]["id"]
    claim = client.post(f"/api/v1/cases/{case}/claims", json={"dataset_id": dataset, "spec": spec})
    assert claim.status_code == 201, claim.text
    refit = client.post(
        f"/api/v1/cases/{case}/refits", json={"claim_id": claim.json()["claim"]["id"], "dataset_id": dataset}
    ).json()
    assert refit["state"] == "finished", refit["error"]
    base = f"/cases/{case}/refits/{refit['id']}"

    results = client.get(base)
    assert results.status_code == 200
    assert "Estimates" in results.text and "Provenance" in results.text
    findings = client.get(f"/api/v1/cases/{case}/refits/{refit['id']}").json()["findings"]
    assert unlabelled_fields(findings) == []
    checklist = client.get(f"{base}/checklist")
    assert checklist.status_code == 200 and 'id="verdict"' in checklist.text
    for figure in ("estimates", "first-stage"):
        assert client.get(f"{base}/figures/{figure}.svg").status_code in (200, 404)
    assert client.get(f"/cases/{case}").status_code == 200


def unlabelled_fields(findings: dict[str, Any]) -> list[tuple[str, str]]:
    """(diagnostic, field) pairs the results page would show under the engine's own field name."""
    missing = []
    for group in presenters.group_diagnostics(findings["diagnostics"]):
        for key, result in group.results:
            for field, value in result.items():
                shown = presenters.details(key, {field: value})
                labelled = field in labels.DETAIL_FIELDS or (key, field) in labels.DETAIL_FIELDS_BY_DIAGNOSTIC
                if (shown.numbers or shown.text or shown.coefficients) and not labelled:
                    missing.append((key, field))
    return missing
