"""Refits: computed off the request, stored once with provenance, failures explained."""

from __future__ import annotations

import io
import json
import time
from typing import Any

import pandas as pd
import pytest

from app.estimation.refit import refit as engine_refit
from app.provenance import package_versions
from app.services import cases, checklists, claims, refits
from app.services.context import ServiceContext
from app.services.errors import NotFound, NotReady
from app.spec import parse_claim
from app.store.models import Refit
from tests.services.conftest import Reviewed, simulated_csv, simulated_spec, upload
from tests.walking_demo import add_unfinished_refit


def test_a_finished_refit_stores_findings_with_provenance(
    ctx: ServiceContext, reviewed: Reviewed, demo_csv: bytes, demo_spec: dict[str, Any]
) -> None:
    results = refits.get_refit(ctx, case_id=reviewed.case_id, refit_id=reviewed.refit_id)
    findings = results.findings
    assert findings is not None

    dataset = cases.get_case(ctx, case_id=reviewed.case_id).datasets[0]
    claim = claims.get_claim(ctx, case_id=reviewed.case_id, claim_id=reviewed.claim_id).claim
    assert findings["schema_version"] == 1
    assert findings["provenance"]["dataset_sha256"] == dataset.sha256
    assert findings["provenance"]["claim_sha256"] == claim.spec_sha256
    assert findings["provenance"]["package_versions"] == package_versions()
    assert findings["provenance"]["seed"] == parse_claim(demo_spec).bootstrap.seed
    json.dumps(findings, allow_nan=False)


def test_the_stored_estimates_are_the_engines(ctx: ServiceContext, reviewed: Reviewed, demo_csv: bytes, demo_spec: dict[str, Any]) -> None:
    stored = refits.get_refit(ctx, case_id=reviewed.case_id, refit_id=reviewed.refit_id).findings
    assert stored is not None
    direct = engine_refit(pd.read_csv(io.BytesIO(demo_csv)), parse_claim(demo_spec)).to_dict()
    assert stored["estimates"] == direct["estimates"]
    assert stored["n_obs"] == direct["n_obs"]


def test_running_a_claim_again_makes_a_new_refit(ctx: ServiceContext, reviewed: Reviewed) -> None:
    first = refits.get_refit(ctx, case_id=reviewed.case_id, refit_id=reviewed.refit_id)
    again = refits.start_refit(
        ctx, case_id=reviewed.case_id, claim_id=reviewed.claim_id, dataset_id=reviewed.dataset_id
    )

    assert again.id != reviewed.refit_id and again.state == "finished"
    unchanged = refits.get_refit(ctx, case_id=reviewed.case_id, refit_id=reviewed.refit_id)
    assert (unchanged.refit, unchanged.findings) == (first.refit, first.findings)


def test_a_refit_that_cannot_be_computed_says_why(ctx: ServiceContext, reviewed: Reviewed, demo_csv: bytes) -> None:
    without_instrument = pd.read_csv(io.BytesIO(demo_csv)).drop(columns="walkability_index")
    dataset_id = upload(ctx, reviewed.case_id, without_instrument.to_csv(index=False).encode(), "v2.csv")

    refit = refits.start_refit(ctx, case_id=reviewed.case_id, claim_id=reviewed.claim_id, dataset_id=dataset_id)

    assert refit.state == "failed"
    assert "walkability_index" in (refit.error or "")
    assert refits.get_refit(ctx, case_id=reviewed.case_id, refit_id=refit.id).findings is None
    with pytest.raises(NotReady, match="it failed"):
        checklists.get_checklist(ctx, case_id=reviewed.case_id, refit_id=refit.id)


def test_an_internal_error_is_stored_without_a_traceback(
    ctx: ServiceContext, reviewed: Reviewed, monkeypatch: pytest.MonkeyPatch
) -> None:
    def broken(*args: object, **kwargs: object) -> None:
        raise ZeroDivisionError("deep inside")

    monkeypatch.setattr(refits, "refit", broken)
    refit = refits.start_refit(ctx, case_id=reviewed.case_id, claim_id=reviewed.claim_id, dataset_id=reviewed.dataset_id)

    assert refit.state == "failed"
    assert refit.error == refits.INTERNAL_ERROR


def test_a_refit_runs_off_the_request_and_reports_its_stage(ctx: ServiceContext) -> None:
    case_id = cases.create_case(ctx, title="Slow").case.id
    dataset_id = upload(ctx, case_id, simulated_csv(n_obs=4000))
    claim_id = claims.create_claim(ctx, case_id=case_id, dataset_id=dataset_id, spec=simulated_spec()).claim.id

    started = refits.start_refit(ctx, case_id=case_id, claim_id=claim_id, dataset_id=dataset_id, wait_seconds=0)

    assert started.state in ("waiting", "running", "finished")
    assert started.stage in (*refits.STAGES, "")
    finished = wait_until_done(ctx, case_id, started.id)
    assert finished.state == "finished" and finished.finished_at is not None


def test_refits_left_unfinished_are_resumed(ctx: ServiceContext, reviewed: Reviewed) -> None:
    interrupted = add_unfinished_refit(
        ctx,
        case_id=reviewed.case_id,
        claim_id=reviewed.claim_id,
        dataset_id=reviewed.dataset_id,
        state="running",
        stage=refits.STAGES[2],
    )

    assert refits.resume_unfinished(ctx) == [interrupted]
    assert wait_until_done(ctx, reviewed.case_id, interrupted).state == "finished"


def test_a_refit_of_another_case_is_not_found(ctx: ServiceContext, reviewed: Reviewed) -> None:
    other = cases.create_case(ctx, title="Other").case.id
    with pytest.raises(NotFound):
        refits.get_refit(ctx, case_id=other, refit_id=reviewed.refit_id)


def wait_until_done(ctx: ServiceContext, case_id: int, refit_id: int, *, timeout: float = 60.0) -> Any:
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        status = refits.refit_status(ctx, case_id=case_id, refit_id=refit_id)
        if status.state in ("finished", "failed"):
            return status
        time.sleep(0.05)
    raise AssertionError(f"refit {refit_id} did not finish in {timeout} s")


def test_a_refit_whose_case_is_deleted_meanwhile_stops_quietly(
    ctx: ServiceContext, reviewed: Reviewed, monkeypatch: pytest.MonkeyPatch, caplog: pytest.LogCaptureFixture
) -> None:
    read_then_delete_case = refits.load_frame

    def deleting(*args: Any) -> pd.DataFrame:
        frame = read_then_delete_case(*args)
        cases.delete_case(ctx, case_id=reviewed.case_id)
        return frame

    monkeypatch.setattr(refits, "load_frame", deleting)
    refit_id = add_unfinished_refit(
        ctx,
        case_id=reviewed.case_id,
        claim_id=reviewed.claim_id,
        dataset_id=reviewed.dataset_id,
        state="waiting",
        stage=refits.STAGES[0],
    )

    refits.run_refit(ctx, refit_id)

    with ctx.reading() as session:
        assert session.get(Refit, refit_id) is None
    assert "failed" not in caplog.text
