"""The in-process worker that runs refits off the request, with no extra server.

A small thread pool inside the server process. Refit state lives in the
database, not in the pool: a refit that was waiting or running when the server
stopped is submitted again at the next start (see
:func:`app.services.refits.resume_unfinished`), so nothing depends on the pool
surviving.
"""

from __future__ import annotations

import logging
from collections.abc import Callable
from concurrent.futures import Future, ThreadPoolExecutor
from typing import Any

log = logging.getLogger(__name__)


class JobRunner:
    """Runs callables on ``threads`` background threads."""

    def __init__(self, *, threads: int) -> None:
        self._pool = ThreadPoolExecutor(max_workers=threads, thread_name_prefix="secondstage-refit")

    def submit(self, work: Callable[..., Any], *args: Any) -> Future[Any]:
        """Queue ``work(*args)``; an exception escaping it is logged, never lost silently."""
        future = self._pool.submit(work, *args)
        future.add_done_callback(_log_failure)
        return future

    def shutdown(self) -> None:
        """Drop queued jobs (they resume at the next start) and wait for running ones."""
        self._pool.shutdown(wait=True, cancel_futures=True)


def _log_failure(future: Future[Any]) -> None:
    if not future.cancelled() and (error := future.exception()) is not None:
        log.error("background job failed", exc_info=error)
