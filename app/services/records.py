"""Loading rows by id within a case (:class:`NotFound` otherwise), turning them into views, history.

Every lookup takes the case id as well as the row id, so a dataset, claim or
refit is only ever reached through the case that holds it; access checks can be
added here once, for every service.
"""

from __future__ import annotations

from datetime import timedelta

from sqlalchemy import select, update
from sqlalchemy.orm import Session

from app.services.errors import NotFound
from app.services.views import CaseInfo, ClaimInfo, DatasetInfo, EventInfo, RefitInfo
from app.store.models import Case, Claim, Dataset, Event, Refit, utc_now


def load_case(session: Session, case_id: int) -> Case:
    """The case, or :class:`NotFound`."""
    case = session.get(Case, case_id)
    if case is None:
        raise NotFound(f"there is no case {case_id}")
    return case


def load_dataset(session: Session, case_id: int, dataset_id: int) -> Dataset:
    """A dataset version of this case, or :class:`NotFound`."""
    dataset = session.get(Dataset, dataset_id)
    if dataset is None or dataset.case_id != case_id:
        raise NotFound(f"case {case_id} has no dataset {dataset_id}")
    return dataset


def load_claim(session: Session, case_id: int, claim_id: int) -> Claim:
    """A claim version of this case, or :class:`NotFound`."""
    claim = session.get(Claim, claim_id)
    if claim is None or claim.case_id != case_id:
        raise NotFound(f"case {case_id} has no claim {claim_id}")
    return claim


def load_refit(session: Session, case_id: int, refit_id: int) -> Refit:
    """A refit of this case, or :class:`NotFound`."""
    refit = session.get(Refit, refit_id)
    if refit is None or refit.case_id != case_id:
        raise NotFound(f"case {case_id} has no refit {refit_id}")
    return refit


def latest_claim_versions(session: Session, case_id: int) -> dict[int, int]:
    """Claim number to its newest version number."""
    rows = session.execute(select(Claim.number, Claim.version).where(Claim.case_id == case_id)).all()
    latest: dict[int, int] = {}
    for number, version in rows:
        latest[number] = max(version, latest.get(number, 0))
    return latest


def record_event(
    session: Session, case: Case, *, kind: str, message: str, merge_within: timedelta | None = None
) -> None:
    """Add a line to the case's history, mark the case as active now and raise its revision.

    With ``merge_within``, a line identical to the case's latest one and younger
    than that only has its time moved forward (a note saved as it is typed
    leaves one line, not one per pause).
    """
    now = utc_now()
    latest = None
    if merge_within is not None:
        latest = session.scalars(
            select(Event).where(Event.case_id == case.id).order_by(Event.id.desc()).limit(1)
        ).one_or_none()
    if latest is not None and (latest.kind, latest.message) == (kind, message) and now - latest.at <= merge_within:
        latest.at = now
    else:
        session.add(Event(case_id=case.id, at=now, kind=kind, message=message))
    case.last_activity = now
    bump_revision(session, case.id)


def bump_revision(session: Session, case_id: int) -> None:
    """Raise the case's revision by one, atomically in SQL (two writers never read the same value)."""
    session.execute(update(Case).where(Case.id == case_id).values(revision=Case.revision + 1))


def case_info(case: Case) -> CaseInfo:
    return CaseInfo(
        id=case.id,
        title=case.title,
        reference=case.reference,
        notes=case.notes,
        created_at=case.created_at,
        last_activity=case.last_activity,
    )


def dataset_info(dataset: Dataset) -> DatasetInfo:
    return DatasetInfo(
        id=dataset.id,
        case_id=dataset.case_id,
        version=dataset.version,
        original_name=dataset.original_name,
        file_format=dataset.file_format,
        size_bytes=dataset.size_bytes,
        sha256=dataset.sha256,
        n_rows=dataset.n_rows,
        n_columns=dataset.n_columns,
        uploaded_at=dataset.uploaded_at,
    )


def claim_info(claim: Claim, *, latest_version: int) -> ClaimInfo:
    return ClaimInfo(
        id=claim.id,
        case_id=claim.case_id,
        number=claim.number,
        version=claim.version,
        title=claim.title,
        spec=claim.spec,
        spec_sha256=claim.spec_sha256,
        change_note=claim.change_note,
        drafted_on_id=claim.drafted_on_id,
        created_at=claim.created_at,
        is_latest=claim.version == latest_version,
    )


def refit_info(refit: Refit) -> RefitInfo:
    return RefitInfo(
        id=refit.id,
        case_id=refit.case_id,
        claim_id=refit.claim_id,
        claim_number=refit.claim.number,
        claim_version=refit.claim.version,
        claim_title=refit.claim.title,
        dataset_id=refit.dataset_id,
        dataset_version=refit.dataset.version,
        data_file_name=refit.dataset.original_name,
        state=refit.state,
        stage=refit.stage,
        error=refit.error,
        created_at=refit.created_at,
        started_at=refit.started_at,
        finished_at=refit.finished_at,
        verdict=refit.review_verdict,
        verdict_label=refit.review_verdict_label,
        serious_items=refit.review_serious,
        reproduction=refit.review_reproduction,
    )


def event_info(event: Event) -> EventInfo:
    return EventInfo(at=event.at, kind=event.kind, message=event.message)
