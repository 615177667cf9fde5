"""Claims: validating a claim against its dataset, storing it, revising it as a new version.

A claim is stored as the validated spec (``ClaimSpec.model_dump(mode="json")``);
nothing in it is ever evaluated. Editing never overwrites: it adds a version
with the same claim number, so refits keep pointing at the exact version they
computed.
"""

from __future__ import annotations

from typing import Any

from pydantic import ValidationError
from sqlalchemy import func, select

from app.auth.roles import Action
from app.provenance import claim_sha256
from app.services.context import ServiceContext
from app.services.diffs import field_changes
from app.services.errors import ClaimRejected, NotFound, Problem, problems_from
from app.services.records import (
    case_info,
    claim_info,
    dataset_info,
    latest_claim_versions,
    load_case,
    load_claim,
    load_dataset,
    record_event,
    refit_info,
)
from app.services.views import ClaimCheck, ClaimDetail, ClaimEditor, ColumnChoice, ProblemInfo
from app.spec import ClaimSpec
from app.store.models import Claim, Dataset, Refit

NUMERIC_KINDS = ("numeric", "binary", "integer")

NUMERIC_ROLES: dict[str, str] = {
    "outcome": "the outcome",
    "endogenous": "a focal regressor",
    "instruments": "an instrument",
    "treatment": "a randomized treatment",
    "mediator": "the mediator",
    "controls": "a control",
    "weights": "the weights",
    "selected": "the selection indicator",
    "selection_covariates": "a selection covariate",
    "benchmarks": "a benchmark covariate",
    "pre_treatment": "a pre-treatment covariate",
}
"""Roles whose columns enter the model as numbers, with their name in messages."""


def claim_editor(
    ctx: ServiceContext, *, case_id: int, dataset_id: int | None = None, claim_id: int | None = None
) -> ClaimEditor:
    """The claim form's data: the chosen dataset's columns and, when revising, the version being edited.

    The form exists to change the case, so it needs ``Action.EDIT``.
    """
    actor = ctx.actor
    with ctx.reading() as session:
        case = load_case(session, case_id, actor=actor, action=Action.EDIT)
        if not case.datasets:
            raise NotFound("this case has no data file yet: upload the replication data first")
        base = load_claim(session, case_id, claim_id, actor=actor, action=Action.EDIT) if claim_id is not None else None
        if dataset_id is not None:
            dataset = load_dataset(session, case_id, dataset_id, actor=actor, action=Action.EDIT)
        elif base is not None and base.drafted_on_id is not None:
            dataset = load_dataset(session, case_id, base.drafted_on_id, actor=actor, action=Action.EDIT)
        else:
            dataset = case.datasets[-1]
        latest = latest_claim_versions(session, case_id)
        return ClaimEditor(
            case=case_info(case),
            datasets=[dataset_info(item) for item in case.datasets],
            dataset=dataset_info(dataset),
            columns=column_choices(dataset),
            base=claim_info(base, latest_version=latest[base.number]) if base is not None else None,
        )


def column_choices(dataset: Dataset) -> list[ColumnChoice]:
    """The dataset's columns as the profile describes them."""
    return [
        ColumnChoice(
            name=variable["name"],
            kind=variable["kind"],
            n_missing=variable["n_missing"],
            n_distinct=variable["n_distinct"],
            distinct_more_than=variable.get("distinct_more_than"),
        )
        for variable in dataset.profile["variables"]
    ]


def check_claim(ctx: ServiceContext, *, case_id: int, dataset_id: int, spec: dict[str, Any]) -> ClaimCheck:
    """Validate a claim and its columns against a dataset version, without storing anything."""
    with ctx.reading() as session:
        dataset = load_dataset(session, case_id, dataset_id, actor=ctx.actor, action=Action.EDIT)
        parsed, problems = _validate(spec, dataset)
    return ClaimCheck(
        valid=not problems,
        problems=[ProblemInfo(field=problem.field, message=problem.message) for problem in problems],
        spec=parsed.model_dump(mode="json") if parsed is not None and not problems else None,
    )


def create_claim(ctx: ServiceContext, *, case_id: int, dataset_id: int, spec: dict[str, Any]) -> ClaimDetail:
    """Store a new claim (version 1 of the next claim number).

    Raises
    ------
    ClaimRejected
        With every problem, when the spec is invalid or names columns the
        dataset does not have or cannot use in that role.
    """
    with ctx.transaction() as session:
        case = load_case(session, case_id, actor=ctx.actor, action=Action.EDIT)
        dataset = load_dataset(session, case_id, dataset_id, actor=ctx.actor, action=Action.EDIT)
        parsed = _validated(spec, dataset)
        number = (session.scalar(select(func.max(Claim.number)).where(Claim.case_id == case_id)) or 0) + 1
        claim = _new_version(parsed, case_id=case_id, number=number, version=1, dataset=dataset, change_note="")
        session.add(claim)
        session.flush()
        record_event(
            session, case, kind="claim_entered", message=f"Claim {number} entered: {claim.title}", actor=ctx.actor
        )
        claim_id = claim.id
    return get_claim(ctx, case_id=case_id, claim_id=claim_id)


