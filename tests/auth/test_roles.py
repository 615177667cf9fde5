"""What each role may do, as the table in app/auth/roles.py says."""

from __future__ import annotations

from app.auth.actors import SERVER, Actor
from app.auth.roles import Action, Role, ServerAction


def person(role: Role) -> Actor:
    return Actor(name=role.value, kind="user", role=role, user_id=1)


def test_stewards_and_coordinators_see_and_manage_every_case() -> None:
    for role in (Role.STEWARD, Role.COORDINATOR):
        assert person(role).sees_every_case
        assert all(person(role).may(action) for action in Action)


def test_referees_work_on_their_cases_but_do_not_manage_them() -> None:
    referee = person(Role.REFEREE)
    assert not referee.sees_every_case
    assert [action for action in Action if referee.may(action)] == [Action.READ, Action.EXPORT, Action.EDIT, Action.SHARE]


def test_readers_only_read() -> None:
    reader = person(Role.READER)
    assert [action for action in Action if reader.may(action)] == [Action.READ, Action.EXPORT]
    assert not any(reader.may_on_server(action) for action in ServerAction)


def test_only_stewards_manage_accounts_and_the_server_itself_may_do_everything() -> None:
    assert [role for role in Role if person(role).may_on_server(ServerAction.MANAGE_ACCOUNTS)] == [Role.STEWARD]
    assert SERVER.sees_every_case and all(SERVER.may(action) for action in Action)
