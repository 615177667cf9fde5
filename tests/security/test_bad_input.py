"""Bad input: a clear message, nothing stored, nothing executed, never a 500 or a traceback.

Uploads (oversized, decompression bombs, wrong kinds of file, tables over the
limits, path traversal and markup in file names, non-UTF-8 text) and forms and
API calls (markup and script in every text a person types, over-long fields,
undecodable bytes, broken JSON, impossible ids, formula strings in a claim).
The server here has strict limits so that every limit is reached cheaply.
"""

from __future__ import annotations

import gzip
import io
import zipfile
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from fastapi.testclient import TestClient
from sqlalchemy import func, select

from app.services import users
from app.store.models import Base
from app.web.app import create_app
from tests.accounts import add_account, form_token, sign_in
from tests.security.conftest import security_settings

MiB = 1024 * 1024
UPLOAD_LIMIT = 256 * 1024
LIMITS = {"max_upload_bytes": UPLOAD_LIMIT, "max_rows": 1000, "max_columns": 50, "max_unpacked_bytes": 32 * MiB}
SCRIPT = '<script>alert("x")</script>'
MARKUP = f'<img src=x onerror="alert(1)">{SCRIPT}'
DATABASE_FILES = ("secondstage.sqlite3-wal", "secondstage.sqlite3-shm")
SMALL_CSV = b"outcome,dose,site\n1.5,2,a\n2.5,3,b\n3.0,4,a\n4.5,5,b\n5.0,7,a\n"


class Strict:
    """The strict server, a signed-in coordinator and steward, and an open case."""

    def __init__(self, client: TestClient, steward: TestClient, case_id: int) -> None:
        self.client = client
        self.steward = steward
        self.case_id = case_id
        self.ctx = client.app.state.services  # type: ignore[attr-defined]

    def stored(self) -> dict[str, int]:
        """Rows in every table except the audit trail (which records refusals), files kept and files half-received."""
        counts: dict[str, int] = {}
        with self.ctx.reading() as session:
            for table in Base.metadata.sorted_tables:
                if table.name not in ("audit_entries", "web_sessions"):
                    counts[table.name] = session.scalar(select(func.count()).select_from(table)) or 0
        files = self.ctx.settings.files_dir
        counts["stored files"] = sum(1 for path in files.glob("??/*"))
        counts["incoming files"] = sum(1 for path in (files / "incoming").iterdir())
        return counts


@pytest.fixture(scope="module")
def strict(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Strict]:
    app = create_app(security_settings(tmp_path_factory.mktemp("strict") / "data", refit_wait_seconds=30.0, **LIMITS))
    with TestClient(app, raise_server_exceptions=False) as client:
        add_account(app.state.services, "coordinator", "coordinator")
        add_account(app.state.services, "steward", "steward")
        sign_in(client, "coordinator")
        steward = TestClient(app, raise_server_exceptions=False)
        sign_in(steward, "steward")
        case_id = client.post("/api/v1/cases", json={"title": "Bad input"}).json()["case"]["id"]
        yield Strict(client, steward, case_id)


def assert_clean_refusal(response: Any, status: int, message: str) -> None:
    assert response.status_code == status, response.text[:500]
    assert "Traceback" not in response.text and 'File "' not in response.text
    assert message.lower() in response.text.lower(), response.text[:500]
    assert SCRIPT not in response.text


# -- uploads ---------------------------------------------------------------------------------


def zip_bytes(parts: dict[str, bytes]) -> bytes:
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w", zipfile.ZIP_DEFLATED) as archive:
        for name, content in parts.items():
            archive.writestr(name, content)
    return buffer.getvalue()


def workbook(*, sheet: bytes) -> bytes:
    """The smallest .xlsx layout the reader recognises, with ``sheet`` as its first sheet's XML."""
    return zip_bytes({"[Content_Types].xml": b"<Types/>", "xl/workbook.xml": b"<workbook/>", "xl/worksheets/sheet1.xml": sheet})


