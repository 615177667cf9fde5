"""Fixtures every test folder may use: the walking demo's files (see :mod:`tests.walking_demo`)."""

from __future__ import annotations

from typing import Any

import pytest

from tests.walking_demo import demo_claim, demo_csv_bytes


@pytest.fixture
def demo_csv() -> bytes:
    """The walking demo's data file."""
    return demo_csv_bytes()


@pytest.fixture
def demo_spec() -> dict[str, Any]:
    """The walking demo's claim as the fictional manuscript states it."""
    return demo_claim()
