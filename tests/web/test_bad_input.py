"""Bad input on the pages: a clear message, nothing stored, names always escaped, never a 500."""

from __future__ import annotations

import pytest
from fastapi.testclient import TestClient

from tests.web.conftest import UPLOAD_LIMIT, Reviewed

MARKUP = '<img src=x onerror="alert(1)">'

BAD_UPLOADS = {
    "wrong type": ("report.pdf", b"%PDF-1.4\n%\xe2\xe3\n", "PDF", 422),
    "empty": ("empty.csv", b"", "is empty", 422),
    "unknown encoding": ("data.csv", b"\xff\xfe\x00\x00garbage\x80\x81\x82\x83", "not valid UTF-32", 422),
    "duplicated names": ("data.csv", b"a,a,b\n1,2,3\n4,5,6\n", "two columns named", 422),
    "blank name": ("data.csv", b"a,,b\n1,2,3\n4,5,6\n", "no name", 422),
    "over the limit": ("big.csv", b"a,b\n" + b"1,2\n" * (UPLOAD_LIMIT // 4 + 20_000), "larger than this server accepts", 413),
}


@pytest.mark.parametrize("kind", BAD_UPLOADS)
def test_a_bad_upload_is_explained_on_the_upload_page(client: TestClient, reviewed: Reviewed, kind: str) -> None:
    name, content, message, status = BAD_UPLOADS[kind]

    page = client.post(f"{reviewed.case}/datasets", files={"file": (name, content, "application/octet-stream")})

    assert page.status_code == status
    assert "The file was not stored" in page.text
    assert message in page.text
    assert 'enctype="multipart/form-data"' in page.text
    assert len(client.get(f"/api/v1/cases/{reviewed.case_id}").json()["datasets"]) == 1


def test_an_upload_without_a_file_asks_for_one(client: TestClient, reviewed: Reviewed) -> None:
    page = client.post(f"{reviewed.case}/datasets", data={"other": "field"})
    assert page.status_code == 422
    assert "choose a data file to upload" in page.text


def test_column_names_with_markup_are_escaped_everywhere(client: TestClient) -> None:
    case = client.post("/api/v1/cases", json={"title": f"Case {MARKUP}"}).json()["case"]["id"]
    content = f'outcome,"{MARKUP.replace(chr(34), chr(34) * 2)}",z\n1,2,3\n2,1,5\n3,4,4\n4,3,8\n5,7,9\n'.encode()
    dataset = client.post(f"/api/v1/cases/{case}/datasets", files={"file": (f"{MARKUP}.csv", content, "text/csv")})
    assert dataset.status_code == 201, dataset.text
    assert [variable["name"] for variable in dataset.json()["profile"]["variables"]][1] == MARKUP
    dataset_id = dataset.json()["dataset"]["id"]
    spec = {"design": "regression", "outcome": "outcome", "endogenous": [MARKUP], "covariance": "homoskedastic"}
    claim = client.post(f"/api/v1/cases/{case}/claims", json={"dataset_id": dataset_id, "spec": spec}).json()["claim"]["id"]
    refit = client.post(f"/api/v1/cases/{case}/refits", json={"claim_id": claim, "dataset_id": dataset_id}).json()

    for path in (
        "/",
        f"/cases/{case}",
        f"/cases/{case}/datasets/{dataset_id}",
        f"/cases/{case}/claims/new",
        f"/cases/{case}/claims/{claim}",
        f"/cases/{case}/refits/{refit['id']}",
        f"/cases/{case}/refits/{refit['id']}/checklist",
    ):
        page = client.get(path)
        assert page.status_code == 200, path
        assert MARKUP not in page.text, path
        assert "&lt;img src=x onerror=" in page.text, path


def test_a_refit_that_fails_shows_why(client: TestClient, reviewed: Reviewed, renamed_dataset: int) -> None:
    started = client.post(
        f"{reviewed.case}/refits",
        data={"claim_id": reviewed.claim_id, "dataset_id": renamed_dataset},
        follow_redirects=False,
    )

    page = client.get(started.headers["location"])

    assert page.status_code == 200
    assert "This refit could not be computed" in page.text
    assert "walkability_index" in page.text
    checklist = client.get(f"{started.headers['location']}/checklist")
    assert checklist.status_code == 409
    assert "has no checklist" in checklist.text


@pytest.mark.parametrize(
    ("method", "path", "status"),
    [
        ("get", "/cases/not-a-number", 422),
        ("get", "/cases/999", 404),
        ("get", "/cases/999/refits/1/checklist", 404),
        ("get", "/cases/1/compare?before=x&after=1", 422),
        ("get", "/nowhere", 404),
        ("post", "/cases/999/refits", 422),
        ("put", "/cases", 405),
    ],
)
def test_errors_on_pages_are_html_error_pages(client: TestClient, method: str, path: str, status: int) -> None:
    page = getattr(client, method)(path)
    assert page.status_code == status
    assert page.headers["content-type"].startswith("text/html")
    assert "Back to all cases" in page.text
    assert "Traceback" not in page.text


def test_a_judgement_with_an_unknown_standing_is_refused(client: TestClient, reviewed: Reviewed) -> None:
    item_id = client.get(f"/api/v1{reviewed.refit}/checklist").json()["sections"][0]["items"][0]["id"]
    page = client.post(f"{reviewed.refit}/checklist/{item_id}", data={"standing": "<script>", "note": ""})
    assert page.status_code == 422
    assert "<script>" not in page.text


def test_an_unexpected_error_is_a_clean_500(client: TestClient, reviewed: Reviewed, monkeypatch: pytest.MonkeyPatch) -> None:
    from app.web import pages

    def broken(*args: object, **kwargs: object) -> None:
        raise RuntimeError("secret detail")

    monkeypatch.setattr(pages.cases, "get_case", broken)
    signed_in = TestClient(client.app, raise_server_exceptions=False, cookies=client.cookies)
    page = signed_in.get(reviewed.case)
    assert page.status_code == 500
    assert "secret detail" not in page.text and "Traceback" not in page.text
    assert "the server met an unexpected problem" in page.text
