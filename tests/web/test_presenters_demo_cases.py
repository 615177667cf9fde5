"""Nothing a refit finds is hidden: every field of every diagnostic of every demo case reaches the results page.

The demo cases are refitted from their own generators (seed_demo/scenarios);
between them they hold every kind of nested result the engine writes (critical
values by criterion, intervals as a direct effect grows, balance by covariate,
bootstrap tests, the omitted-cause grid, mediation estimates, panel terms).
"""

from __future__ import annotations

import copy
from typing import Any

import numpy as np
import pytest

from app.estimation.refit import refit
from app.spec import parse_claim
from app.web import labels, presenters
from seed_demo.scenarios import all_scenarios


@pytest.fixture(scope="module", params=all_scenarios(), ids=lambda scenario: scenario.SLUG)
def demo_findings(request: pytest.FixtureRequest) -> dict[str, Any]:
    scenario = request.param
    frame = scenario.generate(np.random.default_rng(scenario.SEED))
    return refit(frame, parse_claim(copy.deepcopy(scenario.claim()))).to_dict()


def diagnostic_results(findings: dict[str, Any]) -> list[tuple[str, dict[str, Any]]]:
    return [entry for group in presenters.group_diagnostics(findings["diagnostics"]) for entry in group.results]


def inner_keys(value: Any) -> set[str]:
    """Keys that are not null anywhere inside a nested list or record."""
    if isinstance(value, dict):
        found = {key for key, item in value.items() if item is not None}
        return found.union(*(inner_keys(item) for item in value.values()))
    if isinstance(value, list):
        return set().union(*(inner_keys(item) for item in value))
    return set()


def hidden_fields(findings: dict[str, Any]) -> list[str]:
    """``diagnostic.field`` or ``diagnostic.field.key`` for each value that is not null and not shown."""
    hidden = []
    for key, result in diagnostic_results(findings):
        shown = presenters.details(key, result)
        for field, value in result.items():
            if field in presenters.RESULT_FIELDS or value is None:
                continue
            if field not in shown.fields():
                hidden.append(f"{key}.{field}")
            coefficient_keys = {k for table in shown.coefficients if table.field == field for k in table.keys}
            tabled = {k for table in shown.tables if table.field == field for k in table.keys}
            for inner in inner_keys(value) - tabled - coefficient_keys:
                if not (coefficient_keys and inner in presenters.COEFFICIENT_ROW_RESTATES):
                    hidden.append(f"{key}.{field}.{inner}")
    return hidden


def unlabelled(findings: dict[str, Any]) -> list[str]:
    """Shown fields and record keys that would appear under the engine's own name instead of our words."""
    missing = []
    for key, result in diagnostic_results(findings):
        shown = presenters.details(key, result)
        for field in shown.fields() - presenters.RESULT_FIELDS:
            listed = (
                field in labels.DETAIL_FIELDS
                or field in labels.NESTED_FIELDS
                or (key, field) in labels.DETAIL_FIELDS_BY_DIAGNOSTIC
                or (key, field) in labels.NESTED_FIELDS_BY_DIAGNOSTIC
            )
            if not listed and field != "confidence_set":
                missing.append(f"{key}.{field}")
        for table in shown.tables:
            if table.field in presenters.INDEXED_BY:
                continue
            for inner in table.keys:
                labelled = inner in labels.RECORD_FIELDS or any(
                    name == inner for _, name in labels.RECORD_FIELDS_BY_PARENT
                )
                if not labelled:
                    missing.append(f"{key}.{table.field}.{inner}")
    return missing


def test_every_field_of_every_diagnostic_is_shown(demo_findings: dict[str, Any]) -> None:
    assert hidden_fields(demo_findings) == []


def test_every_field_shown_has_a_label_in_words(demo_findings: dict[str, Any]) -> None:
    assert unlabelled(demo_findings) == []


def test_the_walk_notices_a_field_the_page_would_drop_or_leave_unlabelled() -> None:
    result = {"name": "x", "statistic": 1.0, "term_rows": [{"term": "a", "estimate": 0.5, "odd": 2}], "extra": {"level": 3}}
    findings = {"diagnostics": {"something_new": result}}
    assert hidden_fields(findings) == ["something_new.term_rows.odd"]
    assert sorted(unlabelled(findings)) == ["something_new.extra", "something_new.extra.level", "something_new.term_rows"]
