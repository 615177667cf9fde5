"""Who sees a case: stewards and coordinators all; referees and readers only the cases given to them."""

from __future__ import annotations

import pytest

from app.auth.actors import Actor
from app.auth.roles import Role
from app.services import access, cases, checklists, users
from app.services.context import ServiceContext
from app.services.errors import Forbidden, InvalidInput, NotFound
from tests.services.conftest import Reviewed

PASSWORD = "correct horse battery"


def person(ctx: ServiceContext, name: str, role: str) -> ServiceContext:
    user_id = users.add_user(ctx, name=name, role=role, password=PASSWORD).id
    return ctx.acting_as(Actor(name=name, kind="user", role=Role(role), user_id=user_id))


def test_a_referee_sees_only_the_cases_given_to_them(ctx: ServiceContext, reviewed: Reviewed) -> None:
    referee = person(ctx, "rosa", "referee")
    other = cases.create_case(ctx, title="Not hers").case.id
    access.grant_access(ctx, case_id=reviewed.case_id, user_id=referee.actor.user_id)

    assert [row.id for row in cases.list_cases(referee).cases] == [reviewed.case_id]
    assert cases.list_cases(referee).total_cases == 1
    assert cases.get_case(referee, case_id=reviewed.case_id).case.id == reviewed.case_id
    with pytest.raises(NotFound, match=f"there is no case {other}"):
        cases.get_case(referee, case_id=other)
    with pytest.raises(NotFound, match=f"there is no case {other}"):
        cases.case_revision(referee, case_id=other)


def test_a_case_one_may_not_see_reads_exactly_like_a_missing_one(ctx: ServiceContext) -> None:
    reader = person(ctx, "rhea", "reader")
    hidden = cases.create_case(ctx, title="Hidden").case.id
    with pytest.raises(NotFound) as invisible:
        cases.get_case(reader, case_id=hidden)
    with pytest.raises(NotFound) as missing:
        cases.get_case(reader, case_id=hidden + 1000)
    assert str(invisible.value) == str(missing.value).replace(str(hidden + 1000), str(hidden))


def test_a_reader_reads_but_changes_nothing(ctx: ServiceContext, reviewed: Reviewed) -> None:
    reader = person(ctx, "rhea", "reader")
    access.grant_access(ctx, case_id=reviewed.case_id, user_id=reader.actor.user_id)
    item = checklists.get_checklist(reader, case_id=reviewed.case_id, refit_id=reviewed.refit_id).sections[0].items[0]["id"]
    with pytest.raises(Forbidden, match="as a reader you cannot change this case"):
        checklists.save_judgement(reader, case_id=reviewed.case_id, refit_id=reviewed.refit_id, item_id=item, standing=None, note="x")


def test_withdrawn_access_takes_the_case_away(ctx: ServiceContext, reviewed: Reviewed) -> None:
    referee = person(ctx, "rosa", "referee")
    access.grant_access(ctx, case_id=reviewed.case_id, user_id=referee.actor.user_id)
    access.withdraw_access(ctx, case_id=reviewed.case_id, user_id=referee.actor.user_id)
    with pytest.raises(NotFound):
        cases.get_case(referee, case_id=reviewed.case_id)


def test_a_referee_who_opens_a_case_is_given_it(ctx: ServiceContext) -> None:
    referee = person(ctx, "rosa", "referee")
    opened = cases.create_case(referee, title="Her own").case.id
    assert [row.id for row in cases.list_cases(referee).cases] == [opened]


def test_readers_open_no_case_and_coordinators_need_no_access(ctx: ServiceContext) -> None:
    with pytest.raises(Forbidden):
        cases.create_case(person(ctx, "rhea", "reader"), title="x")
    coordinator = person(ctx, "cora", "coordinator")
    with pytest.raises(InvalidInput, match="sees every case already"):
        access.grant_access(ctx, case_id=cases.create_case(ctx, title="y").case.id, user_id=coordinator.actor.user_id)


def test_referees_do_not_learn_who_else_reviews_the_case(ctx: ServiceContext, reviewed: Reviewed) -> None:
    rosa, omar = person(ctx, "rosa", "referee"), person(ctx, "omar", "referee")
    for referee in (rosa, omar):
        access.grant_access(ctx, case_id=reviewed.case_id, user_id=referee.actor.user_id)
    detail = cases.get_case(rosa, case_id=reviewed.case_id)
    assert detail.access == [] and detail.candidates == []
    assert "omar" not in detail.model_dump_json()
    assert {person.name for person in cases.get_case(ctx, case_id=reviewed.case_id).access} == {"rosa", "omar"}
