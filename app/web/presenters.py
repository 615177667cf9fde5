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
    NESTED_FIELDS,
    NESTED_FIELDS_BY_DIAGNOSTIC,
    OTHER_DIAGNOSTICS,
    RECORD_FIELDS,
    RECORD_FIELDS_BY_PARENT,
    RECORD_VALUES,
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
        title, meaning = OTHER_DIAGNOSTICS
        groups.append(DiagnosticGroup(id="other", title=title, meaning=meaning, results=rest))
    return groups


INDEXED_BY = {"difference": "terms", "disturbance_covariance": "equations"}
"""Fields whose values stand beside the names listed in another field: one row per name."""

COEFFICIENT_ROW_RESTATES = frozenset({"estimator"})
"""Fields of a coefficient row not shown: the fit they name is the table's caption."""

WIDE_TABLE_COLUMNS = 4
"""A table with more columns than this spans the row of diagnostic cards."""

GRID_KEYS = ("r2dz_x", "r2yz_dx", "adjusted_estimate", "adjusted_t", "critical_t")
"""What the omitted-cause grid holds (``contour_grid`` in app/estimation/sensitivity.py); the table shows each."""

GRID_STEP = 5
"""The omitted-cause grid is shown at every fifth point (and its last) of each axis: 6 by 6 of the 26 by 26."""


@dataclass(frozen=True)
class DetailLine:
    """One extra field of a diagnostic result, labelled in words and written like the rest of the page."""

    label: str
    value: str
    field: str


@dataclass(frozen=True)
class DetailTable:
    """A list or record a diagnostic result holds, as a small table; the first cell of a row names it.

    ``field`` is the result's field it shows and ``keys`` the fields of its
    records that stand in it, so that a test can tell what the page leaves out.
    """

    field: str
    caption: str
    columns: list[str]
    rows: list[list[str]]
    keys: tuple[str, ...] = ()
    note: str = ""

    @property
    def wide(self) -> bool:
        """Whether the table needs the page's full width rather than one card's."""
        return len(self.columns) > WIDE_TABLE_COLUMNS


@dataclass(frozen=True)
class ResultDetails:
    """A result's extra fields sorted by how they are shown.

    Numbers, text, lists of names or notes, confidence sets, coefficient tables
    and the other nested lists and records as tables.
    """

    numbers: list[DetailLine]
    text: list[DetailLine]
    coefficients: list[DetailTable]
    sets: list[DetailLine]
    lists: list[DetailLine]
    tables: list[DetailTable]

    @property
    def wide(self) -> bool:
        """Whether a table of the result needs the page's full width."""
        return any(table.wide for table in [*self.coefficients, *self.tables])

    def fields(self) -> set[str]:
        """The result's fields that something shown comes from."""
        parts = [*self.numbers, *self.text, *self.coefficients, *self.sets, *self.lists, *self.tables]
        indexes = {INDEXED_BY[table.field] for table in self.tables if table.field in INDEXED_BY}
        return {part.field for part in parts} | indexes


def details(key: str, result: dict[str, Any]) -> ResultDetails:
    """The extra fields of the result stored under diagnostic ``key``, each with its label and written value.

    Labels come from :data:`~app.web.labels.DETAIL_FIELDS` (or, where a field
    means something particular to one diagnostic,
    :data:`~app.web.labels.DETAIL_FIELDS_BY_DIAGNOSTIC`) and, for lists and
    records, :data:`NESTED_FIELDS`; a field not listed there shows its own name
    in words. Every field that is not null is shown somewhere.
    """
    shown = ResultDetails(numbers=[], text=[], coefficients=[], sets=[], lists=[], tables=[])
    index_fields = {INDEXED_BY[field] for field in result if field in INDEXED_BY}
    for field, value in result.items():
        if field in RESULT_FIELDS or field in index_fields or value is None:
            continue
        label, style = detail_label(key, field)
        if field == "confidence_set":
            level = formatting.as_number(result.get("confidence_level")) or CONFIDENCE_LEVEL
            shown.sets.append(DetailLine(f"{_percent(level)} confidence set", formatting.confidence_set(value), field))
        elif isinstance(value, bool):
            shown.text.append(DetailLine(label, _yes_no(value), field))
        elif isinstance(value, (int, float)):
            shown.numbers.append(DetailLine(label, _written(value, style), field))
        elif isinstance(value, str):
            shown.text.append(DetailLine(label, DETAIL_VALUES.get(field, {}).get(value, value), field))
        elif not value:
            shown.lists.append(DetailLine(label, "none", field))
        elif field in INDEXED_BY:
            shown.tables.append(_indexed_table(field, label, value, names=result.get(INDEXED_BY[field]) or []))
        elif style == "grid" and isinstance(value, dict):
            shown.tables.append(_grid_table(field, label, value, alpha=result.get("alpha")))
        elif isinstance(value, dict):
            shown.tables.append(_record_table(field, label, value))
        elif all(isinstance(row, dict) and "term" in row for row in value):
            shown.coefficients.append(_coefficient_table(field, label, value))
        elif all(isinstance(row, dict) for row in value):
            shown.tables.extend(_records_tables(field, label, value))
        else:
            shown.lists.append(DetailLine(label, _cell(value, style), field))
    return shown


