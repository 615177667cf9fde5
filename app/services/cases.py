"""Cases: the triage overview, creating, reading and deleting a case."""

from __future__ import annotations

from pydantic import BaseModel, ConfigDict, Field, ValidationError
from sqlalchemy import func, select

from app.services.context import ServiceContext
from app.services.errors import InvalidInput, NotFound, Problem, problems_from
from app.services.records import (
    case_info,
    claim_info,
    dataset_info,
    event_info,
    latest_claim_versions,
    load_case,
    record_event,
    refit_info,
)
from app.services.views import CaseDetail, CaseOverview, CaseRow, ClaimThread
from app.store.models import Case, Claim, Dataset, Event, Refit

SORT_KEYS = ("activity", "title", "reference", "verdict", "serious", "reproduction")
"""Columns the triage overview can be sorted by."""

VERDICT_SEVERITY = ("not_reproduced", "not_supported", "fragile", "undetermined", "holds_up")
"""Verdicts from the most to the least pressing; sorting by verdict follows this order."""

REPRODUCTION_SEVERITY = ("not_reproduced", "partly_reproduced", "to_judge", "reproduced", "nothing_claimed")

NOT_REVIEWED = "none"
"""Verdict filter value for cases without a finished refit."""


class CaseFields(BaseModel):
    """Validated fields of a new case."""

    model_config = ConfigDict(str_strip_whitespace=True, extra="forbid")

    title: str = Field(min_length=1, max_length=300)
    reference: str = Field(default="", max_length=100)
    notes: str = Field(default="", max_length=20_000)


def list_cases(
    ctx: ServiceContext,
    *,
    query: str = "",
    verdict: str | None = None,
    sort: str = "activity",
    descending: bool = True,
) -> CaseOverview:
    """Every case with its latest finished refit's verdict, serious items and reproduction status.

    ``query`` keeps cases whose title or manuscript reference contains it (any
    case); ``verdict`` keeps one verdict code, or :data:`NOT_REVIEWED` for cases
    without a finished refit.
    """
    if sort not in SORT_KEYS:
        raise InvalidInput([Problem(field="sort", message=f"sort must be one of {', '.join(SORT_KEYS)}")])
    latest = (
        select(Refit.case_id, func.max(Refit.id).label("refit_id"))
        .where(Refit.state == "finished")
        .group_by(Refit.case_id)
        .subquery()
    )
    pending = (
        select(Refit.case_id, func.count().label("count"))
        .where(Refit.state.in_(("waiting", "running")))
        .group_by(Refit.case_id)
        .subquery()
    )
    statement = (
        select(
            Case.id,
            Case.title,
            Case.reference,
            Case.last_activity,
            Refit.id,
            Refit.review_verdict,
            Refit.review_verdict_label,
            Refit.review_serious,
            Refit.review_reproduction,
            pending.c.count,
        )
        .outerjoin(latest, latest.c.case_id == Case.id)
        .outerjoin(Refit, Refit.id == latest.c.refit_id)
        .outerjoin(pending, pending.c.case_id == Case.id)
    )
    with ctx.reading() as session:
        rows = [
            CaseRow(
                id=row[0],
                title=row[1],
                reference=row[2],
                last_activity=row[3],
                latest_refit_id=row[4],
                verdict=row[5],
                verdict_label=row[6],
                serious_items=row[7],
                reproduction=row[8],
                running_refits=row[9] or 0,
            )
            for row in session.execute(statement)
        ]
    total = len(rows)
    needle = query.strip().casefold()
    if needle:
        rows = [row for row in rows if needle in row.title.casefold() or needle in row.reference.casefold()]
    if verdict == NOT_REVIEWED:
        rows = [row for row in rows if row.verdict is None]
    elif verdict:
        rows = [row for row in rows if row.verdict == verdict]
    return CaseOverview(
        cases=_sorted(rows, sort=sort, descending=descending),
        total_cases=total,
        query=query,
        verdict=verdict or None,
        sort=sort,
        descending=descending,
    )


