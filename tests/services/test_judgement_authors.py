"""Judgements name who saved them, and a save made from an older version of the note is refused."""

from __future__ import annotations

import pytest
from sqlalchemy import select

from app.auth.actors import Actor
from app.auth.roles import Role
from app.services import checklists
from app.services.checklists import LoadedVersion
from app.services.context import ServiceContext
from app.services.errors import ChangedMeanwhile
from app.store.models import AuditEntry
from app.store.models import Judgement as JudgementRow
from tests.accounts import add_account
from tests.services.conftest import Reviewed


@pytest.fixture
def referees(ctx: ServiceContext) -> tuple[ServiceContext, ServiceContext]:
    """Two coordinators (who see every case) acting on the same checklist."""
    people = []
    for name in ("ines", "tomas"):
        user_id = add_account(ctx, name, "coordinator")
        people.append(ctx.acting_as(Actor(name=name, kind="user", role=Role.COORDINATOR, user_id=user_id, via="web session")))
    return people[0], people[1]


def first_item(ctx: ServiceContext, reviewed: Reviewed) -> dict[str, object]:
    view = checklists.get_checklist(ctx, case_id=reviewed.case_id, refit_id=reviewed.refit_id)
    return view.sections[0].items[0]


def save(ctx: ServiceContext, reviewed: Reviewed, item_id: str, note: str, loaded: LoadedVersion | None) -> checklists.JudgementSaved:
    return checklists.save_judgement(
        ctx, case_id=reviewed.case_id, refit_id=reviewed.refit_id, item_id=item_id, standing=None, note=note, loaded=loaded
    )


def test_a_saved_judgement_names_its_author_and_time(
    ctx: ServiceContext, reviewed: Reviewed, referees: tuple[ServiceContext, ServiceContext]
) -> None:
    ines, _ = referees
    item = first_item(ctx, reviewed)
    assert item["saved_by"] is None and item["saved_at"] is None

    saved = save(ines, reviewed, str(item["id"]), "Ask for the first stage by region.", LoadedVersion(None))

    reloaded = first_item(ctx, reviewed)
    assert reloaded["saved_by"] == "ines"
    assert reloaded["saved_at"] == saved.saved_at == saved.item["saved_at"]
    with ctx.reading() as session:
        row = session.scalars(select(JudgementRow).where(JudgementRow.item_id == item["id"])).one()
        assert (row.author, row.author_user_id) == ("ines", ines.actor.user_id)


def test_a_save_from_an_older_version_is_refused_and_keeps_nothing(
    ctx: ServiceContext, reviewed: Reviewed, referees: tuple[ServiceContext, ServiceContext]
) -> None:
    ines, tomas = referees
    item_id = str(first_item(ctx, reviewed)["id"])
    both_loaded = LoadedVersion(None)
    first = save(ines, reviewed, item_id, "Ines's reading.", both_loaded)

    with pytest.raises(ChangedMeanwhile) as refused:
        save(tomas, reviewed, item_id, "Tomas's reading.", both_loaded)

    at = first.saved_at.strftime("%Y-%m-%d %H:%M UTC")
    assert str(refused.value) == f"ines changed this note at {at}; reload to see it, your change was not saved"
    kept = first_item(ctx, reviewed)
    assert kept["judgement"]["note"] == "Ines's reading."
    assert kept["saved_by"] == "ines"


def test_a_save_from_the_current_version_goes_through_and_replaces_it(
    ctx: ServiceContext, reviewed: Reviewed, referees: tuple[ServiceContext, ServiceContext]
) -> None:
    ines, tomas = referees
    item_id = str(first_item(ctx, reviewed)["id"])
    first = save(ines, reviewed, item_id, "Ines's reading.", LoadedVersion(None))

    second = save(tomas, reviewed, item_id, "Tomas agrees, and adds a question.", LoadedVersion(first.item["saved_at"]))

    assert second.item["saved_by"] == "tomas"
    with ctx.reading() as session:
        detail = session.scalars(
            select(AuditEntry.detail).where(AuditEntry.action == "note_saved").order_by(AuditEntry.id.desc())
        ).first()
    assert detail is not None
    assert detail.endswith("; by tomas, replacing the judgement by ines")


def test_a_save_after_someone_cleared_the_item_is_refused(
    ctx: ServiceContext, reviewed: Reviewed, referees: tuple[ServiceContext, ServiceContext]
) -> None:
    ines, tomas = referees
    item_id = str(first_item(ctx, reviewed)["id"])
    first = save(ines, reviewed, item_id, "A note to be cleared.", LoadedVersion(None))
    save(ines, reviewed, item_id, "", LoadedVersion(first.item["saved_at"]))

    with pytest.raises(ChangedMeanwhile, match="cleared this judgement"):
        save(tomas, reviewed, item_id, "Too late.", LoadedVersion(first.item["saved_at"]))
    assert first_item(ctx, reviewed)["judgement"] is None


def test_without_a_version_a_save_is_not_checked(
    ctx: ServiceContext, reviewed: Reviewed, referees: tuple[ServiceContext, ServiceContext]
) -> None:
    ines, tomas = referees
    item_id = str(first_item(ctx, reviewed)["id"])
    save(ines, reviewed, item_id, "First.", LoadedVersion(None))
    assert save(tomas, reviewed, item_id, "Second.", None).item["judgement"]["note"] == "Second."


@pytest.mark.parametrize(("text", "expected"), [("none", None), (" 2026-03-01T10:15:30.123456+00:00 ", "2026-03-01T10:15:30.123456+00:00")])
def test_a_forms_version_is_read_from_its_text(text: str, expected: str | None) -> None:
    loaded = LoadedVersion.from_text(text)
    assert (loaded.updated_at.isoformat() if loaded.updated_at else None) == expected


def test_a_version_that_is_not_a_time_is_a_clear_problem() -> None:
    with pytest.raises(checklists.InvalidInput, match="reload the page"):
        LoadedVersion.from_text("yesterday")
