"""Arranging findings for the results page: the comparison tables, diagnostics grouped by question."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from app.estimation.inference import CONFIDENCE_LEVEL
from app.review import formatting
from app.web import figures
from app.web.labels import (
    DETAIL_FIELDS,
    DETAIL_FIELDS_BY_DIAGNOSTIC,
    DETAIL_VALUES,
    DIAGNOSTIC_GROUPS,
    ESTIMATORS,
    OTHER_DIAGNOSTICS,
)

RESULT_FIELDS = frozenset(
    {"name", "statistic", "p_value", "df", "distribution", "null_hypothesis", "standing", "reason", "source"}
)
"""Fields every diagnostic result has; anything else is a detail shown beneath it."""


NAIVE_ESTIMATORS = ("ols", "pooled_ols", "random_effects")


@dataclass(frozen=True)
class ClaimedLine:
    """The manuscript's numbers as printed."""

    estimator: str | None
    estimate: str
    std_error: str | None


@dataclass(frozen=True)
class EstimateLine:
    """One estimator's estimate of the focal coefficient, and its distance from the printed number."""

    code: str
    name: str
    description: str
    naive: bool
    estimate: float | None
    std_error: float | None
    ci_low: float | None
    ci_high: float | None
    p_value: float | None
    minus_claimed: float | None


@dataclass(frozen=True)
class EstimateTable:
    """The comparison table of one focal regressor."""

    term: str
    outcome: str
    claimed: ClaimedLine | None
    lines: list[EstimateLine]


def estimate_tables(findings: dict[str, Any]) -> list[EstimateTable]:
    """One table per focal regressor: the manuscript's printed numbers, then every estimator."""
    focal = [str(term) for term in findings.get("focal") or []]
    estimators = {item.get("code"): item for item in findings.get("estimators") or [] if isinstance(item, dict)}
    claimed = (findings.get("claim") or {}).get("claimed") or {}
    claimed_term = claimed.get("term") or (focal[0] if focal else None)
    printed = claimed.get("estimate")
    tables = []
    for term in focal:
        line = None
        if printed is not None and claimed_term == term:
            line = ClaimedLine(
                estimator=ESTIMATORS.get(claimed.get("estimator"), claimed.get("estimator")),
                estimate=str(printed),
                std_error=claimed.get("std_error"),
            )
        lines = []
        for row in findings.get("estimates") or []:
            if row.get("term") != term:
                continue
            info = estimators.get(row.get("estimator"), {})
            estimate = row.get("estimate")
            lines.append(
                EstimateLine(
                    code=row.get("estimator", ""),
                    name=info.get("name") or ESTIMATORS.get(row.get("estimator"), row.get("estimator", "")),
                    description=info.get("description", ""),
                    naive=row.get("estimator") in NAIVE_ESTIMATORS,
                    estimate=estimate,
                    std_error=row.get("std_error"),
                    ci_low=row.get("ci_low"),
                    ci_high=row.get("ci_high"),
                    p_value=row.get("p_value"),
                    minus_claimed=estimate - float(printed) if line is not None and estimate is not None else None,
                )
            )
        tables.append(EstimateTable(term=term, outcome=str(findings.get("outcome", "")), claimed=line, lines=lines))
    return tables


def results_body(findings: dict[str, Any]) -> dict[str, Any]:
    """Everything ``_results_body.html`` needs besides the findings: tables, figure panels and their words, groups.

    The refit page and a session link's results page show the same body, so
    both take their template values from here.
    """
    estimate_panels = figures.estimate_panels(findings)
    first_stage_panels = figures.first_stage_panels(findings)
    return {
        "estimate_tables": estimate_tables(findings),
        "estimate_panels": estimate_panels,
        "estimate_alt": figures.describe_panels(estimate_panels),
        "first_stage_panels": first_stage_panels,
        "first_stage_alt": figures.describe_panels(first_stage_panels),
        "diagnostic_groups": group_diagnostics(findings.get("diagnostics") or {}),
    }


@dataclass(frozen=True)
class DiagnosticGroup:
    """Diagnostics that answer one question, with that question's plain meaning."""

    id: str
    title: str
    meaning: str
    results: list[tuple[str, dict[str, Any]]]


