"""HTML pages: each renders, links its JSON twin, and its forms work without scripts."""

from __future__ import annotations

import re
from typing import Any

import pytest
from fastapi.testclient import TestClient

from app.services import refits
from app.web.templating import number
from tests.web.conftest import Reviewed
from tests.walking_demo import add_unfinished_refit

TWIN = re.compile(r'<a class="twin" href="([^"]+)"')


def page_paths(reviewed: Reviewed) -> list[str]:
    return [
        "/",
        "/?q=walk&verdict=&sort=verdict&order=asc",
        reviewed.case,
        f"{reviewed.case}/datasets/{reviewed.dataset_id}",
        f"{reviewed.case}/datasets/new",
        f"{reviewed.case}/claims/new",
        f"{reviewed.case}/claims/{reviewed.claim_id}",
        f"{reviewed.case}/claims/{reviewed.claim_id}/revise",
        reviewed.refit,
        f"{reviewed.refit}/checklist",
        f"{reviewed.case}/compare?before={reviewed.refit_id}&after={reviewed.refit_id}",
        f"{reviewed.case}/delete",
        "/api",
    ]


def test_every_page_renders_and_its_json_twin_answers(client: TestClient, reviewed: Reviewed) -> None:
    for path in page_paths(reviewed):
        page = client.get(path)
        assert page.status_code == 200, path
        assert page.headers["content-type"].startswith("text/html")
        twin = TWIN.search(page.text)
        assert twin is not None, f"{path} does not link its JSON twin"
        data = client.get(twin.group(1).replace("&amp;", "&"))
        assert data.status_code == 200, (path, twin.group(1))
        assert data.headers["content-type"].startswith("application/json")


def test_the_new_case_form_links_the_api_description_of_its_request(client: TestClient) -> None:
    page = client.get("/cases/new")
    assert page.status_code == 200
    assert '<label for="title">' in page.text and 'name="title"' in page.text
    twin = TWIN.search(page.text)
    assert twin is not None and twin.group(1) == "/api/v1/openapi.json"
    assert "NewCase" in client.get(twin.group(1)).json()["components"]["schemas"]


def test_results_and_checklist_pages_carry_the_cautions(client: TestClient, reviewed: Reviewed) -> None:
    for path in (reviewed.refit, f"{reviewed.refit}/checklist"):
        text = client.get(path).text
        assert "A flag is a reason to ask the authors, not proof of error or misconduct." in text
        assert "you weigh them and decide" in text
        assert "stays on this server" in text


def test_the_results_page_shows_the_manuscript_beside_every_estimator(
    client: TestClient, reviewed: Reviewed, demo_spec: dict[str, Any]
) -> None:
    text = client.get(reviewed.refit).text
    findings = client.get(f"/api/v1{reviewed.refit}").json()["findings"]
    assert "Manuscript (2SLS)" in text and f">{demo_spec['claimed']['estimate']}<" in text
    for estimator in findings["estimators"]:
        assert estimator["name"] in text
    tsls = next(row for row in findings["estimates"] if row["estimator"] == "2sls" and row["term"] == "daily_steps_k")
    assert f">{number(tsls['estimate'])}<" in text
    assert 'alt="Effect of daily_steps_k on systolic_bp.' in text
    assert "First-stage F for daily_steps_k" in text


def test_figures_are_svg_with_text_alternatives(client: TestClient, reviewed: Reviewed) -> None:
    for name in ("estimates", "first-stage"):
        figure = client.get(f"{reviewed.refit}/figures/{name}.svg")
        assert figure.status_code == 200
        assert figure.headers["content-type"].startswith("image/svg+xml")
        assert "<svg" in figure.text and "daily_steps_k" in figure.text
    assert client.get(f"{reviewed.refit}/figures/horoscope.svg").status_code == 422


def test_a_case_is_opened_with_the_form(client: TestClient) -> None:
    created = client.post("/cases", data={"title": "School meals and attention", "reference": "PS-9"}, follow_redirects=False)
    assert created.status_code == 303
    page = client.get(created.headers["location"])
    assert "School meals and attention" in page.text and "PS-9" in page.text


def test_an_invalid_case_form_keeps_what_was_typed(client: TestClient) -> None:
    page = client.post("/cases", data={"title": "  ", "reference": "PS-10", "notes": "from the editor"})
    assert page.status_code == 422
    assert "title" in page.text and 'value="PS-10"' in page.text and "from the editor" in page.text


def test_a_file_is_uploaded_with_the_form(client: TestClient, reviewed: Reviewed, demo_csv: bytes) -> None:
    uploaded = client.post(
        f"{reviewed.case}/datasets", files={"file": ("again.csv", demo_csv, "text/csv")}, follow_redirects=False
    )
    assert uploaded.status_code == 303
    profile = client.get(uploaded.headers["location"])
    assert "Data version 2: again.csv" in profile.text
    assert '<svg class="spark"' in profile.text and 'aria-label="Histogram of systolic_bp' in profile.text


