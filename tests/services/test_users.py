"""Accounts: names, roles, passwords; the server always keeps a steward."""

from __future__ import annotations

import pytest

from app.auth.actors import Actor
from app.auth.roles import Role
from app.services import sign_in, users
from app.services.context import ServiceContext
from app.services.errors import Forbidden, InvalidInput, SignInRefused

PASSWORD = "correct horse battery"


def test_an_account_is_added_with_a_lower_case_name_and_only_a_hash(ctx: ServiceContext) -> None:
    added = users.add_user(ctx, name="  Anna.Berg ", role="referee", password=PASSWORD, full_name="Anna Berg")
    assert (added.name, added.role, added.full_name) == ("anna.berg", "referee", "Anna Berg")
    assert PASSWORD not in users.list_users(ctx).model_dump_json()
    assert sign_in.sign_in(ctx, name="ANNA.BERG", password=PASSWORD, address="here").user.name == "anna.berg"


@pytest.mark.parametrize(
    ("name", "role", "password", "field"),
    [
        ("a", "referee", PASSWORD, "name"),
        ("anna berg", "referee", PASSWORD, "name"),
        ("<b>anna</b>", "referee", PASSWORD, "name"),
        ("anna", "editor", PASSWORD, "role"),
        ("anna", "referee", "short", "password"),
        ("anna", "referee", "anna", "password"),
    ],
)
def test_bad_account_fields_are_refused_field_by_field(
    ctx: ServiceContext, name: str, role: str, password: str, field: str
) -> None:
    with pytest.raises(InvalidInput) as refused:
        users.add_user(ctx, name=name, role=role, password=password)
    assert field in {problem.field for problem in refused.value.problems}
    assert users.list_users(ctx).users == []


def test_a_name_is_taken_only_once(ctx: ServiceContext) -> None:
    users.add_user(ctx, name="anna", role="referee", password=PASSWORD)
    with pytest.raises(InvalidInput, match="already an account named 'anna'"):
        users.add_user(ctx, name="ANNA", role="reader", password=PASSWORD)


def test_the_last_steward_can_be_neither_removed_nor_demoted(ctx: ServiceContext) -> None:
    only = users.add_user(ctx, name="keeper", role="steward", password=PASSWORD).id
    with pytest.raises(Forbidden, match="only steward"):
        users.remove_user(ctx, user_id=only)
    with pytest.raises(Forbidden, match="only steward"):
        users.set_role(ctx, user_id=only, role="coordinator")
    second = users.add_user(ctx, name="second", role="steward", password=PASSWORD).id
    assert users.set_role(ctx, user_id=only, role="coordinator").role == "coordinator"
    with pytest.raises(Forbidden):
        users.remove_user(ctx, user_id=second)


def test_nobody_removes_their_own_account(ctx: ServiceContext) -> None:
    users.add_user(ctx, name="keeper", role="steward", password=PASSWORD)
    me = users.add_user(ctx, name="me", role="steward", password=PASSWORD).id
    own = ctx.acting_as(Actor(name="me", kind="user", role=Role.STEWARD, user_id=me))
    with pytest.raises(Forbidden, match="your own account"):
        users.remove_user(own, user_id=me)


def test_only_stewards_manage_accounts(ctx: ServiceContext) -> None:
    coordinator = ctx.acting_as(Actor(name="c", kind="user", role=Role.COORDINATOR, user_id=1))
    with pytest.raises(Forbidden):
        users.add_user(coordinator, name="anna", role="referee", password=PASSWORD)
    with pytest.raises(Forbidden):
        users.list_users(coordinator)


def test_changing_ones_own_password_needs_the_current_one_and_keeps_this_sign_in(ctx: ServiceContext) -> None:
    user_id = users.add_user(ctx, name="anna", role="referee", password=PASSWORD).id
    here = sign_in.sign_in(ctx, name="anna", password=PASSWORD, address="here")
    there = sign_in.sign_in(ctx, name="anna", password=PASSWORD, address="there")
    anna = ctx.acting_as(Actor(name="anna", kind="user", role=Role.REFEREE, user_id=user_id, session_id=here.session_id))

    with pytest.raises(InvalidInput, match="not your current password"):
        users.change_own_password(anna, current="wrong", new="a different password")
    users.change_own_password(anna, current=PASSWORD, new="a different password")

    assert sign_in.actor_for_session(ctx, secret=here.secret, address="here") is not None
    assert sign_in.actor_for_session(ctx, secret=there.secret, address="there") is None
    with pytest.raises(SignInRefused):
        sign_in.sign_in(ctx, name="anna", password=PASSWORD, address="here")
