"""Demo scenarios, one module each, discovered by :func:`all_scenarios`.

A scenario module exposes ``SLUG``, ``TITLE``, ``STORY``, ``TRUE_EFFECT``,
``SEED``, ``generate(rng) -> DataFrame`` and ``claim() -> dict``.
"""

from __future__ import annotations

import importlib
import pkgutil
from types import ModuleType


def all_scenarios() -> list[ModuleType]:
    """Every scenario module in this package, ordered by slug."""
    modules = [
        importlib.import_module(f"{__name__}.{info.name}")
        for info in pkgutil.iter_modules(__path__)
        if not info.name.startswith("_")
    ]
    return sorted(modules, key=lambda module: module.SLUG)