def claim_form_fields(columns: list[str], roles: dict[str, str], **extra: Any) -> dict[str, Any]:
    fields: dict[str, Any] = {"design": "iv", "covariance": "robust", "intercept": "1", **extra}
    for position, name in enumerate(columns):
        fields[f"role-{position}"] = roles.get(name, "")
    return fields


def test_a_claim_is_entered_with_the_form_and_refitted(client: TestClient, reviewed: Reviewed) -> None:
    editor = client.get(f"/api/v1/cases/{reviewed.case_id}/claims/editor").json()
    columns = [column["name"] for column in editor["columns"]]
    roles = {
        "systolic_bp": "outcome",
        "daily_steps_k": "endogenous",
        "device_lottery": "instrument",
        "age": "control",
        "bmi": "control",
        "female": "control",
    }
    fields = claim_form_fields(
        columns,
        roles,
        dataset_id=str(reviewed.dataset_id),
        title="Lottery only",
        then="refit",
        **{"claimed-estimator": "2sls", "claimed-estimate": "-1.4", "filter-column-0": "age", "filter-op-0": ">=", "filter-value-0": "25"},
    )

    response = client.post(f"{reviewed.case}/claims", data=fields, follow_redirects=False)

    assert response.status_code == 303
    assert re.fullmatch(rf"{reviewed.case}/refits/\d+", response.headers["location"])
    refit = client.get(f"/api/v1{response.headers['location']}").json()
    spec = refit["findings"]["claim"]
    assert spec["instruments"] == ["device_lottery"]
    assert spec["filters"] == [{"column": "age", "op": ">=", "value": 25}]
    assert spec["claimed"]["estimate"] == "-1.4"


def test_a_claim_form_with_problems_is_shown_again_with_them(client: TestClient, reviewed: Reviewed) -> None:
    editor = client.get(f"/api/v1/cases/{reviewed.case_id}/claims/editor").json()
    columns = [column["name"] for column in editor["columns"]]
    roles = {"systolic_bp": "outcome", "bmi": "outcome", "daily_steps_k": "endogenous"}
    fields = claim_form_fields(columns, roles, dataset_id=str(reviewed.dataset_id), title="Two outcomes", **{"claimed-n_obs": "many"})

    page = client.post(f"{reviewed.case}/claims", data=fields)

    assert page.status_code == 422
    assert "choose one column as outcome, not 2 (bmi, systolic_bp)" in page.text
    assert "Observations: &#39;many&#39; is not a whole number" in page.text
    assert 'value="Two outcomes"' in page.text
    assert len(client.get(f"/api/v1/cases/{reviewed.case_id}").json()["claims"]) == 1


def test_inline_validation_answers_with_the_problems_only(client: TestClient, reviewed: Reviewed) -> None:
    editor = client.get(f"/api/v1/cases/{reviewed.case_id}/claims/editor").json()
    columns = [column["name"] for column in editor["columns"]]
    roles = {"systolic_bp": "outcome", "daily_steps_k": "endogenous", "bmi": "endogenous", "device_lottery": "instrument"}
    fields = claim_form_fields(columns, roles, dataset_id=str(reviewed.dataset_id))

    fragment = client.post(f"{reviewed.case}/claims/check", data=fields, headers={"HX-Request": "true"})

    assert fragment.status_code == 200
    assert fragment.text.lstrip().startswith('<div id="claim-problems"')
    assert "1 instrument(s) for 2 focal regressor(s)" in fragment.text
    fields["role-" + str(columns.index("bmi"))] = "instrument"
    fragment = client.post(f"{reviewed.case}/claims/check", data=fields, headers={"HX-Request": "true"})
    assert "nothing to correct so far" in fragment.text


def test_revising_a_claim_with_the_form_keeps_its_order_and_adds_a_version(client: TestClient, reviewed: Reviewed) -> None:
    form = client.get(f"{reviewed.case}/claims/{reviewed.claim_id}/revise").text
    fields = form_values(form)
    fields["claimed-estimate"] = "-2.9"
    fields["change_note"] = "the erratum prints -2.9"

    response = client.post(f"{reviewed.case}/claims/{reviewed.claim_id}/revise", data=fields, follow_redirects=False)

    assert response.status_code == 303
    claim = client.get(f"/api/v1{response.headers['location']}").json()
    assert claim["claim"]["version"] == 2
    assert [(change["field"], change["after"]) for change in claim["changes_from_previous"]] == [("claimed.estimate", "-2.9")]


