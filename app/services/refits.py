"""Refits: queueing a claim on a dataset version, computing it off the request, reading it back.

A refit row is created in state ``waiting`` and handed to the in-process worker
(:mod:`app.services.jobs`). The worker moves it through the stages in
:data:`STAGES` and ends in ``finished`` (findings stored once, with their schema
version and provenance) or ``failed`` (the reason in words). Re-running a claim
creates a new refit; a finished refit is never recomputed.
"""

from __future__ import annotations

import logging
from concurrent.futures import wait
from typing import Any

from sqlalchemy import select
from sqlalchemy.orm import Session

from app.auth.actors import REFIT_WORKER
from app.auth.roles import Action
from app.errors import SecondStageError
from app.estimation.refit import refit
from app.provenance import refit_provenance
from app.review.reproduction import covariance_variants, reports_standard_error
from app.services import checklists
from app.services.context import ServiceContext
from app.services.datasets import load_frame
from app.services.records import (
    bump_revision,
    case_info,
    load_case,
    load_claim,
    load_dataset,
    load_refit,
    record_event,
    refit_info,
)
from app.services.views import RefitInfo, RefitResults
from app.spec import parse_claim
from app.store.models import Refit, utc_now

log = logging.getLogger(__name__)

STAGES = (
    "waiting for the worker",
    "reading the data file",
    "fitting every estimator and running the diagnostics",
    "refitting under other variance estimators to trace the printed standard error",
    "building the checklist",
)
"""What a refit is doing, in order; the progress page lists them and marks the current one."""

OVER = ("finished", "failed")
"""States of a refit that will not change again."""

INTERNAL_ERROR = (
    "the refit stopped on an internal error, not because of your data or claim; "
    "the server log has the details (please report it)"
)


def start_refit(
    ctx: ServiceContext,
    *,
    case_id: int,
    claim_id: int,
    dataset_id: int,
    wait_seconds: float | None = None,
) -> RefitInfo:
    """Queue a refit of a claim version on a dataset version and wait briefly for it.

    Quick refits finish within ``wait_seconds`` (default
    ``settings.refit_wait_seconds``) and come back finished; longer ones come
    back ``waiting`` or ``running`` and continue in the background.
    """
    with ctx.transaction() as session:
        case = load_case(session, case_id, actor=ctx.actor, action=Action.EDIT)
        claim = load_claim(session, case_id, claim_id, actor=ctx.actor, action=Action.EDIT)
        dataset = load_dataset(session, case_id, dataset_id, actor=ctx.actor, action=Action.EDIT)
        row = Refit(
            case_id=case_id,
            claim_id=claim.id,
            dataset_id=dataset.id,
            state="waiting",
            stage=STAGES[0],
            dataset_sha256=dataset.sha256,
            claim_sha256=claim.spec_sha256,
        )
        session.add(row)
        session.flush()
        record_event(
            session,
            case,
            kind="refit_started",
            message=f"Refit {row.id} started: claim {claim.number} version {claim.version} "
            f"on data version {dataset.version}",
            actor=ctx.actor,
        )
        refit_id = row.id
    future = ctx.jobs.submit(run_refit, ctx, refit_id)
    wait([future], timeout=ctx.settings.refit_wait_seconds if wait_seconds is None else wait_seconds)
    return refit_status(ctx, case_id=case_id, refit_id=refit_id)


def refit_status(ctx: ServiceContext, *, case_id: int, refit_id: int) -> RefitInfo:
    """A refit's state and summary, without loading its findings."""
    with ctx.reading() as session:
        return refit_info(load_refit(session, case_id, refit_id, actor=ctx.actor))


def get_refit(ctx: ServiceContext, *, case_id: int, refit_id: int) -> RefitResults:
    """A refit with its findings (None until it has finished)."""
    with ctx.reading() as session:
        row = load_refit(session, case_id, refit_id, actor=ctx.actor)
        return RefitResults(case=case_info(row.case), refit=refit_info(row), findings=row.findings)


