"""The streaming multipart upload: other fields, odd orders and broken bodies."""

from __future__ import annotations

from fastapi.testclient import TestClient

from tests.web.conftest import Reviewed

BOUNDARY = "----secondstage-test-boundary"


def multipart(*parts: tuple[str, str | None, bytes], closed: bool = True) -> bytes:
    """A multipart/form-data body; each part is (field name, file name or None, content)."""
    body = b""
    for name, file_name, content in parts:
        disposition = f'form-data; name="{name}"' + (f'; filename="{file_name}"' if file_name is not None else "")
        body += f"--{BOUNDARY}\r\nContent-Disposition: {disposition}\r\n\r\n".encode() + content + b"\r\n"
    return body + (f"--{BOUNDARY}--\r\n".encode() if closed else b"")


def post(client: TestClient, case_id: int, body: bytes) -> object:
    return client.post(
        f"/api/v1/cases/{case_id}/datasets",
        content=body,
        headers={"content-type": f"multipart/form-data; boundary={BOUNDARY}"},
    )


def test_fields_around_the_file_are_allowed(client: TestClient, reviewed: Reviewed, demo_csv: bytes) -> None:
    body = multipart(("note", None, b"second version"), ("file", "again.csv", demo_csv), ("after", None, b"x"))
    response = post(client, reviewed.case_id, body)
    assert response.status_code == 201  # type: ignore[attr-defined]
    assert response.json()["dataset"]["original_name"] == "again.csv"  # type: ignore[attr-defined]
    assert response.json()["dataset"]["n_rows"] == demo_csv.count(b"\n") - 1  # type: ignore[attr-defined]


def test_a_file_in_another_field_is_not_taken(client: TestClient, reviewed: Reviewed, demo_csv: bytes) -> None:
    response = post(client, reviewed.case_id, multipart(("attachment", "data.csv", demo_csv)))
    assert response.status_code == 422  # type: ignore[attr-defined]
    assert "choose a data file to upload" in response.json()["error"]["message"]  # type: ignore[attr-defined]


def test_a_body_cut_off_in_the_file_is_refused_and_nothing_kept(client: TestClient, reviewed: Reviewed, demo_csv: bytes) -> None:
    body = multipart(("file", "cut.csv", demo_csv[: len(demo_csv) // 2]), closed=False)[:-2]
    response = post(client, reviewed.case_id, body)
    assert response.status_code == 422  # type: ignore[attr-defined]
    assert "cut off" in response.json()["error"]["message"]  # type: ignore[attr-defined]
    assert len(client.get(f"/api/v1/cases/{reviewed.case_id}").json()["datasets"]) == 1


def test_a_body_that_is_not_a_form_is_refused(client: TestClient, reviewed: Reviewed, demo_csv: bytes) -> None:
    response = client.post(
        f"/api/v1/cases/{reviewed.case_id}/datasets", content=demo_csv, headers={"content-type": "text/csv"}
    )
    assert response.status_code == 422
    assert response.json()["error"]["code"] == "unreadable_data_file"


def test_an_upload_to_a_missing_case_is_404(client: TestClient, demo_csv: bytes) -> None:
    response = post(client, 404, multipart(("file", "data.csv", demo_csv)))
    assert response.status_code == 404  # type: ignore[attr-defined]


def test_uploads_never_touch_the_system_temporary_folder(
    client: TestClient, reviewed: Reviewed, demo_csv: bytes, tmp_path_factory: object, monkeypatch: object
) -> None:
    import tempfile

    seen: list[str] = []
    real = tempfile.mkstemp

    def watched(*args: object, **kwargs: object) -> tuple[int, str]:
        handle, name = real(*args, **kwargs)  # type: ignore[arg-type]
        seen.append(name)
        return handle, name

    monkeypatch.setattr(tempfile, "mkstemp", watched)  # type: ignore[attr-defined]
    assert post(client, reviewed.case_id, multipart(("file", "again.csv", demo_csv))).status_code == 201  # type: ignore[attr-defined]
    data_dir = str(client.app.state.settings.data_dir)  # type: ignore[attr-defined]
    assert seen and all(name.startswith(data_dir) for name in seen)
