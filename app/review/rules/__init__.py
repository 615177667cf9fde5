"""The checklist's rules, one module per section, in the order the checklist shows them.

Each section module exposes ``SECTION`` (the stable id), ``TITLE`` (display
words) and ``RULES`` (a tuple of :class:`app.review.rules.base.Rule`).
"""

from __future__ import annotations

from types import ModuleType

from app.review.rules import design, exclusion, inference, omitted_causes, overidentification, relevance, reproduction

SECTION_MODULES: tuple[ModuleType, ...] = (
    reproduction,
    omitted_causes,
    relevance,
    exclusion,
    overidentification,
    inference,
    design,
)
"""Sections in display order."""

SECTION_TITLES: dict[str, str] = {module.SECTION: module.TITLE for module in SECTION_MODULES}
"""Display name of each stable section id."""
