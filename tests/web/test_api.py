"""The JSON API under /api/v1: every operation, and one error shape for every failure."""

from __future__ import annotations

from typing import Any

import pytest
from fastapi.testclient import TestClient

from tests.web.conftest import UPLOAD_LIMIT, Reviewed


def assert_error(response: Any, status: int, code: str) -> dict[str, Any]:
    """The response is an error in the API's one shape; returns its detail."""
    assert response.status_code == status, response.text
    body = response.json()
    assert set(body) == {"error"}
    assert set(body["error"]) == {"status", "code", "message", "problems"}
    assert (body["error"]["status"], body["error"]["code"]) == (status, code)
    assert body["error"]["message"]
    return body["error"]


def test_the_openapi_document_lists_every_operation(client: TestClient) -> None:
    schema = client.get("/api/v1/openapi.json").json()
    operations = {(method.upper(), path) for path, methods in schema["paths"].items() for method in methods}
    assert operations == {
        ("GET", "/api/v1/cases"),
        ("POST", "/api/v1/cases"),
        ("GET", "/api/v1/cases/{case_id}"),
        ("DELETE", "/api/v1/cases/{case_id}"),
        ("POST", "/api/v1/cases/{case_id}/datasets"),
        ("GET", "/api/v1/cases/{case_id}/datasets/{dataset_id}"),
        ("GET", "/api/v1/cases/{case_id}/claims/editor"),
        ("POST", "/api/v1/cases/{case_id}/claims/check"),
        ("POST", "/api/v1/cases/{case_id}/claims"),
        ("GET", "/api/v1/cases/{case_id}/claims/{claim_id}"),
        ("POST", "/api/v1/cases/{case_id}/claims/{claim_id}/versions"),
        ("POST", "/api/v1/cases/{case_id}/refits"),
        ("GET", "/api/v1/cases/{case_id}/refits/{refit_id}"),
        ("GET", "/api/v1/cases/{case_id}/refits/{refit_id}/checklist"),
        ("PUT", "/api/v1/cases/{case_id}/refits/{refit_id}/judgements/{item_id}"),
        ("GET", "/api/v1/cases/{case_id}/refits/{refit_id}/reports/{format_name}"),
        ("GET", "/api/v1/cases/{case_id}/compare"),
        ("POST", "/api/v1/cases/{case_id}/close"),
        ("POST", "/api/v1/cases/{case_id}/reopen"),
        ("PUT", "/api/v1/cases/{case_id}/access/{user_id}"),
        ("DELETE", "/api/v1/cases/{case_id}/access/{user_id}"),
        ("GET", "/api/v1/cases/{case_id}/audit"),
        ("POST", "/api/v1/cases/{case_id}/refits/{refit_id}/links"),
        ("DELETE", "/api/v1/cases/{case_id}/links/{link_id}"),
        ("GET", "/api/v1/follow/{key}"),
        ("GET", "/api/v1/me"),
        ("GET", "/api/v1/people"),
        ("GET", "/api/v1/audit"),
    }
    assert "ErrorBody" in schema["components"]["schemas"]


def test_the_whole_review_through_the_api(client: TestClient, reviewed: Reviewed, demo_spec: dict[str, Any]) -> None:
    case = client.get(f"/api/v1/cases/{reviewed.case_id}").json()
    assert [item["kind"] for item in reversed(case["events"])][:4] == [
        "case_opened",
        "dataset_uploaded",
        "claim_entered",
        "refit_started",
    ]

    dataset = client.get(f"/api/v1/cases/{reviewed.case_id}/datasets/{reviewed.dataset_id}").json()
    assert dataset["dataset"]["original_name"] == "walking.csv"
    assert {variable["name"] for variable in dataset["profile"]["variables"]} >= {"systolic_bp", "daily_steps_k"}

    editor = client.get(f"/api/v1/cases/{reviewed.case_id}/claims/editor").json()
    assert editor["dataset"]["id"] == reviewed.dataset_id

    results = client.get(f"/api/v1{reviewed.refit}").json()
    assert results["refit"]["state"] == "finished"
    assert results["findings"]["claim"]["claimed"]["estimate"] == demo_spec["claimed"]["estimate"]

    checklist = client.get(f"/api/v1{reviewed.refit}/checklist").json()
    item_id = checklist["sections"][0]["items"][0]["id"]
    saved = client.put(
        f"/api/v1{reviewed.refit}/judgements/{item_id}", json={"standing": "concern", "note": "ask for the code"}
    )
    assert saved.status_code == 200
    assert saved.json()["item"]["judgement"] == {"standing": "concern", "note": "ask for the code"}

    report = client.get(f"/api/v1{reviewed.refit}/reports/markdown")
    assert report.status_code == 200
    assert report.headers["content-disposition"] == f'attachment; filename="secondstage-case{reviewed.case_id}-refit{reviewed.refit_id}.md"'
    assert "ask for the code" in report.text


def test_claims_are_checked_revised_and_compared(client: TestClient, reviewed: Reviewed, demo_spec: dict[str, Any]) -> None:
    base = f"/api/v1/cases/{reviewed.case_id}"
    check = client.post(
        f"{base}/claims/check", json={"dataset_id": reviewed.dataset_id, "spec": {**demo_spec, "instruments": ["age"]}}
    )
    assert check.status_code == 200
    assert check.json()["valid"] is False
    assert "column 'age' is both instrument and control" in check.json()["problems"][0]["message"]

    revised = client.post(
        f"{base}/claims/{reviewed.claim_id}/versions",
        json={"dataset_id": reviewed.dataset_id, "spec": {**demo_spec, "instruments": ["device_lottery"]}, "change_note": "lottery only"},
    )
    assert revised.status_code == 201
    assert revised.json()["claim"]["version"] == 2
    refit = client.post(f"{base}/refits", json={"claim_id": revised.json()["claim"]["id"], "dataset_id": reviewed.dataset_id})
    assert refit.status_code == 201  # over within the test server's 60 s wait

    compared = client.get(f"{base}/compare", params={"before": reviewed.refit_id, "after": refit.json()["id"]}).json()
    assert [change["field"] for change in compared["claim_changes"]] == ["instruments"]
    assert client.get(f"{base}/claims/{reviewed.claim_id}").json()["claim"]["is_latest"] is False


