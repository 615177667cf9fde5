"""Every rule's threshold equals its published value (tests/review/reference/published_thresholds.toml)."""

from __future__ import annotations

import importlib
import tomllib
from pathlib import Path

import pytest

REFERENCE = tomllib.loads((Path(__file__).parent / "reference" / "published_thresholds.toml").read_text(encoding="utf-8"))


@pytest.mark.parametrize("name", sorted(REFERENCE))
def test_rule_constant_matches_its_source(name):
    entry = REFERENCE[name]
    module_name, _, attribute = entry["constant"].rpartition(".")
    assert getattr(importlib.import_module(module_name), attribute) == entry["value"], entry["source"]