def detail_label(key: str, field: str) -> tuple[str, str]:
    """The label of ``field`` in a result of diagnostic ``key`` and how its value is written."""
    found = (
        DETAIL_FIELDS_BY_DIAGNOSTIC.get((key, field))
        or NESTED_FIELDS_BY_DIAGNOSTIC.get((key, field))
        or DETAIL_FIELDS.get(field)
        or NESTED_FIELDS.get(field)
    )
    return found if found is not None else (_in_words(field), "number")


def record_label(parent: str, key: str) -> tuple[str, str]:
    """The label of ``key`` inside a list or record held in field ``parent``, and how its value is written."""
    found = RECORD_FIELDS_BY_PARENT.get((parent, key)) or RECORD_FIELDS.get(key)
    return found if found is not None else (_in_words(key), "number")


def _coefficient_table(field: str, caption: str, rows: list[dict[str, Any]]) -> DetailTable:
    """Coefficients with their interval and test statistic, written as ``t(2388) = 18.06``."""
    level = _percent(CONFIDENCE_LEVEL)
    return DetailTable(
        field=field,
        caption=caption,
        columns=["Term", "Estimate", "Std. error", f"{level} interval", "Test statistic", "p-value"],
        rows=[
            [
                str(row["term"]),
                formatting.number(row.get("estimate")),
                formatting.number(row.get("std_error")),
                _coefficient_interval(row.get("ci_low"), row.get("ci_high")),
                _statistic(row),
                formatting.p_value_cell(row.get("p_value")),
            ]
            for row in rows
        ],
        keys=("term", "estimate", "std_error", "ci_low", "ci_high", "statistic", "distribution", "df", "p_value"),
    )


def _coefficient_interval(low: object, high: object) -> str:
    """A coefficient's interval; ``n/a`` when an end is missing (a Wald interval is never unbounded)."""
    if formatting.as_number(low) is None or formatting.as_number(high) is None:
        return formatting.MISSING
    return formatting.interval(low, high)


def _statistic(row: dict[str, Any]) -> str:
    if formatting.as_number(row.get("statistic")) is None:
        return formatting.MISSING
    return formatting.statistic(row["statistic"], distribution=row.get("distribution"), df=row.get("df"))


def _records_tables(
    field: str, caption: str, records: list[dict[str, Any]], *, parent: str | None = None
) -> list[DetailTable]:
    """A list of records as one table, a row each; a list of records inside a row becomes a table of its own.

    The tables inside rows follow the main one, captioned with the row they
    belong to (the Stock-Yogo values of each criterion, the intervals of each
    focal regressor as the direct effect grows). ``field`` is the result's
    field shown; ``parent`` the field holding the records, whose labels apply.
    """
    parent = parent or field
    columns = _keys(records, nested=False)
    nested = _keys(records, nested=True)
    main = DetailTable(
        field=field,
        caption=caption,
        columns=[record_label(parent, column)[0] for column in columns],
        rows=[[_record_cell(parent, column, record.get(column)) for column in columns] for record in records],
        keys=tuple(columns + nested),
    )
    tables = [main]
    for record, row in zip(records, main.rows):
        for inner in nested:
            rows = record.get(inner)
            if rows:
                label = record_label(parent, inner)[0]
                tables.extend(_records_tables(field, f"{label}: {row[0]}", rows, parent=inner))
    return tables