def test_the_overview_takes_filters_and_order(client: TestClient, reviewed: Reviewed) -> None:
    client.post("/api/v1/cases", json={"title": "Another manuscript"})
    overview = client.get("/api/v1/cases", params={"sort": "title", "order": "asc"}).json()
    assert [row["title"] for row in overview["cases"]] == ["Another manuscript", "Walking and blood pressure"]
    filtered = client.get("/api/v1/cases", params={"q": "ms-17"}).json()
    assert [row["id"] for row in filtered["cases"]] == [reviewed.case_id]


def test_deleting_a_case(client: TestClient, reviewed: Reviewed) -> None:
    assert client.delete(f"/api/v1/cases/{reviewed.case_id}").status_code == 204
    assert_error(client.get(f"/api/v1/cases/{reviewed.case_id}"), 404, "not_found")


@pytest.mark.parametrize(
    "path",
    [
        "/api/v1/cases/99",
        "/api/v1/cases/99/datasets/1",
        "/api/v1/cases/99/claims/1",
        "/api/v1/cases/99/refits/1",
        "/api/v1/cases/99/refits/1/checklist",
        "/api/v1/cases/99/compare?before=1&after=2",
        "/api/v1/no-such-thing",
    ],
)
def test_unknown_things_are_404_in_the_error_shape(client: TestClient, path: str) -> None:
    assert_error(client.get(path), 404, "not_found")


def test_invalid_bodies_name_the_field(client: TestClient) -> None:
    error = assert_error(client.post("/api/v1/cases", json={"title": ""}), 422, "invalid_input")
    assert [problem["field"] for problem in error["problems"]] == ["title"]

    error = assert_error(client.post("/api/v1/cases", json={"titel": "typo"}), 422, "invalid_request")
    assert {problem["field"] for problem in error["problems"]} == {"title", "titel"}

    error = assert_error(
        client.post("/api/v1/cases", content=b"{not json", headers={"content-type": "application/json"}),
        422,
        "invalid_request",
    )
    assert error["problems"]


def test_an_invalid_claim_lists_every_problem(client: TestClient, reviewed: Reviewed, demo_spec: dict[str, Any]) -> None:
    spec = {**demo_spec, "endogenous": ["daily_steps_k", "bmi"], "instruments": ["device_lottery"], "controls": ["income"]}
    error = assert_error(
        client.post(f"/api/v1/cases/{reviewed.case_id}/claims", json={"dataset_id": reviewed.dataset_id, "spec": spec}),
        422,
        "invalid_input",
    )
    assert any("1 instrument(s) for 2 focal regressor(s)" in problem["message"] for problem in error["problems"])


def test_a_bad_upload_is_422_and_a_large_one_413(client: TestClient, reviewed: Reviewed) -> None:
    url = f"/api/v1/cases/{reviewed.case_id}/datasets"
    error = assert_error(client.post(url, files={"file": ("scan.pdf", b"%PDF-1.4\n", "application/pdf")}), 422, "unreadable_data_file")
    assert "PDF" in error["message"]
    too_big = b"a,b\n" + b"1,2\n" * (UPLOAD_LIMIT // 4 + 20_000)
    assert_error(client.post(url, files={"file": ("big.csv", too_big, "text/csv")}), 413, "file_too_large")
    assert_error(client.post(url, data={"note": "no file"}), 422, "unreadable_data_file")
    assert len(client.get(f"/api/v1/cases/{reviewed.case_id}").json()["datasets"]) == 1


def test_a_checklist_of_a_failed_refit_is_409(client: TestClient, reviewed: Reviewed, renamed_dataset: int) -> None:
    refit = client.post(
        f"/api/v1/cases/{reviewed.case_id}/refits", json={"claim_id": reviewed.claim_id, "dataset_id": renamed_dataset}
    ).json()
    assert refit["state"] == "failed" and "walkability_index" in refit["error"]
    assert_error(client.get(f"/api/v1/cases/{reviewed.case_id}/refits/{refit['id']}/checklist"), 409, "not_ready")


def test_invalid_judgements_and_unknown_formats(client: TestClient, reviewed: Reviewed) -> None:
    url = f"/api/v1{reviewed.refit}/judgements/relevance.effective_f"
    assert_error(client.put(url, json={"standing": "fraud"}), 422, "invalid_request")
    assert_error(client.put(f"/api/v1{reviewed.refit}/judgements/no.such_item", json={"standing": "sound"}), 404, "not_found")
    assert_error(client.get(f"/api/v1{reviewed.refit}/reports/docx"), 404, "not_found")


def test_ids_that_are_not_numbers_are_422_not_500(client: TestClient) -> None:
    assert_error(client.get("/api/v1/cases/abc"), 422, "invalid_request")
    assert_error(client.get("/api/v1/cases", params={"sort": "colour"}), 422, "invalid_request")


def test_a_wrong_method_is_405(client: TestClient) -> None:
    assert_error(client.patch("/api/v1/cases"), 405, "method_not_allowed")