def test_a_judgement_is_saved_with_the_plain_form_and_survives_reload(client: TestClient, reviewed: Reviewed) -> None:
    item_id = client.get(f"/api/v1{reviewed.refit}/checklist").json()["sections"][0]["items"][0]["id"]
    saved = client.post(
        f"{reviewed.refit}/checklist/{item_id}", data={"standing": "serious", "note": "Ask for the code."}, follow_redirects=False
    )
    assert saved.status_code == 303
    assert saved.headers["location"].endswith(f"#item-{item_id.replace('.', '--')}")
    page = client.get(f"{reviewed.refit}/checklist").text
    assert "Ask for the code.</textarea>" in page
    assert '<option value="serious" selected>' in page


def test_htmx_saves_answer_with_out_of_band_updates(client: TestClient, reviewed: Reviewed) -> None:
    item_id = client.get(f"/api/v1{reviewed.refit}/checklist").json()["sections"][0]["items"][0]["id"]
    key = item_id.replace(".", "--")
    fragment = client.post(
        f"{reviewed.refit}/checklist/{item_id}", data={"standing": "sound", "note": ""}, headers={"HX-Request": "true"}
    )
    assert fragment.status_code == 200
    for element in (f'id="standing-of-{key}"', f'id="saved-{key}"', 'id="verdict"', 'id="judged-count"'):
        assert re.search(element + r'[^>]*hx-swap-oob="true"', fragment.text), element
    assert "1 of" in fragment.text


def test_progress_fragment_asks_for_a_reload_when_done(client: TestClient, reviewed: Reviewed) -> None:
    fragment = client.get(f"{reviewed.refit}/progress")
    assert fragment.status_code == 200
    assert fragment.headers["HX-Refresh"] == "true"


def test_a_case_is_deleted_after_confirmation(client: TestClient, reviewed: Reviewed) -> None:
    confirm = client.get(f"{reviewed.case}/delete")
    assert "This cannot be undone." in confirm.text
    deleted = client.post(f"{reviewed.case}/delete", follow_redirects=False)
    assert deleted.status_code == 303 and deleted.headers["location"] == "/"
    assert client.get(reviewed.case).status_code == 404


def test_a_refit_started_from_the_case_page(client: TestClient, reviewed: Reviewed) -> None:
    response = client.post(
        f"{reviewed.case}/refits", data={"claim_id": reviewed.claim_id, "dataset_id": reviewed.dataset_id}, follow_redirects=False
    )
    assert response.status_code == 303
    assert client.get(response.headers["location"]).status_code == 200


@pytest.mark.parametrize("order", ["asc", "desc"])
def test_the_overview_marks_the_sorted_column(client: TestClient, reviewed: Reviewed, order: str) -> None:
    text = client.get("/", params={"sort": "serious", "order": order}).text
    assert f'aria-sort="{"ascending" if order == "asc" else "descending"}"' in text


def form_values(html: str) -> dict[str, Any]:
    """The values a browser would submit from the claim form (selected options, checked boxes, inputs)."""
    form = html[html.index('id="claim-form"') :]
    form = form[: form.index("</form>")]
    values: dict[str, Any] = {}

    def add(name: str, value: str) -> None:
        if name in values:
            existing = values[name]
            values[name] = [*existing, value] if isinstance(existing, list) else [existing, value]
        else:
            values[name] = value

    for tag in re.findall(r"<input[^>]*>", form):
        name = re.search(r'name="([^"]+)"', tag)
        value = re.search(r'value="([^"]*)"', tag)
        if name is None or ('type="checkbox"' in tag and "checked" not in tag):
            continue
        add(name.group(1), value.group(1).replace("&amp;", "&").replace("&#34;", '"') if value else "")
    for name, body in re.findall(r'<select[^>]*name="([^"]+)"[^>]*>(.*?)</select>', form, re.DOTALL):
        chosen = re.search(r'<option value="([^"]*)" selected>', body) or re.search(r'<option value="([^"]*)"', body)
        add(name, chosen.group(1) if chosen else "")
    for name, body in re.findall(r'<textarea[^>]*name="([^"]+)"[^>]*>(.*?)</textarea>', form, re.DOTALL):
        add(name, body)
    return values


def test_a_refit_still_computing_shows_its_progress_and_polls(client: TestClient, reviewed: Reviewed) -> None:
    refit_id = add_unfinished_refit(
        client.app.state.services,  # type: ignore[attr-defined]
        case_id=reviewed.case_id,
        claim_id=reviewed.claim_id,
        dataset_id=reviewed.dataset_id,
        state="waiting",
        stage=refits.STAGES[0],
    )
    base = f"{reviewed.case}/refits/{refit_id}"

    page = client.get(base)
    assert page.status_code == 200
    assert '<noscript><meta http-equiv="refresh" content="2"></noscript>' in page.text
    assert f'hx-get="{base}/progress" hx-trigger="every 1s"' in page.text
    assert '<li class="current">Waiting for the worker</li>' in page.text
    fragment = client.get(f"{base}/progress")
    assert "HX-Refresh" not in fragment.headers
    assert client.get(f"{base}/checklist").status_code == 409