def revise_claim(
    ctx: ServiceContext,
    *,
    case_id: int,
    claim_id: int,
    dataset_id: int,
    spec: dict[str, Any],
    change_note: str = "",
) -> ClaimDetail:
    """Add a new version of the claim ``claim_id`` belongs to; earlier versions stay as they were."""
    with ctx.transaction() as session:
        case = load_case(session, case_id, actor=ctx.actor, action=Action.EDIT)
        base = load_claim(session, case_id, claim_id, actor=ctx.actor, action=Action.EDIT)
        dataset = load_dataset(session, case_id, dataset_id, actor=ctx.actor, action=Action.EDIT)
        parsed = _validated(spec, dataset)
        newest = session.scalars(
            select(Claim)
            .where(Claim.case_id == case_id, Claim.number == base.number)
            .order_by(Claim.version.desc())
            .limit(1)
        ).one()
        if claim_sha256(parsed) == newest.spec_sha256:
            raise ClaimRejected(
                [Problem(field=None, message=f"nothing changed: this is claim {base.number} version {newest.version}")]
            )
        claim = _new_version(
            parsed,
            case_id=case_id,
            number=base.number,
            version=newest.version + 1,
            dataset=dataset,
            change_note=change_note.strip()[:2000],
        )
        session.add(claim)
        session.flush()
        record_event(
            session,
            case,
            kind="claim_revised",
            message=f"Claim {claim.number} revised to version {claim.version}"
            + (f": {claim.change_note}" if claim.change_note else ""),
            actor=ctx.actor,
            audit_detail=f"Claim {claim.number} revised to version {claim.version}; fields changed: "
            + (", ".join(change.field for change in field_changes(newest.spec, claim.spec)) or "none"),
        )
        new_id = claim.id
    return get_claim(ctx, case_id=case_id, claim_id=new_id)


def get_claim(ctx: ServiceContext, *, case_id: int, claim_id: int) -> ClaimDetail:
    """A claim version, all versions of the same claim, the change from the previous one, its refits."""
    with ctx.reading() as session:
        claim = load_claim(session, case_id, claim_id, actor=ctx.actor)
        versions = session.scalars(
            select(Claim).where(Claim.case_id == case_id, Claim.number == claim.number).order_by(Claim.version)
        ).all()
        latest = versions[-1].version
        previous = next((item for item in reversed(versions) if item.version < claim.version), None)
        refits = session.scalars(
            select(Refit).where(Refit.claim_id.in_([item.id for item in versions])).order_by(Refit.id.desc())
        ).all()
        return ClaimDetail(
            case=case_info(claim.case),
            claim=claim_info(claim, latest_version=latest),
            versions=[claim_info(item, latest_version=latest) for item in versions],
            changes_from_previous=field_changes(previous.spec, claim.spec) if previous is not None else [],
            datasets=[dataset_info(item) for item in claim.case.datasets],
            refits=[refit_info(refit) for refit in refits],
        )


def _new_version(
    spec: ClaimSpec, *, case_id: int, number: int, version: int, dataset: Dataset, change_note: str
) -> Claim:
    return Claim(
        case_id=case_id,
        number=number,
        version=version,
        title=spec.title or f"Claim {number}",
        spec=spec.model_dump(mode="json"),
        spec_sha256=claim_sha256(spec),
        change_note=change_note,
        drafted_on_id=dataset.id,
    )


def _validated(spec: dict[str, Any], dataset: Dataset) -> ClaimSpec:
    parsed, problems = _validate(spec, dataset)
    if problems or parsed is None:
        raise ClaimRejected(problems)
    return parsed


def _validate(spec: dict[str, Any], dataset: Dataset) -> tuple[ClaimSpec | None, list[Problem]]:
    """The parsed spec and every problem: first the spec's own rules, then its columns against the data."""
    if not isinstance(spec, dict):
        return None, [Problem(field=None, message="a claim must be a mapping of field names to values")]
    try:
        parsed = ClaimSpec.model_validate(spec)
    except ValidationError as error:
        return None, problems_from(error)
    return parsed, column_problems(parsed, dataset)


def column_problems(spec: ClaimSpec, dataset: Dataset) -> list[Problem]:
    """Columns the dataset does not have, or holds as text where the role needs numbers."""
    kinds = {variable["name"]: variable["kind"] for variable in dataset.profile["variables"]}
    where = f"data version {dataset.version} ({dataset.original_name})"
    problems: list[Problem] = []
    roles: list[tuple[str, str]] = []
    for field, value in spec.model_dump().items():
        if field in ("outcome", "weights", "unit", "time", "selected", "mediator") and value:
            roles.append((field, value))
        elif field in (
            "endogenous",
            "instruments",
            "controls",
            "fixed_effects",
            "cluster",
            "treatment",
            "selection_covariates",
            "benchmarks",
            "pre_treatment",
        ):
            roles.extend((field, column) for column in value)
    roles += [("categorical", item.column) for item in spec.categorical]
    roles += [("filters", item.column) for item in spec.filters]
    for field, column in roles:
        kind = kinds.get(column)
        if kind is None:
            problems.append(Problem(field=field, message=f"{field}: column '{column}' is not in {where}"))
        elif kind == "empty":
            problems.append(Problem(field=field, message=f"{field}: column '{column}' has no values in {where}"))
        elif field in NUMERIC_ROLES and kind not in NUMERIC_KINDS:
            problems.append(
                Problem(
                    field=field,
                    message=f"{field}: column '{column}' holds {kind}, not numbers, so it cannot be "
                    f"{NUMERIC_ROLES[field]}; a column of categories can be a categorical control",
                )
            )
    claimed = spec.claimed
    if claimed is not None and claimed.term is not None and claimed.term not in spec.focal:
        focal = ", ".join(spec.focal) or "none"
        problems.append(
            Problem(
                field="claimed.term",
                message=f"claimed.term: '{claimed.term}' is not a focal regressor of this claim (focal: {focal})",
            )
        )
    return problems
