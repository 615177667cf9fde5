"""Fixtures for the route tests: the app on a temporary data directory, driven in-process.

The client is signed in as a steward (who may do everything) and sends its
form token with every request; access and form-token refusals are specified
in ``tests/security``.
"""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
from fastapi.testclient import TestClient

from app.settings import Settings
from app.web.app import create_app
from tests import walking_demo
from tests.accounts import FAST_HASHING, add_account, sign_in

UPLOAD_LIMIT = 2 * 1024 * 1024


class Reviewed(walking_demo.Reviewed):
    """Ids of a case reviewed once through the JSON API, and the paths of its pages."""

    @property
    def case(self) -> str:
        return f"/cases/{self.case_id}"

    @property
    def refit(self) -> str:
        return f"/cases/{self.case_id}/refits/{self.refit_id}"


@pytest.fixture
def settings(tmp_path: Path) -> Settings:
    return Settings(data_dir=tmp_path / "data", refit_wait_seconds=60.0, max_upload_bytes=UPLOAD_LIMIT, **FAST_HASHING)


@pytest.fixture
def client(settings: Settings) -> Iterator[TestClient]:
    """The app with its lifespan running (database, worker), signed in as a steward; closed after the test."""
    with TestClient(create_app(settings)) as test_client:
        add_account(test_client.app.state.services, "steward", "steward")  # type: ignore[attr-defined]
        sign_in(test_client, "steward")
        yield test_client


@pytest.fixture
def reviewed(client: TestClient, demo_csv: bytes, demo_spec: dict[str, Any]) -> Reviewed:
    """The walking demo reviewed once: case, upload, claim and refit through /api/v1."""
    case_id = client.post("/api/v1/cases", json={"title": "Walking and blood pressure", "reference": "MS-17"}).json()[
        "case"
    ]["id"]
    uploaded = client.post(f"/api/v1/cases/{case_id}/datasets", files={"file": ("walking.csv", demo_csv, "text/csv")})
    dataset_id = uploaded.json()["dataset"]["id"]
    claim = client.post(f"/api/v1/cases/{case_id}/claims", json={"dataset_id": dataset_id, "spec": demo_spec})
    claim_id = claim.json()["claim"]["id"]
    refit = client.post(f"/api/v1/cases/{case_id}/refits", json={"claim_id": claim_id, "dataset_id": dataset_id})
    assert refit.json()["state"] == "finished", refit.json()
    return Reviewed(case_id=case_id, dataset_id=dataset_id, claim_id=claim_id, refit_id=refit.json()["id"])


@pytest.fixture
def renamed_dataset(client: TestClient, reviewed: Reviewed, demo_csv: bytes) -> int:
    """A second data version of the reviewed case whose instrument ``walkability_index`` is renamed: a refit fails."""
    renamed = demo_csv.replace(b"walkability_index", b"walkability")
    uploaded = client.post(
        f"/api/v1/cases/{reviewed.case_id}/datasets", files={"file": ("renamed.csv", renamed, "text/csv")}
    )
    return uploaded.json()["dataset"]["id"]
