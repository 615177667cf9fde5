"""Cases: the triage overview, creating, reading and deleting a case.

The overview lists only the cases the actor sees; a referee who opens a case
is given access to it at once.
"""

from __future__ import annotations

from pydantic import BaseModel, ConfigDict, Field, ValidationError
from sqlalchemy import bindparam, exists, func, select
from sqlalchemy.orm import Session

from app.auth.roles import GIVEN_ACCESS, Action, ServerAction
from app.services.context import ServiceContext
from app.services.errors import InvalidInput, NotFound, Problem, problems_from
from app.services.records import (
    case_info,
    claim_info,
    dataset_info,
    event_info,
    latest_claim_versions,
    load_case,
    record_audit,
    record_event,
    refit_info,
    require_on_server,
    visible_cases,
)
from app.services.session_links import link_info, sees_link
from app.services.views import (
    AccessInfo,
    CaseDetail,
    CaseOverview,
    CaseRow,
    ClaimThread,
    DeletionReport,
    PersonInfo,
)
from app.store.models import Base, Case, CaseAccess, Claim, Dataset, Event, Judgement, Refit, SessionLink, User

SORT_KEYS = ("activity", "title", "reference", "verdict", "serious", "reproduction")
"""Columns the triage overview can be sorted by."""

VERDICT_SEVERITY = ("not_reproduced", "not_supported", "fragile", "undetermined", "holds_up")
"""Verdicts from the most to the least pressing; sorting by verdict follows this order."""

REPRODUCTION_SEVERITY = ("not_reproduced", "partly_reproduced", "to_judge", "reproduced", "nothing_claimed")

NOT_REVIEWED = "none"

