"""Shared helpers for the review tests."""

from __future__ import annotations

from typing import Any

import pytest

from app.review.checklist import ChecklistItem, build_checklist


@pytest.fixture
def item():
    """``item(findings, "section.item")``: the checklist item with that id."""

    def read(findings: dict[str, Any], item_id: str, **options: Any) -> ChecklistItem:
        return build_checklist(findings, **options).item(item_id)

    return read
