"""A case's data leaves the server with it: deletion removes every row and file, closing freezes, purging follows retention."""

from __future__ import annotations

from collections.abc import Iterator
from datetime import timedelta
from pathlib import Path

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import func, select, update

from app.auth.actors import Actor
from app.auth.roles import Role
from app.cli.main import main
from app.services import access, audit, cases, checklists, lifecycle, session_links
from app.services.context import ServiceContext
from app.services.errors import CaseClosed, Forbidden
from app.store.models import Base, Case, Judgement, utc_now
from app.web.app import create_app
from tests.accounts import add_account, sign_in
from tests.security.conftest import CaseIds, reviewed_case, security_settings
from tests.walking_demo import DEMO_DIR, demo_claim

MARKER = "Unpublished-finding-7f3a9c"
"""Text that exists only in the deleted case: it must not be found anywhere on disk afterwards."""


@pytest.fixture
def ctx(tmp_path: Path) -> Iterator[ServiceContext]:
    context = ServiceContext.open(security_settings(tmp_path / "data", refit_wait_seconds=60.0))
    yield context
    context.close()


@pytest.fixture
def spec() -> dict[str, object]:
    return demo_claim()


def rows_for(ctx: ServiceContext, case_id: int, refit_ids: list[int]) -> dict[str, int]:
    counts = {}
    with ctx.reading() as session:
        counts["cases"] = session.scalar(select(func.count()).select_from(Case).where(Case.id == case_id))
        for table in Base.metadata.sorted_tables:
            if "case_id" in table.c:
                counts[table.name] = session.scalar(select(func.count()).select_from(table).where(table.c.case_id == case_id))
        counts["judgements"] = session.scalar(
            select(func.count()).select_from(Judgement).where(Judgement.refit_id.in_(refit_ids))
        )
    return counts


def everything_on_disk(data_dir: Path) -> bytes:
    return b"".join(path.read_bytes() for path in sorted(data_dir.rglob("*")) if path.is_file())


def with_marker_column(csv: bytes) -> bytes:
    """The demo file with one more column whose first value is :data:`MARKER`."""
    header, first, *rest = csv.decode().splitlines()
    lines = [f"{header},remark", f"{first},{MARKER}", *(f"{line}," for line in rest)]
    return ("\n".join(lines) + "\n").encode()


def a_case_with_everything(ctx: ServiceContext, spec: dict[str, object], csv: bytes) -> CaseIds:
    ids = reviewed_case(ctx, title=f"To be deleted {MARKER}", csv=csv, spec=spec)
    checklists.save_judgement(
        ctx, case_id=ids.case_id, refit_id=ids.refit_id, item_id=ids.item_id, standing="serious", note=MARKER
    )
    reader = add_account(ctx, "reader", "reader")
    access.grant_access(ctx, case_id=ids.case_id, user_id=reader)
    session_links.open_link(ctx, case_id=ids.case_id, refit_id=ids.refit_id, hours=1, label=MARKER)
    return ids


def test_deleting_a_case_leaves_no_row_no_file_and_no_trace_on_disk(ctx: ServiceContext, spec: dict[str, object]) -> None:
    csv = with_marker_column((DEMO_DIR / "data.csv").read_bytes())
    doomed = a_case_with_everything(ctx, spec, csv)
    kept = reviewed_case(ctx, title="Stays", csv=(DEMO_DIR / "data.csv").read_bytes(), spec=spec)
    assert all(count for table, count in rows_for(ctx, doomed.case_id, [doomed.refit_id]).items() if table != "cases")
    doomed_file = next(path for path in ctx.settings.files_dir.glob("??/*") if MARKER.encode() in path.read_bytes())

    report = cases.delete_case(ctx, case_id=doomed.case_id)

    assert report.verified and report.files_erased == 1
    assert set(rows_for(ctx, doomed.case_id, [doomed.refit_id]).values()) == {0}
    assert not doomed_file.exists()
    assert MARKER.encode() not in everything_on_disk(ctx.settings.data_dir)
    assert cases.get_case(ctx, case_id=kept.case_id).case.title == "Stays"


def test_a_file_shared_with_another_case_stays_for_that_case(ctx: ServiceContext, spec: dict[str, object]) -> None:
    csv = (DEMO_DIR / "data.csv").read_bytes()
    first = reviewed_case(ctx, title="First", csv=csv, spec=spec)
    reviewed_case(ctx, title="Second", csv=csv, spec=spec)

    report = cases.delete_case(ctx, case_id=first.case_id)

    assert (report.files_erased, report.files_kept_for_other_cases) == (0, 1)
    assert len(list(ctx.settings.files_dir.glob("??/*"))) == 1


