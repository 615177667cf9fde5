"""Rendered pages of a case, kept until the case changes.

A case page, results page or checklist page is a function of what the case
holds, and every change to that raises the case's revision
(:func:`app.services.cases.case_revision`). Pages are therefore kept under
(path, query, revision): a later request for the same revision gets the same
bytes without querying and rendering again.

Anything else a page shows must be part of the key: pages of a case show the
signed-in person's name, offer what their role may do and carry their web
session's form token, so they are kept per (session, role) as well
(:func:`app.web.rendering.case_page_cached`). Pages of a session link show the
same to everyone who follows it and are shared
(:func:`app.web.rendering.link_page_cached`).
"""

from __future__ import annotations

import threading
from collections import OrderedDict
from collections.abc import Callable, Hashable

from fastapi.responses import HTMLResponse, Response


class PageCache:
    """The newest ``size`` rendered pages (successful ones only)."""

    def __init__(self, *, size: int) -> None:
        self._size = size
        self._pages: OrderedDict[Hashable, bytes] = OrderedDict()
        self._lock = threading.Lock()

    def get_or_render(self, key: Hashable, render: Callable[[], Response]) -> Response:
        """The page stored under ``key``, or ``render()`` (stored when it succeeded)."""
        with self._lock:
            body = self._pages.get(key)
            if body is not None:
                self._pages.move_to_end(key)
        if body is not None:
            return HTMLResponse(body)
        response = render()
        if self._size and response.status_code == 200:
            with self._lock:
                self._pages[key] = bytes(response.body)
                while len(self._pages) > self._size:
                    self._pages.popitem(last=False)
        return response