def workbook_bomb() -> bytes:
    """An .xlsx whose sheet unpacks 1,000-fold to 17 MiB (real sheets compress 5 to 30 times)."""
    return workbook(sheet=bytes(17 * MiB))


def workbook_over_the_unpacked_limit() -> bytes:
    sheet = b"<row><c>1</c></row>" * (33 * MiB // 19)
    return workbook(sheet=sheet)


def r_stream_bomb() -> bytes:
    """A gzip-compressed R data file that inflates to 40 MiB of zeros."""
    return gzip.compress(b"X\n\x00\x00\x00\x03" + bytes(40 * MiB))


def parquet_with_too_many_rows() -> bytes:
    buffer = io.BytesIO()
    pq.write_table(pa.table({"outcome": [0.5] * 2000, "dose": [1] * 2000}), buffer)
    return buffer.getvalue()


def csv_with_too_many_columns() -> bytes:
    return (",".join(f"v{i}" for i in range(60)) + "\n" + ",".join("1" for _ in range(60)) + "\n").encode()


def csv_with_too_many_rows() -> bytes:
    return b"outcome,dose\n" + b"1,2\n" * 1500


BAD_UPLOADS: dict[str, tuple[str, Callable[[], bytes], int, str]] = {
    "over the size limit": (
        "big.csv", lambda: b"a,b\n" + b"1,2\n" * (UPLOAD_LIMIT // 4 + 1000), 413, "larger than this server accepts"
    ),
    "xlsx decompression bomb": ("bomb.xlsx", workbook_bomb, 422, "decompression bombs"),
    "xlsx unpacking past the limit": ("large.xlsx", workbook_over_the_unpacked_limit, 422, "would unpack to"),
    "compressed R file bomb": ("bomb.rds", r_stream_bomb, 422, "would unpack to more than"),
    "parquet with too many rows": ("many.parquet", parquet_with_too_many_rows, 422, "more than 1,000 rows"),
    "csv with too many columns": ("wide.csv", csv_with_too_many_columns, 422, "60 columns"),
    "csv with too many rows": ("long.csv", csv_with_too_many_rows, 422, "rows"),
    "empty file": ("empty.csv", lambda: b"", 422, "is empty"),
    "a pdf named csv": ("data.csv", lambda: b"%PDF-1.7\n%\xe2\xe3\xcf\xd3\n1 0 obj\n", 422, "PDF"),
    "a zip archive": ("data.zip", lambda: zip_bytes({"data.csv": SMALL_CSV}), 422, "ZIP archive"),
    "a gzip-compressed csv": ("data.csv.gz", lambda: gzip.compress(SMALL_CSV), 422, "decompress it"),
    "random bytes": ("data.dta", lambda: bytes(range(256)) * 8, 422, "does not look like"),
    "undecodable text": ("data.csv", lambda: b"\xff\xfe\x00\x00garbage\x80\x81\x82\x83", 422, "not valid"),
    "duplicated column names": ("cols.csv", lambda: b"dose,dose,site\n1,2,a\n3,4,b\n", 422, "two columns named"),
}


@pytest.mark.parametrize("kind", BAD_UPLOADS)
def test_a_bad_upload_is_refused_with_a_reason_and_nothing_is_kept(strict: Strict, kind: str) -> None:
    name, build, status, message = BAD_UPLOADS[kind]
    before = strict.stored()

    upload = {"file": (name, build(), "application/octet-stream")}
    page = strict.client.post(f"/cases/{strict.case_id}/datasets", files=upload)

    assert_clean_refusal(page, status, message)
    assert "The file was not stored" in page.text
    assert strict.stored() == before


def test_an_oversized_upload_without_a_declared_length_is_cut_off_while_it_arrives(strict: Strict) -> None:
    before = strict.stored()
    boundary = "bad-input-boundary"

    def body() -> Iterator[bytes]:
        yield f'--{boundary}\r\nContent-Disposition: form-data; name="file"; filename="stream.csv"\r\n\r\n'.encode()
        yield b"a,b\n"
        for _ in range(UPLOAD_LIMIT // 4096 + 10):
            yield b"1,2\n" * 1024
        yield f"\r\n--{boundary}--\r\n".encode()

    response = strict.client.post(
        f"/api/v1/cases/{strict.case_id}/datasets",
        content=body(),
        headers={"content-type": f"multipart/form-data; boundary={boundary}"},
    )

    assert_clean_refusal(response, 413, "larger than this server accepts")
    assert strict.stored() == before


TRAVERSAL_NAMES = {
    "dot-dot slashes": ("../../../etc/cron.d/evil.csv", "evil.csv"),
    "dot-dot backslashes": ("..\\..\\windows\\system32\\evil.csv", "evil.csv"),
    "absolute path": ("/var/lib/secondstage/files/evil.csv", "evil.csv"),
    "drive letter": ("C:\\Users\\someone\\evil.csv", "evil.csv"),
    "control characters": ("ev\x01il\x7f\x1b.csv", "evil.csv"),
    "markup": (f"{MARKUP}.csv", None),
    "a thousand characters": ("x" * 1000 + ".csv", "x" * 251 + ".csv"),
    "undecodable bytes": (b"\xff\xfedata.csv", None),
}


@pytest.mark.parametrize("kind", TRAVERSAL_NAMES)
def test_a_file_name_is_only_ever_a_label(strict: Strict, kind: str) -> None:
    raw, expected = TRAVERSAL_NAMES[kind]
    name = raw if isinstance(raw, bytes) else raw.encode()
    boundary = "name-boundary"
    body = (
        f"--{boundary}\r\nContent-Disposition: form-data; name=\"file\"; filename=\"".encode()
        + name.replace(b'"', b"%22")
        + f'"\r\n\r\n'.encode()
        + SMALL_CSV
        + f"\r\n--{boundary}--\r\n".encode()
    )
    data_dir = strict.ctx.settings.data_dir
    before = {path for path in data_dir.parent.rglob("*")}

    response = strict.client.post(
        f"/api/v1/cases/{strict.case_id}/datasets",
        content=body,
        headers={"content-type": f"multipart/form-data; boundary={boundary}"},
    )

    assert response.status_code == 201, response.text
    dataset = response.json()["dataset"]
    if expected is not None:
        assert dataset["original_name"] == expected
    assert "/" not in dataset["original_name"] and "\\" not in dataset["original_name"]
    created = {path for path in data_dir.parent.rglob("*")} - before
    new_files = [path for path in created if path.is_file()]
    assert {path.relative_to(data_dir).parts[0] for path in new_files} <= {"files", *DATABASE_FILES}
    assert [path.name for path in new_files if path.parent.parent.name == "files"] in ([], [dataset["sha256"]])
    page = strict.client.get(f"/cases/{strict.case_id}/datasets/{dataset['id']}").text
    assert SCRIPT not in page and "<img src=x" not in page


def test_an_upload_with_no_file_name_asks_for_a_file(strict: Strict) -> None:
    before = strict.stored()
    response = strict.client.post(f"/api/v1/cases/{strict.case_id}/datasets", files={"file": ("", SMALL_CSV, "text/csv")})
    assert_clean_refusal(response, 422, "choose a data file")
    assert strict.stored() == before


def test_an_over_long_form_field_before_the_file_is_refused(strict: Strict) -> None:
    before = strict.stored()
    response = strict.client.post(
        f"/api/v1/cases/{strict.case_id}/datasets",
        files=[("note", (None, "x" * 70_000)), ("file", ("data.csv", SMALL_CSV, "text/csv"))],
    )
    assert_clean_refusal(response, 422, "longer than")
    assert strict.stored() == before


def test_latin_1_text_is_read_with_its_accents(strict: Strict) -> None:
    content = "caf\xe9_visits,dose\n1,2\n3,4\n5,6\n".encode("latin-1")
    upload = {"file": ("latin.csv", content, "text/csv")}
    response = strict.client.post(f"/api/v1/cases/{strict.case_id}/datasets", files=upload)
    assert response.status_code == 201
    assert response.json()["profile"]["variables"][0]["name"] == "café_visits"


# -- forms and the API ---------------------------------------------------------------------------


def escaped_everywhere(client: TestClient, paths: list[str]) -> None:
    for path in paths:
        page = client.get(path)
        assert page.status_code == 200, path
        assert SCRIPT not in page.text and "<img src=x" not in page.text, path


MARKUP_PLACES = (
    "case title",
    "case reference",
    "case notes",
    "claim title",
    "judgement note",
    "session link label",
    "token label",
    "full name",
    "column name",
)


@pytest.mark.parametrize("place", MARKUP_PLACES)
def test_markup_typed_anywhere_is_shown_as_text_and_never_run(strict: Strict, place: str) -> None:
    client = strict.client
    fields = {"title": "Plain", "reference": "", "notes": ""}
    if place.startswith("case "):
        fields[place.removeprefix("case ")] = MARKUP
    case_id = client.post("/api/v1/cases", json=fields).json()["case"]["id"]
    header = f'outcome,"{MARKUP.replace(chr(34), chr(34) * 2)}",site' if place == "column name" else "outcome,dose,site"
    csv = (header + "\n" + SMALL_CSV.decode().split("\n", 1)[1]).encode()
    dataset = client.post(f"/api/v1/cases/{case_id}/datasets", files={"file": ("d.csv", csv, "text/csv")}).json()["dataset"]
    focal = MARKUP if place == "column name" else "dose"
    spec = {"design": "regression", "outcome": "outcome", "endogenous": [focal], "covariance": "homoskedastic"}
    if place == "claim title":
        spec["title"] = MARKUP
    claim = client.post(f"/api/v1/cases/{case_id}/claims", json={"dataset_id": dataset["id"], "spec": spec}).json()["claim"]
    refit = client.post(f"/api/v1/cases/{case_id}/refits", json={"claim_id": claim["id"], "dataset_id": dataset["id"]}).json()
    assert refit["state"] == "finished", refit
    base = f"/cases/{case_id}/refits/{refit['id']}"
    item = client.get(f"/api/v1{base}/checklist").json()["sections"][0]["items"][0]["id"]
    client.put(f"/api/v1{base}/judgements/{item}", json={"standing": None, "note": MARKUP if place == "judgement note" else "n"})
    label = MARKUP if place == "session link label" else "club"
    key = client.post(f"/api/v1{base}/links", json={"hours": 1, "label": label}).json()["key"]
    if place == "token label":
        client.post("/account/tokens", data={"label": MARKUP})
    if place == "full name":
        person = users.add_user(
            strict.ctx, name=f"person{case_id}", role="reader", password="a long password", full_name=MARKUP
        )
        client.post(f"/cases/{case_id}/access", data={"user_id": person.id})
        escaped_everywhere(strict.steward, ["/people"])

    escaped_everywhere(
        client,
        [
            "/",
            f"/cases/{case_id}",
            f"/cases/{case_id}/datasets/{dataset['id']}",
            f"/cases/{case_id}/claims/{claim['id']}",
            f"/cases/{case_id}/claims/{claim['id']}/revise",
            base,
            f"{base}/checklist",
            f"/cases/{case_id}/audit",
            "/account",
            f"/follow/{key}",
            f"/follow/{key}/checklist",
            f"/follow/{key}/present/1",
        ],
    )
    report = client.get(f"/api/v1{base}/reports/html").text
    assert SCRIPT not in report


@dataclass(frozen=True)
class BadRequest:
    """A request and the answer it must get. ``SIGN-IN`` and ``ACCOUNT`` send ``target`` as a name through those forms."""

    method: str
    target: str
    status: int
    message: str
    options: dict[str, Any] = field(default_factory=dict)


FORM = {"content-type": "application/x-www-form-urlencoded"}
JSON = {"content-type": "application/json"}
CODE_IN_A_FILTER = {
    "design": "regression",
    "outcome": "outcome",
    "endogenous": ["dose"],
    "filters": [{"column": "site", "op": "==", "value": "__import__('os').system('id')"}],
}

BAD_REQUESTS: dict[str, BadRequest] = {
    "an over-long case title": BadRequest("POST", "/api/v1/cases", 422, "at most 300", {"json": {"title": "t" * 301}}),
    "an empty case title": BadRequest("POST", "/cases", 422, "title", {"data": {"title": "   "}}),
    "an over-long note": BadRequest("PUT", "/api/v1{refit}/judgements/{item}", 422, "20000", {"json": {"note": "n" * 20_001}}),
    "a standing that does not exist": BadRequest(
        "PUT", "/api/v1{refit}/judgements/{item}", 422, "standing", {"json": {"standing": "<b>fine</b>"}}
    ),
    "an item that does not exist": BadRequest("PUT", "/api/v1{refit}/judgements/no.such.item", 404, "no checklist item", {"json": {}}),
    "undecodable bytes in a form": BadRequest(
        "POST", "/cases", 303, "", {"content": b"title=%FF%FE%FD", "headers": FORM}
    ),
    "undecodable bytes in json": BadRequest(
        "POST", "/api/v1/cases", 400, "parsing the body", {"content": b'{"title": "\xff\xfe"}', "headers": JSON}
    ),
    "json that is not json": BadRequest("POST", "/api/v1/cases", 422, "not valid JSON", {"content": b"{title: 'x'", "headers": JSON}),
    "json of the wrong shape": BadRequest("POST", "/api/v1/cases", 422, "invalid", {"json": ["title", "x"]}),
    "an unknown field": BadRequest("POST", "/api/v1/cases", 422, "extra", {"json": {"title": "x", "owner": "root"}}),
    "an id beyond 64 bits": BadRequest("GET", "/api/v1/cases/99999999999999999999", 422, "less than or equal"),
    "a negative id": BadRequest("GET", "/cases/-1", 422, "greater than or equal"),
    "an id that is not a number": BadRequest("GET", "/api/v1/cases/1%20OR%201=1", 422, "case_id: should be a whole number"),
    "a report format that does not exist": BadRequest("GET", "/api/v1{refit}/reports/exe", 404, "no report format"),
    "a figure path that climbs out": BadRequest("GET", "{refit}/figures/..%2F..%2Fsecret.svg", 404, "not found"),
    "a sort key with sql in it": BadRequest("GET", "/api/v1/cases?sort=title;DROP TABLE cases", 422, "sort"),
    "a formula string as the outcome": BadRequest(
        "POST", "/api/v1/cases/{case}/claims", 422, "focal regressor", {"json": {"spec": {"outcome": "y ~ x + __import__('os')"}}}
    ),
    "a filter value that looks like code": BadRequest(
        "POST", "/api/v1/cases/{case}/claims/check", 200, '"valid":true', {"json": {"spec": CODE_IN_A_FILTER}}
    ),
    "a link valid for a year": BadRequest("POST", "/api/v1{refit}/links", 422, "hours", {"json": {"hours": 8760}}),
    "a link valid for text": BadRequest("POST", "{refit}/links", 422, "hours", {"data": {"hours": "soon"}}),
    "a sign-in name of 5000 characters": BadRequest("SIGN-IN", "x" * 5000, 401, "not right"),
    "a sign-in name with markup": BadRequest("SIGN-IN", MARKUP, 401, "not right"),
    "a password of 100,000 characters": BadRequest("SIGN-IN", "coordinator", 401, "not right", {"password": "p" * 100_000}),
    "an account name with markup": BadRequest("ACCOUNT", MARKUP, 422, "letters, digits"),
}


@pytest.fixture(scope="module")
def reviewed(strict: Strict) -> dict[str, str]:
    client = strict.client
    dataset = client.post(f"/api/v1/cases/{strict.case_id}/datasets", files={"file": ("d.csv", SMALL_CSV, "text/csv")}).json()["dataset"]
    spec = {"design": "regression", "outcome": "outcome", "endogenous": ["dose"], "covariance": "homoskedastic"}
    claim = client.post(f"/api/v1/cases/{strict.case_id}/claims", json={"dataset_id": dataset["id"], "spec": spec}).json()["claim"]
    refit = client.post(f"/api/v1/cases/{strict.case_id}/refits", json={"claim_id": claim["id"], "dataset_id": dataset["id"]}).json()
    base = f"/cases/{strict.case_id}/refits/{refit['id']}"
    item = client.get(f"/api/v1{base}/checklist").json()["sections"][0]["items"][0]["id"]
    return {"case": str(strict.case_id), "refit": base, "item": item, "dataset": str(dataset["id"])}


@pytest.mark.parametrize("kind", BAD_REQUESTS)
def test_a_bad_request_gets_a_clear_answer_and_changes_nothing(strict: Strict, reviewed: dict[str, str], kind: str) -> None:
    bad = BAD_REQUESTS[kind]
    before = strict.stored()
    if bad.method == "SIGN-IN":
        browser = TestClient(strict.client.app)
        token = form_token(browser.get("/sign-in").text)
        data = {"name": bad.target, "password": bad.options.get("password", "x"), "csrf_token": token}
        response = browser.post("/sign-in", data=data)
    elif bad.method == "ACCOUNT":
        response = strict.steward.post("/people", data={"name": bad.target, "role": "reader", "password": "a long password"})
    else:
        options = _with_dataset(bad.options, reviewed["dataset"]) if "spec" in str(bad.options) else bad.options
        response = strict.client.request(bad.method, bad.target.format(**reviewed), follow_redirects=False, **options)
    assert response.status_code == bad.status, (kind, response.text[:400])
    assert "Traceback" not in response.text and SCRIPT not in response.text
    assert bad.message.lower() in response.text.lower(), (kind, response.text[:400])
    if bad.status >= 400:
        assert strict.stored() == before


def _with_dataset(options: dict[str, Any], dataset_id: str) -> dict[str, Any]:
    return {"json": {**options["json"], "dataset_id": int(dataset_id)}}


def test_the_number_of_cases_tried() -> None:
    """Reported in the README: every bad upload, file name, markup place and bad request in this module."""
    single_cases = 5  # streamed oversize, no file name, over-long field, latin-1 text, code in a filter value
    tried = len(BAD_UPLOADS) + len(TRAVERSAL_NAMES) + len(MARKUP_PLACES) + len(BAD_REQUESTS) + single_cases
    assert tried == 60


def test_the_checked_filter_value_stays_a_plain_string(strict: Strict, reviewed: dict[str, str], tmp_path: Path) -> None:
    canary = tmp_path / "evaluated"
    code = f"__import__('pathlib').Path({str(canary)!r}).touch()"
    spec = {
        "design": "regression",
        "outcome": "outcome",
        "endogenous": ["dose"],
        "filters": [{"column": "site", "op": "==", "value": code}],
    }
    check = strict.client.post(
        f"/api/v1/cases/{reviewed['case']}/claims/check", json={"dataset_id": int(reviewed["dataset"]), "spec": spec}
    ).json()
    assert check["valid"] and check["spec"]["filters"][0]["value"] == code
    assert not canary.exists()
