"""When failed sign-ins stop further attempts: per account and per network address, in a sliding window.

The failures themselves are the audit trail's ``sign_in_failed`` entries, so
the limits hold across restarts and across server processes. An account's
count starts again after a successful sign-in; an address's does not.

Attempts refused by the limits are recorded too, but at most one audit entry
per account per ``every`` (someone hammering the form must not flood the
trail): :class:`RefusalTally` counts the refusals between entries, so each
entry says how many attempts it stands for.
"""

from __future__ import annotations

import threading
from collections.abc import Sequence
from dataclasses import dataclass
from datetime import datetime, timedelta


@dataclass(frozen=True)
class SignInLimits:
    """How many failures are allowed within ``window`` per account and per address."""

    window: timedelta
    per_account: int
    per_address: int


def wait_needed(failures: Sequence[datetime], *, limit: int, window: timedelta, now: datetime) -> timedelta | None:
    """How long until another attempt is allowed, or None when one is allowed now.

    Parameters
    ----------
    failures
        Times of the failures counted against the account or address.
    limit
        Failures allowed within ``window``; the next attempt waits until the
        oldest of the newest ``limit`` failures leaves the window.
    """
    recent = sorted(moment for moment in failures if now - moment < window)
    if len(recent) < limit:
        return None
    return recent[-limit] + window - now


class RefusalTally:
    """Sign-in attempts refused by the limits, counted per account between two audit entries (thread-safe).

    Call :meth:`refused` for each refusal: it answers how many refusals the
    audit entry to write now stands for, or None while an entry for the account
    was written less than ``every`` ago (the refusal is then counted for the
    next one). :meth:`take` hands over the refusals not yet recorded (at the
    account's next attempt, or when the server stops).
    """

    def __init__(self, *, every: timedelta) -> None:
        self._every = every
        self._lock = threading.Lock()
        self._pending: dict[str, int] = {}
        self._last_entry: dict[str, datetime] = {}

    def refused(self, account: str, *, now: datetime) -> int | None:
        """Count one refusal; the number to record now, or None to record it later."""
        with self._lock:
            count = self._pending.pop(account, 0) + 1
            last = self._last_entry.get(account)
            if last is not None and now - last < self._every:
                self._pending[account] = count
                return None
            self._last_entry[account] = now
            return count

    def take(self, account: str | None = None) -> dict[str, int]:
        """The refusals not yet recorded, by account (one account, or all), forgotten once taken."""
        with self._lock:
            names = list(self._pending) if account is None else [account]
            return {name: count for name in names if (count := self._pending.pop(name, 0))}
