"""Claims: validated against their data before anything is stored; revising keeps every version."""

from __future__ import annotations

from typing import Any

import pytest
from sqlalchemy import func, select

from app.provenance import claim_sha256
from app.services import cases, claims, refits
from app.services.context import ServiceContext
from app.services.errors import ClaimRejected, NotFound
from app.spec import parse_claim
from app.store.models import Claim
from tests.services.conftest import Reviewed, upload


@pytest.fixture
def data(ctx: ServiceContext, demo_csv: bytes) -> tuple[int, int]:
    case_id = cases.create_case(ctx, title="Claims").case.id
    return case_id, upload(ctx, case_id, demo_csv, "walking.csv")


def test_a_claim_is_stored_as_its_validated_spec(
    ctx: ServiceContext, data: tuple[int, int], demo_spec: dict[str, Any]
) -> None:
    case_id, dataset_id = data
    detail = claims.create_claim(ctx, case_id=case_id, dataset_id=dataset_id, spec=demo_spec)

    parsed = parse_claim(demo_spec)
    assert (detail.claim.number, detail.claim.version, detail.claim.is_latest) == (1, 1, True)
    assert detail.claim.spec == parsed.model_dump(mode="json")
    assert detail.claim.spec_sha256 == claim_sha256(parsed)
    assert detail.claim.title == demo_spec["title"]
    assert detail.claim.drafted_on_id == dataset_id
    assert detail.claim.spec["claimed"]["estimate"] == demo_spec["claimed"]["estimate"]


PROBLEMS = {
    "too few instruments": (
        {"endogenous": ["daily_steps_k", "bmi"], "instruments": ["device_lottery"], "controls": ["age"]},
        "1 instrument(s) for 2 focal regressor(s)",
    ),
    "unknown column": ({"controls": ["age", "income"]}, "column 'income' is not in data version 1"),
    "unknown field": ({"instrumnets": ["device_lottery"]}, "unknown field 'instrumnets'"),
    "claimed term not focal": ({"claimed": {"term": "age", "estimate": "1.0"}}, "'age' is not a focal regressor"),
    "cluster without columns": ({"covariance": "cluster"}, "needs one or two 'cluster' columns"),
}


@pytest.mark.parametrize("kind", PROBLEMS)
def test_problems_are_found_before_anything_is_stored(
    ctx: ServiceContext, data: tuple[int, int], demo_spec: dict[str, Any], kind: str
) -> None:
    case_id, dataset_id = data
    changes, message = PROBLEMS[kind]
    spec = {**demo_spec, **changes}

    check = claims.check_claim(ctx, case_id=case_id, dataset_id=dataset_id, spec=spec)
    assert not check.valid and check.spec is None
    assert any(message in problem.message for problem in check.problems), check.problems

    with pytest.raises(ClaimRejected) as caught:
        claims.create_claim(ctx, case_id=case_id, dataset_id=dataset_id, spec=spec)
    assert any(message in problem.message for problem in caught.value.problems)
    with ctx.reading() as session:
        assert session.scalar(select(func.count()).select_from(Claim)) == 0


def test_a_text_column_cannot_be_a_numeric_role(ctx: ServiceContext) -> None:
    case_id = cases.create_case(ctx, title="Text").case.id
    dataset_id = upload(ctx, case_id, b"wage,school,region\n1.5,12,north\n2.5,16,south\n1.0,10,north\n")
    spec = {"outcome": "wage", "endogenous": ["region"], "design": "regression", "covariance": "robust"}

    check = claims.check_claim(ctx, case_id=case_id, dataset_id=dataset_id, spec=spec)

    assert [problem.field for problem in check.problems] == ["endogenous"]
    assert "holds text, not numbers" in check.problems[0].message


def test_a_valid_check_returns_the_normalised_spec(
    ctx: ServiceContext, data: tuple[int, int], demo_spec: dict[str, Any]
) -> None:
    case_id, dataset_id = data
    check = claims.check_claim(ctx, case_id=case_id, dataset_id=dataset_id, spec=demo_spec)
    assert check.valid and check.problems == []
    assert check.spec == parse_claim(demo_spec).model_dump(mode="json")


def test_revising_adds_a_version_and_keeps_the_old_one_and_its_refits(
    ctx: ServiceContext, reviewed: Reviewed, demo_spec: dict[str, Any]
) -> None:
    before = claims.get_claim(ctx, case_id=reviewed.case_id, claim_id=reviewed.claim_id)
    revised_spec = {**demo_spec, "instruments": ["device_lottery"]}

    revised = claims.revise_claim(
        ctx,
        case_id=reviewed.case_id,
        claim_id=reviewed.claim_id,
        dataset_id=reviewed.dataset_id,
        spec=revised_spec,
        change_note="walkability moves blood pressure directly",
    )

    assert (revised.claim.number, revised.claim.version) == (1, 2)
    assert revised.claim.change_note == "walkability moves blood pressure directly"
    assert [(change.field, change.before, change.after) for change in revised.changes_from_previous] == [
        ("instruments", ["device_lottery", "walkability_index"], ["device_lottery"])
    ]
    old = claims.get_claim(ctx, case_id=reviewed.case_id, claim_id=reviewed.claim_id)
    assert old.claim.spec == before.claim.spec and not old.claim.is_latest
    assert [version.version for version in old.versions] == [1, 2]
    refit = refits.refit_status(ctx, case_id=reviewed.case_id, refit_id=reviewed.refit_id)
    assert (refit.claim_id, refit.claim_version) == (reviewed.claim_id, 1)


def test_a_revision_that_changes_nothing_is_refused(
    ctx: ServiceContext, reviewed: Reviewed, demo_spec: dict[str, Any]
) -> None:
    with pytest.raises(ClaimRejected, match="nothing changed"):
        claims.revise_claim(
            ctx, case_id=reviewed.case_id, claim_id=reviewed.claim_id, dataset_id=reviewed.dataset_id, spec=demo_spec
        )


def test_the_editor_offers_the_columns_of_the_chosen_data_version(ctx: ServiceContext, reviewed: Reviewed) -> None:
    editor = claims.claim_editor(ctx, case_id=reviewed.case_id, claim_id=reviewed.claim_id)

    assert editor.dataset.id == reviewed.dataset_id
    assert editor.base is not None and editor.base.id == reviewed.claim_id
    columns = {column.name: column for column in editor.columns}
    assert columns["bmi"].kind == "numeric" and columns["bmi"].n_missing > 0
    assert columns["female"].kind == "binary"


def test_the_editor_needs_a_data_file_first(ctx: ServiceContext) -> None:
    case_id = cases.create_case(ctx, title="Empty").case.id
    with pytest.raises(NotFound, match="upload the replication data first"):
        claims.claim_editor(ctx, case_id=case_id)


def test_a_claim_of_another_case_is_not_found(ctx: ServiceContext, reviewed: Reviewed) -> None:
    other = cases.create_case(ctx, title="Other").case.id
    with pytest.raises(NotFound):
        claims.get_claim(ctx, case_id=other, claim_id=reviewed.claim_id)
