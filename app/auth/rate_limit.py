"""When failed sign-ins stop further attempts: per account and per network address, in a sliding window.

The failures themselves are the audit trail's ``sign_in_failed`` entries, so
the limits hold across restarts and across server processes. An account's
count starts again after a successful sign-in; an address's does not.
"""

from __future__ import annotations

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
