"""Typed request parameters shared by the routes: row ids that the database can hold.

An id is a positive 64-bit integer; a larger number in a path, query or form
field is refused as invalid input (422) before it reaches a query, where
SQLite could not even bind it.
"""

from __future__ import annotations

from typing import Annotated

from fastapi import Form, Path, Query

MAX_ROW_ID = 2**63 - 1

RowId = Annotated[int, Path(ge=1, le=MAX_ROW_ID)]
"""A row id in the path (``/cases/{case_id}``)."""

QueryRowId = Annotated[int, Query(ge=1, le=MAX_ROW_ID)]
"""A row id in the query string (``?before=3``)."""

FormRowId = Annotated[int, Form(ge=1, le=MAX_ROW_ID)]
"""A row id in a form field."""


def row_id(text: str | None) -> int | None:
    """A row id typed into a form field, or None when it is not one."""
    if not text or not text.isdigit() or len(text) > 19:
        return None
    value = int(text)
    return value if 1 <= value <= MAX_ROW_ID else None
