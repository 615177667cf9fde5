"""When failed sign-ins stop further attempts (sliding window)."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta

from app.auth.rate_limit import wait_needed

NOW = datetime(2026, 12, 1, 12, 0, tzinfo=UTC)
WINDOW = timedelta(minutes=15)


def minutes_ago(*minutes: float) -> list[datetime]:
    return [NOW - timedelta(minutes=value) for value in minutes]


def test_fewer_failures_than_the_limit_allow_another_attempt() -> None:
    assert wait_needed(minutes_ago(1, 2, 3, 4), limit=5, window=WINDOW, now=NOW) is None


def test_reaching_the_limit_waits_until_the_oldest_counted_failure_leaves_the_window() -> None:
    wait = wait_needed(minutes_ago(1, 2, 3, 4, 10), limit=5, window=WINDOW, now=NOW)
    assert wait == timedelta(minutes=5)


def test_only_the_newest_failures_count_towards_the_wait() -> None:
    wait = wait_needed(minutes_ago(1, 2, 3, 12, 13, 14), limit=3, window=WINDOW, now=NOW)
    assert wait == timedelta(minutes=12)


def test_failures_older_than_the_window_are_forgotten() -> None:
    assert wait_needed(minutes_ago(16, 20, 30, 40, 50), limit=3, window=WINDOW, now=NOW) is None