def test_the_deletion_is_recorded_with_who_deleted_it_and_what_went_but_not_the_title(
    ctx: ServiceContext, spec: dict[str, object]
) -> None:
    ids = a_case_with_everything(ctx, spec, (DEMO_DIR / "data.csv").read_bytes())
    coordinator = ctx.acting_as(Actor(name="cora", kind="user", role=Role.COORDINATOR, user_id=None, via="web session"))

    cases.delete_case(coordinator, case_id=ids.case_id)

    entry = audit.server_trail(ctx).entries[0]
    assert (entry.action, entry.actor, entry.case_id) == ("case_deleted", "cora (web session)", None)
    assert entry.subject == f"case {ids.case_id}"  # the title and reference can name a confidential manuscript
    assert entry.detail.startswith("removed 1 data version, 1 claim version, 1 refit, 1 judgement or note, ")
    assert ", 1 access grant, 1 session link, " in entry.detail
    assert entry.detail.endswith("; 1 file erased")
    assert MARKER.lower() not in (entry.subject + entry.detail).lower()


def test_deleting_through_the_pages_needs_the_confirmation_page_first(tmp_path: Path, spec: dict[str, object]) -> None:
    app = create_app(security_settings(tmp_path / "web", refit_wait_seconds=60.0))
    with TestClient(app) as client:
        add_account(app.state.services, "coordinator", "coordinator")
        ids = reviewed_case(app.state.services, title="Web", csv=(DEMO_DIR / "data.csv").read_bytes(), spec=spec)
        sign_in(client, "coordinator")
        case_page = client.get(f"/cases/{ids.case_id}").text
        assert f'href="/cases/{ids.case_id}/delete"' in case_page and f'action="/cases/{ids.case_id}/delete"' not in case_page
        confirm = client.get(f"/cases/{ids.case_id}/delete").text
        assert "This cannot be undone." in confirm and f'action="/cases/{ids.case_id}/delete"' in confirm
        assert client.post(f"/cases/{ids.case_id}/delete", follow_redirects=False).status_code == 303
        assert client.get(f"/cases/{ids.case_id}").status_code == 404
        assert list(app.state.settings.files_dir.glob("??/*")) == []


def test_a_closed_case_changes_no_more_until_it_is_reopened(ctx: ServiceContext, spec: dict[str, object]) -> None:
    ids = reviewed_case(ctx, title="Closing", csv=(DEMO_DIR / "data.csv").read_bytes(), spec=spec)
    lifecycle.close_case(ctx, case_id=ids.case_id)
    change = {"case_id": ids.case_id, "refit_id": ids.refit_id, "item_id": ids.item_id, "standing": None, "note": "late"}
    with pytest.raises(CaseClosed):
        checklists.save_judgement(ctx, **change)
    assert checklists.get_checklist(ctx, case_id=ids.case_id, refit_id=ids.refit_id).case.closed_at is not None
    lifecycle.reopen_case(ctx, case_id=ids.case_id)
    assert checklists.save_judgement(ctx, **change).item["judgement"]["note"] == "late"


def close_days_ago(ctx: ServiceContext, case_id: int, days: float) -> None:
    lifecycle.close_case(ctx, case_id=case_id)
    with ctx.transaction() as session:
        session.execute(update(Case).where(Case.id == case_id).values(closed_at=utc_now() - timedelta(days=days)))


def test_purging_deletes_only_cases_closed_longer_ago_than_the_retention(tmp_path: Path) -> None:
    ctx = ServiceContext.open(security_settings(tmp_path / "data", retention_days=30))
    try:
        old, recent, open_case = (cases.create_case(ctx, title=title).case.id for title in ("Old", "Recent", "Open"))
        close_days_ago(ctx, old, 31)
        close_days_ago(ctx, recent, 29)

        dry = lifecycle.purge_closed(ctx, dry_run=True)
        assert [case.id for case in dry.cases] == [old] and dry.deletions == []
        assert cases.get_case(ctx, case_id=old)

        done = lifecycle.purge_closed(ctx)
        assert [deletion.case_id for deletion in done.deletions] == [old] and done.deletions[0].verified
        remaining = {row.id for row in cases.list_cases(ctx).cases}
        assert remaining == {recent, open_case}
    finally:
        ctx.close()


def test_without_a_retention_period_nothing_is_purged(ctx: ServiceContext) -> None:
    case_id = cases.create_case(ctx, title="Kept").case.id
    close_days_ago(ctx, case_id, 3650)
    assert lifecycle.purge_closed(ctx).cases == []


def test_only_the_server_itself_purges(ctx: ServiceContext) -> None:
    steward = ctx.acting_as(Actor(name="steward", kind="user", role=Role.STEWARD, user_id=1))
    with pytest.raises(Forbidden):
        lifecycle.purge_closed(steward)


def test_the_purge_command_reports_what_it_deleted(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    data_dir = tmp_path / "server"
    ctx = ServiceContext.open(security_settings(data_dir))
    case_id = cases.create_case(ctx, title="Old", reference="MS-OLD").case.id
    close_days_ago(ctx, case_id, 100)
    ctx.close()

    assert main(["purge", "--data-dir", str(data_dir), "--retention-days", "90", "--dry-run"]) == 0
    assert "Would delete 1 case" in capsys.readouterr().out
    assert main(["purge", "--data-dir", str(data_dir), "--retention-days", "90"]) == 0
    assert f"case {case_id} (MS-OLD)" in capsys.readouterr().out
    assert main(["purge", "--data-dir", str(data_dir)]) == 0
    assert "No retention period is configured" in capsys.readouterr().out

