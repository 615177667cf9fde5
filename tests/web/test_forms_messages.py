"""Form problems read in the form's own words, all at once, each tied to its control."""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path

import pytest
from fastapi.testclient import TestClient

from app.services.errors import Problem
from app.settings import Settings
from app.web import labels
from app.web.app import create_app
from tests.accounts import FAST_HASHING, add_account, form_token
from tests.web.conftest import Reviewed


@pytest.mark.parametrize(
    ("field", "message", "shown"),
    [
        ("claimed.n_obs", "claimed.n_obs: '6.5' is not a whole number", "Observations: '6.5' is not a whole number"),
        ("sensitivity.alpha", "sensitivity.alpha: should be less than 1", "Sensitivity: significance level: should be less than 1"),
        ("outcome", "outcome: this is required", "Outcome: this is required"),
        ("repeat", "the two passwords differ", "The same password again: the two passwords differ"),
        (None, "nothing changed: this is claim 1 version 2", "nothing changed: this is claim 1 version 2"),
        ("spec.unknown", "unknown field 'spec.unknown'", "unknown field 'spec.unknown'"),
    ],
)
def test_a_problem_is_shown_with_the_forms_label(field: str | None, message: str, shown: str) -> None:
    assert labels.problem_text(field, message) == shown


def test_problems_are_found_by_their_control() -> None:
    problems = [Problem("claimed.n_obs", "claimed.n_obs: too many"), Problem("outcome", "outcome: missing"), Problem(None, "x")]
    assert labels.problems_at(problems, "claimed-n_obs") == ["Observations: too many"]
    assert labels.problems_at(problems, "roles") == ["Outcome: missing"]
    assert labels.problems_at(problems, "title") == []


def test_the_claim_form_ties_each_problem_to_its_field(client: TestClient, reviewed: Reviewed) -> None:
    editor = client.get(f"/api/v1/cases/{reviewed.case_id}/claims/editor").json()
    columns = [column["name"] for column in editor["columns"]]
    fields = {"dataset_id": str(reviewed.dataset_id), "design": "iv", "covariance": "robust", "intercept": "1"}
    fields |= {f"role-{i}": {"systolic_bp": "outcome", "bmi": "outcome"}.get(name, "") for i, name in enumerate(columns)}
    fields |= {"claimed-n_obs": "6.5", "sensitivity-alpha": "1.5"}

    page = client.post(f"/cases/{reviewed.case_id}/claims", data=fields)

    assert page.status_code == 422
    text = page.text
    assert '<a href="#claimed-n_obs">Observations: &#39;6.5&#39; is not a whole number</a>' in text
    assert '<a href="#roles">Outcome: choose one column as outcome, not 2 (bmi, systolic_bp)</a>' in text
    assert 'id="claimed-n_obs" name="claimed-n_obs" type="text" inputmode="numeric" size="10" value="6.5" aria-invalid="true" aria-describedby="problem-claimed-n_obs">' in text
    assert 'id="problem-claimed-n_obs">Observations: &#39;6.5&#39; is not a whole number</p>' in text
    assert '<fieldset id="roles" tabindex="-1" aria-describedby="problem-roles">' in text
    assert "claimed.n_obs:" not in text


@pytest.fixture
def first_run(tmp_path: Path) -> Iterator[TestClient]:
    app = create_app(Settings(data_dir=tmp_path / "data", **FAST_HASHING), first_run_key="the-printed-key")
    with TestClient(app) as client:
        yield client


def test_the_first_run_form_lists_every_problem_at_once(first_run: TestClient) -> None:
    page = first_run.get("/welcome/the-printed-key")
    fields = {"name": "!", "password": "short", "repeat": "different", "csrf_token": form_token(page.text)}

    answer = first_run.post("/welcome/the-printed-key", data=fields)

    assert answer.status_code == 422
    for control in ("name", "password", "repeat"):
        assert f'<a href="#{control}">' in answer.text
        assert f'aria-describedby="problem-{control}' in answer.text
    assert "Name to sign in with: 2 to 60 characters" in answer.text
    assert "The same password again: the two passwords differ" in answer.text


def test_the_people_form_lists_a_taken_name_with_the_other_problems(client: TestClient) -> None:
    add_account(client.app.state.services, "ines", "referee")  # type: ignore[attr-defined]

    answer = client.post("/people", data={"name": "Ines", "role": "referee", "password": "short"})

    assert answer.status_code == 422
    assert "Name to sign in with: there is already an account named &#39;ines&#39;" in answer.text
    assert '<a href="#password">Password: ' in answer.text
    assert 'aria-invalid="true" aria-describedby="problem-name"' in answer.text


def test_a_refused_password_reset_points_at_that_persons_field_not_the_add_form(client: TestClient) -> None:
    ines = add_account(client.app.state.services, "ines", "referee")  # type: ignore[attr-defined]

    answer = client.post(f"/people/{ines}/password", data={"password": "short"})

    assert answer.status_code == 422
    assert f'<a href="#password-{ines}">New password: ' in answer.text
    assert f'aria-invalid="true" aria-describedby="problem-password-{ines}"' in answer.text
    assert 'id="password" name="password" type="password" autocomplete="new-password" minlength="10" maxlength="1024" required aria-describedby="password-hint"' in answer.text
    assert "<details open>" in answer.text, "the person's collapsed forms open on the problem"


def test_a_removal_without_the_tick_points_at_that_persons_box(client: TestClient) -> None:
    ines = add_account(client.app.state.services, "ines", "referee")  # type: ignore[attr-defined]

    answer = client.post(f"/people/{ines}/remove", data={})

    assert answer.status_code == 422
    assert f'<a href="#confirm-{ines}">Confirm the removal: tick the box' in answer.text
    assert f'aria-describedby="problem-confirm-{ines}"' in answer.text
