"""The audit trail: every change says who, when, from where and what; nobody can change it through the app."""

from __future__ import annotations

import io

import pytest
from sqlalchemy import select, text, update
from sqlalchemy.exc import DatabaseError

from app.services import access, audit, checklists, claims, datasets, refits
from app.store.models import AuditEntry
from tests.security.conftest import Shared
from tests.security.routes import ENDPOINTS


def actions_of(shared: Shared, case_id: int) -> list[tuple[str, str]]:
    trail = audit.case_trail(shared.ctx, case_id=case_id, limit=5000)
    return [(entry.action, entry.actor) for entry in trail.entries]


def test_every_kind_of_change_is_recorded_with_who_did_it(shared: Shared) -> None:
    referee = shared.as_user("referee")
    case_id = shared.fresh_case(own=True)
    upload = datasets.upload_dataset(referee, case_id=case_id, source=io.BytesIO(shared.csv), file_name="w.csv")
    dataset_id = upload.dataset.id
    claim_id = claims.create_claim(referee, case_id=case_id, dataset_id=dataset_id, spec=shared.spec).claim.id
    revised = claims.revise_claim(
        referee, case_id=case_id, claim_id=claim_id, dataset_id=dataset_id, spec={**shared.spec, "title": "Revised"}
    ).claim.id
    refit = refits.start_refit(referee, case_id=case_id, claim_id=revised, dataset_id=dataset_id, wait_seconds=60)
    item = checklists.get_checklist(referee, case_id=case_id, refit_id=refit.id).sections[0].items[0]["id"]
    checklists.save_judgement(referee, case_id=case_id, refit_id=refit.id, item_id=item, standing="serious", note="")
    checklists.save_judgement(referee, case_id=case_id, refit_id=refit.id, item_id=item, standing="serious", note="Why?")
    access.grant_access(shared.as_user("coordinator"), case_id=case_id, user_id=shared.bystander_id)

    recorded = actions_of(shared, case_id)

    expected = {
        ("dataset_uploaded", "referee (test)"),
        ("claim_entered", "referee (test)"),
        ("claim_revised", "referee (test)"),
        ("refit_started", "referee (test)"),
        ("refit_finished", "refit worker"),
        ("judgement_saved", "referee (test)"),
        ("note_saved", "referee (test)"),
        ("access_granted", "coordinator (test)"),
    }
    assert expected <= set(recorded)


def test_entries_say_what_changed_without_copying_the_note(shared: Shared) -> None:
    referee = shared.as_user("referee")
    checklists.save_judgement(
        referee,
        case_id=shared.own.case_id,
        refit_id=shared.own.refit_id,
        item_id=shared.own.item_id,
        standing="concern",
        note="Confidential remark about the authors' lab.",
    )
    entry = audit.case_trail(shared.ctx, case_id=shared.own.case_id).entries[0]
    assert entry.action in ("judgement_saved", "note_saved")
    assert "standing" in entry.detail or "note now" in entry.detail
    assert "Confidential remark" not in entry.detail


def test_web_changes_record_the_address(shared: Shared) -> None:
    client = shared.clients["referee"]
    client.put(
        f"/api/v1/cases/{shared.own.case_id}/refits/{shared.own.refit_id}/judgements/{shared.own.item_id}",
        json={"standing": None, "note": "from the browser"},
    )
    entry = audit.case_trail(shared.ctx, case_id=shared.own.case_id).entries[0]
    assert (entry.actor, entry.address) == ("referee (web session)", "testclient")


def test_the_server_trail_holds_sign_in_failures_and_accounts(shared: Shared) -> None:
    shared.clients["anonymous"].get("/sign-in")
    trail = shared.clients["steward"].get("/api/v1/audit").json()
    actions = {entry["action"] for entry in trail["entries"]}
    assert {"user_added", "signed_in"} <= actions


def test_an_editor_reads_a_case_trail_on_its_page(shared: Shared) -> None:
    page = shared.clients["coordinator"].get(f"/cases/{shared.own.case_id}/audit")
    assert page.status_code == 200
    assert "dataset uploaded" in page.text and "Entries cannot be edited or removed" in page.text


def test_no_route_can_change_the_trail() -> None:
    audit_routes = [endpoint for endpoint in ENDPOINTS if "audit" in endpoint.path]
    assert audit_routes and all(endpoint.method == "GET" for endpoint in audit_routes)


def test_the_database_refuses_to_change_an_entry(shared: Shared) -> None:
    with pytest.raises(DatabaseError, match="the audit trail cannot be changed"):
        with shared.ctx.transaction() as session:
            session.execute(update(AuditEntry).values(detail="rewritten"))
    with shared.ctx.reading() as session:
        assert session.scalar(select(AuditEntry.id).where(AuditEntry.detail == "rewritten")) is None
        assert session.execute(text("SELECT count(*) FROM audit_entries")).scalar()
