"""Sign-in attempts refused by the limits reach the audit trail, at most one entry per account a minute."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta
from pathlib import Path

import pytest
from sqlalchemy import select

from app.auth.rate_limit import RefusalTally
from app.services import sign_in
from app.services.context import ServiceContext
from app.services.errors import SignInRefused, TooManyAttempts
from app.store.models import AuditEntry
from tests.accounts import add_account
from tests.security.conftest import security_settings

START = datetime(2026, 3, 2, 9, 0, tzinfo=UTC)


def attempt(ctx: ServiceContext, name: str = "ana") -> str:
    try:
        sign_in.sign_in(ctx, name=name, password="not her password", address="192.0.2.7")
    except SignInRefused:
        return "wrong"
    except TooManyAttempts:
        return "refused"
    return "signed in"


def entries(ctx: ServiceContext) -> list[tuple[str, str]]:
    with ctx.reading() as session:
        rows = session.execute(
            select(AuditEntry.action, AuditEntry.detail)
            .where(AuditEntry.action.in_((sign_in.FAILED, sign_in.REFUSED)))
            .order_by(AuditEntry.id)
        ).all()
    return [(action, detail) for action, detail in rows]


def refused_count(detail: str) -> int:
    return int(detail.split(" ")[0])


def test_eight_attempts_leave_eight_attempts_in_the_trail(tmp_path: Path) -> None:
    ctx = ServiceContext.open(security_settings(tmp_path / "data", sign_in_failures_per_account=5))
    add_account(ctx, "ana", "referee")

    outcomes = [attempt(ctx) for _ in range(8)]

    assert outcomes == ["wrong"] * 5 + ["refused"] * 3
    recorded = entries(ctx)
    assert [action for action, _ in recorded] == [sign_in.FAILED] * 5 + [sign_in.REFUSED]
    assert recorded[-1][1].startswith("1 attempt refused without checking the password: too many recent failed")
    ctx.close()
    late = entries(ctx)[6:]
    assert [(action, refused_count(detail)) for action, detail in late] == [(sign_in.REFUSED, 2)]
    assert late[0][1].startswith("2 attempts refused")


def test_refusals_do_not_count_as_failures(tmp_path: Path) -> None:
    ctx = ServiceContext.open(security_settings(tmp_path / "data", sign_in_failures_per_account=2))
    add_account(ctx, "ana", "referee")
    for _ in range(6):
        attempt(ctx)
    assert [action for action, _ in entries(ctx)].count(sign_in.FAILED) == 2
    ctx.close()


def test_the_tally_writes_one_entry_a_minute_counting_the_attempts_between() -> None:
    tally = RefusalTally(every=timedelta(minutes=1))

    first = tally.refused("ana", now=START)
    held = [tally.refused("ana", now=START + timedelta(seconds=s)) for s in (10, 20, 59)]
    next_minute = tally.refused("ana", now=START + timedelta(seconds=61))

    assert (first, held, next_minute) == (1, [None, None, None], 4)


def test_the_tally_keeps_accounts_apart_and_hands_over_what_is_left() -> None:
    tally = RefusalTally(every=timedelta(minutes=1))
    for name in ("ana", "ana", "ana", "ben", "ben"):
        tally.refused(name, now=START)

    assert tally.take("ana") == {"ana": 2}
    assert tally.take() == {"ben": 1}
    assert tally.take() == {}


@pytest.mark.parametrize("name", ["", "nobody-here"])
def test_refusals_of_unknown_names_are_recorded_too(tmp_path: Path, name: str) -> None:
    ctx = ServiceContext.open(security_settings(tmp_path / "data", sign_in_failures_per_account=1))
    add_account(ctx, "ana", "referee")
    assert [attempt(ctx, name) for _ in range(2)] == ["wrong", "refused"]
    assert [action for action, _ in entries(ctx)] == [sign_in.FAILED, sign_in.REFUSED]
    ctx.close()