def group_diagnostics(diagnostics: dict[str, Any]) -> list[DiagnosticGroup]:
    """The diagnostics of a refit in the groups of :data:`DIAGNOSTIC_GROUPS`, then the rest.

    A key holding a list (one result per focal regressor, as the first stage)
    contributes one entry per element.
    """
    groups = []
    placed: set[str] = set()
    for group_id, title, keys, meaning in DIAGNOSTIC_GROUPS:
        results = [entry for key in keys if key in diagnostics for entry in _entries(key, diagnostics[key])]
        placed.update(keys)
        if results:
            groups.append(DiagnosticGroup(id=group_id, title=title, meaning=meaning, results=results))
    rest = [entry for key, value in diagnostics.items() if key not in placed for entry in _entries(key, value)]
    if rest:
        groups.append(DiagnosticGroup(id="other", title=OTHER_DIAGNOSTICS[0], meaning=OTHER_DIAGNOSTICS[1], results=rest))
    return groups


@dataclass(frozen=True)
class DetailLine:
    """One extra field of a diagnostic result, labelled in words and written like the rest of the page."""

    label: str
    value: str


@dataclass(frozen=True)
class CoefficientTable:
    """A table of coefficients that a diagnostic result carries (first stage, reduced form, selection equation)."""

    caption: str
    rows: list[dict[str, Any]]


@dataclass(frozen=True)
class ResultDetails:
    """A result's extra fields sorted by how they are shown: numbers, text, coefficient tables, confidence sets."""

    numbers: list[DetailLine]
    text: list[DetailLine]
    coefficients: list[CoefficientTable]
    sets: list[DetailLine]


def details(key: str, result: dict[str, Any]) -> ResultDetails:
    """The extra fields of the result stored under diagnostic ``key``, each with its label and written value.

    Labels come from :data:`~app.web.labels.DETAIL_FIELDS` (or, where a field
    means something particular to one diagnostic,
    :data:`~app.web.labels.DETAIL_FIELDS_BY_DIAGNOSTIC`); a field not listed
    there shows its own name in words.
    """
    shown = ResultDetails(numbers=[], text=[], coefficients=[], sets=[])
    for field, value in result.items():
        if field in RESULT_FIELDS or value is None:
            continue
        label, style = detail_label(key, field)
        if field == "confidence_set":
            level = formatting.as_number(result.get("confidence_level")) or CONFIDENCE_LEVEL
            shown.sets.append(DetailLine(f"{_percent(level)} confidence set", formatting.confidence_set(value)))
        elif isinstance(value, bool):
            shown.text.append(DetailLine(label, "yes" if value else "no"))
        elif isinstance(value, (int, float)):
            shown.numbers.append(DetailLine(label, _written(value, style)))
        elif isinstance(value, str):
            shown.text.append(DetailLine(label, DETAIL_VALUES.get(field, {}).get(value, value)))
        elif isinstance(value, list) and value and all(isinstance(row, dict) and "term" in row for row in value):
            shown.coefficients.append(CoefficientTable(caption=label, rows=value))
    return shown


def detail_label(key: str, field: str) -> tuple[str, str]:
    """The label of ``field`` in a result of diagnostic ``key`` and how its value is written."""
    found = DETAIL_FIELDS_BY_DIAGNOSTIC.get((key, field)) or DETAIL_FIELDS.get(field)
    return found if found is not None else (field.replace("_", " ").capitalize(), "number")


def _written(value: float, style: str) -> str:
    if style == "count":
        return formatting.count(value)
    if style == "percent":
        return _percent(value)
    if style == "setting":
        return formatting.setting(value)
    if style == "p_value":
        return formatting.p_value_cell(value)
    if style == "plain":
        return str(value)
    if isinstance(value, int):
        return formatting.count(value)
    return formatting.number(value)


def _percent(share: float) -> str:
    """A share as a percentage: 0.05 is ``5%``, 0.975 is ``97.5%``."""
    return f"{100 * share:.4g}%"


def _entries(key: str, value: Any) -> list[tuple[str, dict[str, Any]]]:
    if isinstance(value, dict):
        return [(key, value)]
    if isinstance(value, list):
        return [(key, item) for item in value if isinstance(item, dict)]
    return []