REVISION = select(Case.revision).where(Case.id == bindparam("case_id"))
REVISION_IF_GIVEN = REVISION.where(
    exists().where(CaseAccess.case_id == Case.id, CaseAccess.user_id == bindparam("user_id"))
)
"""A case's revision, for anyone, and for a referee or reader only if the case is given to them (built once)."""
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
    """Every case the actor sees with its latest finished refit's verdict, serious items and reproduction status.

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
        .where(visible_cases(ctx.actor))
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
    """Open a case for one manuscript; a referee who opens it is given access to it."""
    require_on_server(ctx.actor, ServerAction.OPEN_CASES)
    try:
        fields = CaseFields(title=title, reference=reference, notes=notes)
    except ValidationError as error:
        raise InvalidInput(problems_from(error)) from None
    with ctx.transaction() as session:
        case = Case(title=fields.title, reference=fields.reference, notes=fields.notes)
        session.add(case)
        session.flush()
        if ctx.actor.role in GIVEN_ACCESS and ctx.actor.user_id is not None:
            session.add(CaseAccess(case_id=case.id, user_id=ctx.actor.user_id, granted_by=ctx.actor.name))
        record_event(session, case, kind="case_opened", message=f"Case opened: {case.title}", actor=ctx.actor)
        case_id = case.id
    return get_case(ctx, case_id=case_id)


def ensure_may_open(ctx: ServiceContext) -> None:
    """Refuse, before the new-case form is shown, an actor whose role may not open cases."""
    require_on_server(ctx.actor, ServerAction.OPEN_CASES)


def get_case(ctx: ServiceContext, *, case_id: int, need: Action = Action.READ) -> CaseDetail:
    """The case page: its datasets, claims (all versions), refits and history.

    ``need`` is what the page is about to offer (the upload page needs
    ``EDIT``, the delete page ``MANAGE``), so that it is refused up front.
    Who has access, and who could be given it, is filled in only for actors
    who may manage the case; session links only for those who may open them
    (a referee sees the links they opened, not those of other referees).
    """
    actor = ctx.actor
    with ctx.reading() as session:
        case = load_case(session, case_id, actor=actor, action=need)
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
        links = []
        if actor.may(Action.SHARE):
            rows = session.scalars(
                select(SessionLink).where(SessionLink.case_id == case_id).order_by(SessionLink.id.desc())
            ).all()
            links = [link_info(row) for row in rows if sees_link(actor, row)]
        access, candidates = ([], []) if not actor.may(Action.MANAGE) else _people(session, case)
        return CaseDetail(
            case=case_info(case),
            datasets=[dataset_info(dataset) for dataset in case.datasets],
            claims=claims,
            refits=[refit_info(refit) for refit in refits],
            events=[event_info(event) for event in events],
            access=access,
            candidates=candidates,
            links=links,
        )


def _people(session: Session, case: Case) -> tuple[list[AccessInfo], list[PersonInfo]]:
    """Who has access to the case, and the referees and readers who could be given it."""
    access = [
        AccessInfo(
            user_id=row.user.id,
            name=row.user.name,
            full_name=row.user.full_name,
            role=row.user.role,
            granted_at=row.granted_at,
            granted_by=row.granted_by,
        )
        for row in case.access
    ]
    given = {row.user_id for row in case.access}
    others = session.scalars(
        select(User).where(User.role.in_([str(role) for role in GIVEN_ACCESS])).order_by(User.name)
    ).all()
    candidates = [
        PersonInfo(user_id=user.id, name=user.name, full_name=user.full_name, role=user.role)
        for user in others
        if user.id not in given
    ]
    return access, candidates


def case_revision(ctx: ServiceContext, *, case_id: int) -> int:
    """How many changes the case has seen; pages of the case can be reused while it stays the same.

    Asked before every cached page, so it reads one value on a plain connection
    (no ORM session); for referees and readers the same query checks their
    access, so a case they may not see is :class:`NotFound` before any cached
    page could be served.
    """
    actor = ctx.actor
    with ctx.database.engine.connect() as connection:
        if actor.sees_every_case:
            revision = connection.scalar(REVISION, {"case_id": case_id})
        else:
            revision = connection.scalar(REVISION_IF_GIVEN, {"case_id": case_id, "user_id": actor.user_id})
    if revision is None:
        raise NotFound(f"there is no case {case_id}")
    return revision


def delete_case(ctx: ServiceContext, *, case_id: int) -> DeletionReport:
    """Delete a case with everything it holds, then check that nothing of it is left.

    Its files go too unless another case holds the same bytes. Afterwards every
    table with a ``case_id`` column (and the judgements of its refits) is
    searched for the case, and the file store for its files; anything found is
    an internal error. The case's own audit entries go with it; the deletion is
    recorded in the server's audit trail with the case's number, who deleted it
    and how much of each kind went (:func:`removed_words`). Its title and
    manuscript reference are not kept: they can name a confidential manuscript,
    and a deleted case leaves nothing of its own behind.
    """
    with ctx.files_lock:
        with ctx.transaction() as session:
            case = load_case(session, case_id, actor=ctx.actor, action=Action.MANAGE)
            hashes = {dataset.sha256 for dataset in case.datasets}
            refit_ids = [refit.id for refit in case.refits]
            counts = _rows_of(session, case_id, refit_ids)
            session.delete(case)
            session.flush()
            still_used = set(session.scalars(select(Dataset.sha256).where(Dataset.sha256.in_(hashes))).all())
            erased = hashes - still_used
            record_audit(
                session,
                actor=ctx.actor,
                action="case_deleted",
                subject=f"case {case_id}",
                detail=removed_words(counts, files_erased=len(erased), files_kept=len(hashes & still_used)),
            )
        for sha256 in erased:
            ctx.files.delete(sha256)
    ctx.database.checkpoint()
    with ctx.reading() as session:
        left = {table: count for table, count in _rows_of(session, case_id, refit_ids).items() if count}
    files_left = [sha256 for sha256 in erased if ctx.files.contains(sha256)]
    if left or files_left:
        raise RuntimeError(f"case {case_id} was deleted but rows {left} and files {files_left} remain")
    return DeletionReport(
        case_id=case_id,
        rows_removed=counts,
        files_erased=len(erased),
        files_kept_for_other_cases=len(hashes & still_used),
        verified=True,
    )


REMOVED_ROWS = (
    ("datasets", "data version", "data versions"),
    ("claims", "claim version", "claim versions"),
    ("refits", "refit", "refits"),
    ("judgements", "judgement or note", "judgements and notes"),
    ("events", "history line", "history lines"),
    ("case_access", "access grant", "access grants"),
    ("session_links", "session link", "session links"),
    ("audit_entries", "audit entry of the case", "audit entries of the case"),
)
"""Tables whose rows go with a case, and their names in words (one, several) for the deletion record."""


def removed_words(counts: dict[str, int], *, files_erased: int, files_kept: int) -> str:
    """What a deletion removed, in words: ``removed 2 data versions, 1 claim version, 0 refits, ...``."""
    parts = [f"{counts.get(table, 0)} {one if counts.get(table, 0) == 1 else several}" for table, one, several in REMOVED_ROWS]
    files = f"{files_erased} file{'' if files_erased == 1 else 's'} erased"
    if files_kept:
        files += f", {files_kept} kept because another case holds the same bytes"
    return f"removed {', '.join(parts)}; {files}"


def _rows_of(session: Session, case_id: int, refit_ids: list[int]) -> dict[str, int]:
    """Rows that belong to a case, by table: every table with a ``case_id`` column, and the refits' judgements."""
    counts = {"cases": session.scalar(select(func.count()).select_from(Case).where(Case.id == case_id)) or 0}
    for table in Base.metadata.sorted_tables:
        if "case_id" in table.c:
            counts[table.name] = session.scalar(
                select(func.count()).select_from(table).where(table.c.case_id == case_id)
            ) or 0
    counts["judgements"] = session.scalar(
        select(func.count()).select_from(Judgement).where(Judgement.refit_id.in_(refit_ids))
    ) or 0
    return counts