class RefitGone(Exception):
    """The refit's row disappeared while it was computed (its case was deleted)."""


def run_refit(ctx: ServiceContext, refit_id: int) -> None:
    """Compute one refit (runs on the worker thread).

    Never raises: failures are stored with their reason, and a refit whose case
    was deleted meanwhile simply stops.
    """
    with ctx.transaction() as session:
        row = session.get(Refit, refit_id)
        if row is None or row.state in ("finished", "failed"):
            return
        row.state = "running"
        row.started_at = utc_now()
        row.stage = STAGES[1]
        bump_revision(session, row.case_id)
        dataset = row.dataset
        spec_data = row.claim.spec
        data_file_name = dataset.original_name
    try:
        frame = load_frame(ctx, dataset)
        _set_stage(ctx, refit_id, STAGES[2])
        spec = parse_claim(spec_data)
        provenance = refit_provenance(dataset_sha256=dataset.sha256, spec=spec, data_file_name=data_file_name)
        findings = refit(frame, spec, provenance=provenance).to_dict()
        variants = None
        if reports_standard_error(spec):
            _set_stage(ctx, refit_id, STAGES[3])
            variants = covariance_variants(frame, spec)
        del frame
        _set_stage(ctx, refit_id, STAGES[4])
        summary = checklists.summarise(checklists.build(findings, judgements={}, variants=variants))
        _finish(ctx, refit_id, findings=findings, variants=variants, summary=summary)
    except RefitGone:
        return
    except SecondStageError as error:
        _fail(ctx, refit_id, reason=str(error))
    except Exception:
        log.exception("refit %s failed", refit_id)
        _fail(ctx, refit_id, reason=INTERNAL_ERROR)


def resume_unfinished(ctx: ServiceContext) -> list[int]:
    """Queue again every refit that was waiting or running when the server last stopped."""
    with ctx.transaction() as session:
        rows = session.scalars(select(Refit).where(Refit.state.in_(("waiting", "running")))).all()
        for row in rows:
            row.state = "waiting"
            row.stage = STAGES[0]
            bump_revision(session, row.case_id)
        refit_ids = [row.id for row in rows]
    for refit_id in refit_ids:
        ctx.jobs.submit(run_refit, ctx, refit_id)
    return refit_ids


def _row(session: Session, refit_id: int) -> Refit:
    row = session.get(Refit, refit_id)
    if row is None:
        raise RefitGone(refit_id)
    return row


def _set_stage(ctx: ServiceContext, refit_id: int, stage: str) -> None:
    with ctx.transaction() as session:
        row = _row(session, refit_id)
        row.stage = stage
        bump_revision(session, row.case_id)


def _finish(
    ctx: ServiceContext,
    refit_id: int,
    *,
    findings: dict[str, Any],
    variants: dict[str, Any] | None,
    summary: checklists.Summary,
) -> None:
    with ctx.transaction() as session:
        row = _row(session, refit_id)
        row.findings = findings
        row.variants = variants
        row.schema_version = findings["schema_version"]
        row.state = "finished"
        row.stage = ""
        row.finished_at = utc_now()
        checklists.store_summary(row, summary)
        record_event(
            session,
            row.case,
            kind="refit_finished",
            message=f"Refit {refit_id} finished: {summary.verdict_label}",
            actor=REFIT_WORKER,
        )


def _fail(ctx: ServiceContext, refit_id: int, *, reason: str) -> None:
    try:
        _record_failure(ctx, refit_id, reason=reason)
    except RefitGone:
        return


def _record_failure(ctx: ServiceContext, refit_id: int, *, reason: str) -> None:
    with ctx.transaction() as session:
        row = _row(session, refit_id)
        row.state = "failed"
        row.error = reason
        row.finished_at = utc_now()
        record_event(
            session,
            row.case,
            kind="refit_failed",
            message=f"Refit {refit_id} could not be computed: {reason}",
            actor=REFIT_WORKER,
        )
