"""Starting a refit through the API: 201 with the refit when it is already over, 202 while it goes on."""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
from fastapi.testclient import TestClient

from app.settings import Settings
from app.web.app import create_app
from tests.accounts import FAST_HASHING, add_account, sign_in
from tests.web.conftest import Reviewed


def start(client: TestClient, case_id: int, claim_id: int, dataset_id: int) -> Any:
    return client.post(f"/api/v1/cases/{case_id}/refits", json={"claim_id": claim_id, "dataset_id": dataset_id})


def test_a_refit_over_within_the_wait_answers_201_with_its_findings_ready(client: TestClient, reviewed: Reviewed) -> None:
    answer = start(client, reviewed.case_id, reviewed.claim_id, reviewed.dataset_id)

    assert answer.status_code == 201
    assert answer.json()["state"] == "finished"
    assert answer.headers["location"] == f"/api/v1/cases/{reviewed.case_id}/refits/{answer.json()['id']}"


def test_a_refit_that_fails_within_the_wait_is_over_too(client: TestClient, reviewed: Reviewed, renamed_dataset: int) -> None:
    answer = start(client, reviewed.case_id, reviewed.claim_id, renamed_dataset)

    assert (answer.status_code, answer.json()["state"]) == (201, "failed")


@pytest.fixture
def impatient_client(tmp_path: Path) -> Iterator[TestClient]:
    """A server that does not wait for refits at all."""
    settings = Settings(data_dir=tmp_path / "data", refit_wait_seconds=0.0, **FAST_HASHING)
    with TestClient(create_app(settings)) as test_client:
        add_account(test_client.app.state.services, "steward", "steward")  # type: ignore[attr-defined]
        sign_in(test_client, "steward")
        yield test_client


def test_a_refit_still_going_answers_202_and_where_to_poll(
    impatient_client: TestClient, demo_csv: bytes, demo_spec: dict[str, Any]
) -> None:
    client = impatient_client
    case_id = client.post("/api/v1/cases", json={"title": "Walking"}).json()["case"]["id"]
    dataset = client.post(f"/api/v1/cases/{case_id}/datasets", files={"file": ("walking.csv", demo_csv, "text/csv")})
    dataset_id = dataset.json()["dataset"]["id"]
    claim_id = client.post(f"/api/v1/cases/{case_id}/claims", json={"dataset_id": dataset_id, "spec": demo_spec}).json()[
        "claim"
    ]["id"]

    answer = start(client, case_id, claim_id, dataset_id)

    assert answer.status_code == 202
    assert answer.json()["state"] in ("waiting", "running")
    assert client.get(answer.headers["location"]).status_code == 200


def test_the_api_description_documents_both_answers(client: TestClient) -> None:
    responses = client.get("/api/v1/openapi.json").json()["paths"]["/api/v1/cases/{case_id}/refits"]["post"]["responses"]
    assert {"201", "202"} <= set(responses)