def _sorted(rows: list[CaseRow], *, sort: str, descending: bool) -> list[CaseRow]:
    """Order rows; cases without a value for the key always come last."""

    def rank(order: tuple[str, ...], value: str | None) -> int:
        return order.index(value) if value in order else len(order)

    keys = {
        "activity": lambda row: row.last_activity,
        "title": lambda row: row.title.casefold(),
        "reference": lambda row: row.reference.casefold(),
        # "descending" on a severity means most pressing first.
        "verdict": lambda row: -rank(VERDICT_SEVERITY, row.verdict),
        "serious": lambda row: row.serious_items,
        "reproduction": lambda row: -rank(REPRODUCTION_SEVERITY, row.reproduction),
    }
    key = keys[sort]
    present = [row for row in rows if row.latest_refit_id is not None or sort in ("activity", "title", "reference")]
    missing = [row for row in rows if row not in present]
    present.sort(key=lambda row: (key(row), row.id), reverse=descending)
    return present + sorted(missing, key=lambda row: row.last_activity, reverse=True)


def create_case(ctx: ServiceContext, *, title: str, reference: str = "", notes: str = "") -> CaseDetail:
    """Open a case for one manuscript."""
    try:
        fields = CaseFields(title=title, reference=reference, notes=notes)
    except ValidationError as error:
        raise InvalidInput(problems_from(error)) from None
    with ctx.transaction() as session:
        case = Case(title=fields.title, reference=fields.reference, notes=fields.notes)
        session.add(case)
        session.flush()
        record_event(session, case, kind="case_opened", message=f"Case opened: {case.title}")
        case_id = case.id
    return get_case(ctx, case_id=case_id)


def get_case(ctx: ServiceContext, *, case_id: int) -> CaseDetail:
    """The case page: its datasets, claims (all versions), refits and history."""
    with ctx.reading() as session:
        case = load_case(session, case_id)
        latest = latest_claim_versions(session, case_id)
        threads: dict[int, list[Claim]] = {}
        for claim in case.claims:
            threads.setdefault(claim.number, []).append(claim)
        claims = []
        for number, versions in sorted(threads.items()):
            infos = [claim_info(claim, latest_version=latest[number]) for claim in versions]
            claims.append(ClaimThread(number=number, latest=infos[-1], versions=infos))
        refits = session.scalars(
            select(Refit).where(Refit.case_id == case_id).order_by(Refit.id.desc())
        ).all()
        events = session.scalars(select(Event).where(Event.case_id == case_id).order_by(Event.id.desc())).all()
        return CaseDetail(
            case=case_info(case),
            datasets=[dataset_info(dataset) for dataset in case.datasets],
            claims=claims,
            refits=[refit_info(refit) for refit in refits],
            events=[event_info(event) for event in events],
        )


def case_revision(ctx: ServiceContext, *, case_id: int) -> int:
    """How many changes the case has seen; pages of the case can be reused while it stays the same.

    Asked before every cached page, so it reads one value on a plain connection (no ORM session).
    """
    with ctx.database.engine.connect() as connection:
        revision = connection.scalar(select(Case.revision).where(Case.id == case_id))
    if revision is None:
        raise NotFound(f"there is no case {case_id}")
    return revision


def delete_case(ctx: ServiceContext, *, case_id: int) -> None:
    """Delete a case with everything it holds; its files go too unless another case holds the same bytes."""
    with ctx.files_lock:
        with ctx.transaction() as session:
            case = load_case(session, case_id)
            hashes = {dataset.sha256 for dataset in case.datasets}
            session.delete(case)
            session.flush()
            still_used = set(session.scalars(select(Dataset.sha256).where(Dataset.sha256.in_(hashes))).all())
        for sha256 in hashes - still_used:
            ctx.files.delete(sha256)
