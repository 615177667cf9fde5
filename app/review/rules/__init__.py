"""The checklist's rules, one module per section, in the order the checklist shows them.

Each section module exposes ``SECTION`` (the stable id), ``TITLE`` (display
words) and ``RULES`` (a tuple of :class:`app.review.rules.base.Rule`).

Adding a rule
-------------
1. In the section's module, keep the threshold in a module constant whose
   docstring names its published source (or says "common practice" for a
   rule of thumb), and write ``assess_<name>(view) -> Outcome``. Read the
   findings only through :class:`app.review.view.FindingsView`; start with
   :func:`~app.review.rules.base.unavailable` so that a missing or
   not-computed diagnostic gives a ``not_applicable`` item that says so.
2. Add a :class:`~app.review.rules.base.Rule` to ``RULES`` with a new id
   ``<section>.<item>`` (ids are stable: judgements are stored by them), a
   title in plain words, the rule with its threshold, the source, and a
   two-sentence explanation a non-specialist can follow. Outcomes that are not
   sound carry a drafted question to the authors.
3. Test the rule at, just below and just above its threshold on constructed
   findings (tests/review/findings_builder.py), add its id to the list in
   tests/review/test_checklist.py and its threshold to
   tests/review/reference/published_thresholds.toml.
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