def _keys(records: list[dict[str, Any]], *, nested: bool) -> list[str]:
    """Keys that are not null in some record, in order of first appearance: lists of records or the rest."""
    keys: list[str] = []
    for record in records:
        for key, value in record.items():
            holds_records = isinstance(value, list) and bool(value) and all(isinstance(item, dict) for item in value)
            if value is not None and holds_records == nested and key not in keys:
                keys.append(key)
    return keys


def _record_table(field: str, caption: str, record: dict[str, Any]) -> DetailTable:
    """One record (a bootstrap test, θ across units, the mediator's estimates) as label and value rows."""
    shown = [key for key, value in record.items() if value is not None]
    return DetailTable(
        field=field,
        caption=caption,
        columns=[],
        rows=[[record_label(field, key)[0], _record_cell(field, key, record[key])] for key in shown],
        keys=tuple(shown),
    )


def _indexed_table(field: str, caption: str, values: list[Any], *, names: list[Any]) -> DetailTable:
    """Values beside the names they belong to: a vector one per row, a matrix with the names as headings too."""
    matrix = all(isinstance(row, list) for row in values)
    rows = [
        [str(name), *([_cell(cell, "number") for cell in row] if matrix else [_cell(row, "number")])]
        for name, row in zip(names, values)
    ]
    columns = ["", *map(str, names)] if matrix else []
    return DetailTable(field=field, caption=caption, columns=columns, rows=rows, keys=(INDEXED_BY[field],))


def _grid_table(field: str, caption: str, grid: dict[str, Any], *, alpha: object) -> DetailTable:
    """The adjusted estimate (and its t) for omitted causes of given strengths, at every :data:`GRID_STEP`-th point.

    ``adjusted_estimate[i][j]`` is at ``r2dz_x[i]`` (columns here) and
    ``r2yz_dx[j]`` (rows); Cinelli & Hazlett (2020), sec. 4.1, draw the same
    grid as contours.
    """
    focal, outcome = grid.get("r2dz_x") or [], grid.get("r2yz_dx") or []
    estimates, t_values = grid.get("adjusted_estimate") or [], grid.get("adjusted_t") or []
    across, down = _thinned(len(focal)), _thinned(len(outcome))
    rows = [
        [
            formatting.number(outcome[j]),
            *(f"{formatting.number(estimates[i][j])} (t {formatting.number(t_values[i][j])})" for i in across),
        ]
        for j in down
    ]
    share = formatting.as_number(alpha)
    level = f" at the {_percent(share)} level" if share is not None else ""
    note = (
        "Rows: the omitted cause's partial R² with the outcome; columns: with the focal regressor. Each cell is the "
        "estimate adjusted for such a cause, with its t statistic; the adjusted estimate stays significant"
        f"{level} while |t| exceeds {formatting.number(grid.get('critical_t'))}."
    )
    heading = "R² with the outcome ↓, with the focal regressor →"
    return DetailTable(
        field=field,
        caption=caption,
        columns=[heading, *(formatting.number(focal[i]) for i in across)],
        rows=rows,
        keys=GRID_KEYS,
        note=note,
    )


def _thinned(points: int) -> list[int]:
    return sorted({*range(0, points, GRID_STEP), points - 1}) if points else []


def _record_cell(parent: str, key: str, value: Any) -> str:
    label, style = record_label(parent, key)
    if isinstance(value, str):
        return RECORD_VALUES.get(key, {}).get(value, value)
    return _cell(value, style)


def _cell(value: Any, style: str) -> str:
    """A value in a table cell or a list line, written as the rest of the page writes it."""
    if value is None:
        return formatting.MISSING
    if isinstance(value, bool):
        return _yes_no(value)
    if isinstance(value, (int, float)):
        return _written(value, style)
    if isinstance(value, list):
        if style == "interval" and len(value) == 2:
            return formatting.interval(value[0], value[1])
        if style == "df":
            return formatting.degrees_of_freedom(value)
        separator = "; " if style == "text" else ", "
        return separator.join(_cell(item, style) for item in value)
    return str(value)


def _yes_no(value: bool) -> str:
    return "yes" if value else "no"


def _in_words(field: str) -> str:
    return field.replace("_", " ").capitalize()


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
