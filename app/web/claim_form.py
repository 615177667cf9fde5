"""The claim form: HTML form fields to the claim spec's structured fields, and back.

Each dataset column gets one main role (a select) and optional further roles
(checkboxes); filters are (column, operator, value) rows; the manuscript's
numbers are kept as the text typed. Field names use the column's position in
the dataset, never its name, so any column name (spaces, markup) is safe. No
text is ever evaluated: values are parsed as numbers where the column holds
numbers, and kept as text otherwise.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

from app.services.errors import Problem
from app.services.views import ColumnChoice
from app.spec import BootstrapOptions, ClaimSpec, FilterOp, SensitivityOptions

SINGLE_ROLES = {
    "outcome": "outcome",
    "mediator": "mediator",
    "weights": "weights",
    "unit": "unit",
    "time": "time",
    "selected": "selected",
}
"""Main roles that take one column, and their spec field."""

LIST_ROLES = {
    "endogenous": "endogenous",
    "instrument": "instruments",
    "control": "controls",
    "treatment": "treatment",
}
"""Main roles that take several columns, and their spec field (categorical is handled apart)."""

FLAG_FIELDS = {
    "fixed_effect": "fixed_effects",
    "cluster": "cluster",
    "benchmark": "benchmarks",
    "pre_treatment": "pre_treatment",
    "selection_covariate": "selection_covariates",
}
"""Further roles (checkboxes) and their spec field."""

CLAIMED_FIELDS = ("estimator", "term", "estimate", "std_error", "n_obs", "first_stage_f")

ADVANCED_FIELDS = {
    "direct_effect_bound": ("direct_effect_bound", float),
    "bootstrap-replications": ("bootstrap.replications", int),
    "bootstrap-seed": ("bootstrap.seed", int),
    "sensitivity-q": ("sensitivity.q", float),
    "sensitivity-alpha": ("sensitivity.alpha", float),
    "sensitivity-delta": ("sensitivity.delta", float),
    "sensitivity-r2_max_factor": ("sensitivity.r2_max_factor", float),
    "sensitivity-r2_max": ("sensitivity.r2_max", float),
}
"""Single-number advanced fields: form name to (dotted spec field, type)."""

NUMERIC_KINDS = ("numeric", "binary", "integer")
MIN_FILTER_ROWS = 3


@dataclass(frozen=True)
class FilterRow:
    """One row filter as typed."""

    column: str = ""
    op: str = "=="
    value: str = ""


@dataclass(frozen=True)
class ClaimForm:
    """Everything the claim form shows, as text; built from a spec or from a submission."""

    title: str = ""
    design: str = "iv"
    covariance: str = "robust"
    intercept: bool = True
    roles: dict[str, str] = field(default_factory=dict)
    flags: dict[str, frozenset[str]] = field(default_factory=dict)
    filters: tuple[FilterRow, ...] = ()
    claimed: dict[str, str] = field(default_factory=dict)
    advanced: dict[str, str] = field(default_factory=dict)
    multipliers: str = ""
    instrument_subsets: str = ""
    references: str = ""
    change_note: str = ""
    order: tuple[str, ...] = ()
    """Columns in the order the stored claim lists them, so a revision keeps that order."""

    @property
    def filter_rows(self) -> tuple[FilterRow, ...]:
        """The filters plus empty rows to fill in (at least three rows, always one empty)."""
        blanks = max(MIN_FILTER_ROWS - len(self.filters), 1)
        return self.filters + tuple(FilterRow() for _ in range(blanks))

    @classmethod
    def blank(cls) -> ClaimForm:
        """A new claim: no roles yet, the spec's defaults for the advanced settings."""
        return cls.from_spec({"outcome": ""}, validated=False)

    @classmethod
    def from_spec(cls, spec: Mapping[str, Any], *, validated: bool = True) -> ClaimForm:
        """The form showing a stored claim (for a new version of it)."""
        data = ClaimSpec.model_validate(spec).model_dump(mode="json") if validated else dict(spec)
        roles: dict[str, str] = {}
        flags: dict[str, set[str]] = {}
        for role, spec_field in SINGLE_ROLES.items():
            if data.get(spec_field):
                roles[data[spec_field]] = role
        for role, spec_field in LIST_ROLES.items():
            for column in data.get(spec_field) or []:
                roles[column] = role
        references = []
        for item in data.get("categorical") or []:
            roles[item["column"]] = "categorical"
            if item.get("reference") is not None:
                references.append(f"{item['column']} = {item['reference']}")
        for flag, spec_field in FLAG_FIELDS.items():
            for column in data.get(spec_field) or []:
                flags.setdefault(column, set()).add(flag)
        bootstrap = data.get("bootstrap") or BootstrapOptions().model_dump()
        sensitivity = data.get("sensitivity") or SensitivityOptions().model_dump()
        nested = {"bootstrap": bootstrap, "sensitivity": sensitivity}
        advanced = {}
        for name, (dotted, _kind) in ADVANCED_FIELDS.items():
            parent, _, child = dotted.partition(".")
            value = nested[parent].get(child) if child else data.get(parent)
            advanced[name] = "" if value is None else str(value)
        claimed = data.get("claimed") or {}
        listed = [data.get(spec_field) for spec_field in SINGLE_ROLES.values()]
        for spec_field in (*LIST_ROLES.values(), *FLAG_FIELDS.values()):
            listed.extend(data.get(spec_field) or [])
        listed.extend(item["column"] for item in data.get("categorical") or [])
        return cls(
            title=data.get("title") or "",
            design=data.get("design") or "iv",
            covariance=data.get("covariance") or "robust",
            intercept=data.get("intercept", True),
            roles=roles,
            flags={column: frozenset(values) for column, values in flags.items()},
            filters=tuple(
                FilterRow(column=item["column"], op=item["op"], value=_value_text(item["value"]))
                for item in data.get("filters") or []
            ),
            claimed={name: "" if claimed.get(name) is None else str(claimed[name]) for name in CLAIMED_FIELDS},
            advanced=advanced,
            multipliers=", ".join(str(value) for value in sensitivity.get("multipliers") or []),
            instrument_subsets="\n".join(", ".join(subset) for subset in data.get("instrument_subsets") or []),
            references="\n".join(references),
            order=tuple(dict.fromkeys(column for column in listed if column)),
        )

    @classmethod
    def from_submission(cls, form: Mapping[str, Any], columns: Sequence[ColumnChoice]) -> ClaimForm:
        """The form as the reviewer submitted it (``form`` maps names to a value or a list of values)."""
        roles = {}
        flags = {}
        for position, column in enumerate(columns):
            role = _first(form, f"role-{position}")
            if role:
                roles[column.name] = role
            chosen = frozenset(value for value in _all(form, f"flag-{position}") if value in FLAG_FIELDS)
            if chosen:
                flags[column.name] = chosen
        filters = []
        position = 0
        while f"filter-column-{position}" in form:
            row = FilterRow(
                column=_first(form, f"filter-column-{position}"),
                op=_first(form, f"filter-op-{position}") or "==",
                value=_first(form, f"filter-value-{position}"),
            )
            if row.column:
                filters.append(row)
            position += 1
        names = [column.name for column in columns]
        order = [
            names[int(position)] for position in _all(form, "order") if position.isdigit() and int(position) < len(names)
        ]
        return cls(
            title=_first(form, "title").strip(),
            design=_first(form, "design") or "iv",
            covariance=_first(form, "covariance") or "robust",
            intercept=bool(_first(form, "intercept")),
            roles=roles,
            flags=flags,
            filters=tuple(filters),
            claimed={name: _first(form, f"claimed-{name}").strip() for name in CLAIMED_FIELDS},
            advanced={name: _first(form, name).strip() for name in ADVANCED_FIELDS},
            multipliers=_first(form, "sensitivity-multipliers").strip(),
            instrument_subsets=_first(form, "instrument_subsets"),
            references=_first(form, "references"),
            change_note=_first(form, "change_note").strip(),
            order=tuple(order),
        )

    def to_spec(self, columns: Sequence[ColumnChoice]) -> tuple[dict[str, Any], list[Problem]]:
        """The claim spec these fields describe, and the problems only the form can see.

        The spec is validated afterwards by the claims service; the problems
        here are the ones a spec cannot express (two outcomes chosen, a filter
        value that is not a number for a numeric column...).
        """
        kinds = {column.name: column.kind for column in columns}
        problems: list[Problem] = []
        spec: dict[str, Any] = {
            "design": self.design,
            "covariance": self.covariance,
            "intercept": self.intercept,
        }
        if self.title:
            spec["title"] = self.title
        ordered = self._ordered([column.name for column in columns])
        for role, spec_field in SINGLE_ROLES.items():
            chosen = [column for column in ordered if self.roles[column] == role]
            if len(chosen) > 1:
                problems.append(
                    Problem(spec_field, f"{spec_field}: choose one column as {role}, not {len(chosen)} ({', '.join(chosen)})")
                )
            if chosen:
                spec[spec_field] = chosen[0]
        for role, spec_field in LIST_ROLES.items():
            spec[spec_field] = [column for column in ordered if self.roles[column] == role]
        references = self._references(kinds, problems)
        spec["categorical"] = [
            {"column": column, "reference": references.get(column)}
            for column in ordered
            if self.roles[column] == "categorical"
        ]
        for flag, spec_field in FLAG_FIELDS.items():
            spec[spec_field] = [
                column for column in self._ordered([c.name for c in columns], flagged=True) if flag in self.flags.get(column, ())
            ]
        spec["filters"] = [self._filter(row, kinds, problems) for row in self.filters]
        claimed = {name: value for name, value in self.claimed.items() if value}
        if claimed:
            if "n_obs" in claimed:
                claimed["n_obs"] = _parse(claimed["n_obs"], int, field="claimed.n_obs", problems=problems)
            spec["claimed"] = claimed
        for name, (dotted, kind) in ADVANCED_FIELDS.items():
            text = self.advanced.get(name, "")
            if text:
                _set_dotted(spec, dotted, _parse(text, kind, field=dotted, problems=problems))
        if self.multipliers:
            parts = [part.strip() for part in self.multipliers.split(",") if part.strip()]
            _set_dotted(
                spec,
                "sensitivity.multipliers",
                [_parse(part, float, field="sensitivity.multipliers", problems=problems) for part in parts],
            )
        subsets = [
            [name.strip() for name in line.split(",") if name.strip()]
            for line in self.instrument_subsets.splitlines()
        ]
        spec["instrument_subsets"] = [subset for subset in subsets if subset]
        return spec, problems

    def order_positions(self, columns: Sequence[ColumnChoice]) -> list[int]:
        """Positions of :attr:`order` in the dataset's columns, for the form's hidden ``order`` fields."""
        positions = {column.name: position for position, column in enumerate(columns)}
        return [positions[name] for name in self.order if name in positions]

    def _ordered(self, names: list[str], *, flagged: bool = False) -> list[str]:
        """Columns with a role (or a further role), in the stored claim's order, then in dataset order."""
        chosen = [name for name in names if (name in self.flags if flagged else name in self.roles)]
        rank = {name: position for position, name in enumerate(self.order)}
        return sorted(chosen, key=lambda name: (rank.get(name, len(rank)), names.index(name)))

    def _references(self, kinds: Mapping[str, str], problems: list[Problem]) -> dict[str, Any]:
        references: dict[str, Any] = {}
        for line in self.references.splitlines():
            if not line.strip():
                continue
            column, separator, level = line.partition("=")
            if not separator or not column.strip() or not level.strip():
                problems.append(
                    Problem("categorical", f"categorical reference '{line.strip()}': write it as column = level")
                )
                continue
            if self.roles.get(column.strip()) != "categorical":
                problems.append(
                    Problem("categorical", f"categorical reference: '{column.strip()}' is not a categorical control")
                )
                continue
            name = column.strip()
            numeric = kinds.get(name) in NUMERIC_KINDS
            references[name] = (
                _parse(level.strip(), _number, field="categorical", problems=problems) if numeric else level.strip()
            )
        return references

    def _filter(self, row: FilterRow, kinds: Mapping[str, str], problems: list[Problem]) -> dict[str, Any]:
        if kinds.get(row.column) not in NUMERIC_KINDS:
            value: Any = row.value.strip()
            if row.op == FilterOp.IN.value:
                value = [part.strip() for part in row.value.split(",") if part.strip()]
            return {"column": row.column, "op": row.op, "value": value}

        def number(text: str) -> Any:
            return _parse(text, _number, field="filters", problems=problems, what=f"filter on {row.column}")

        if row.op == FilterOp.IN.value:
            value = [number(part.strip()) for part in row.value.split(",") if part.strip()]
        else:
            value = number(row.value.strip())
        return {"column": row.column, "op": row.op, "value": value}


def _number(text: str) -> int | float:
    """An int when the text is a whole number, otherwise a float."""
    try:
        return int(text)
    except ValueError:
        return float(text)


def _parse(text: str, kind: Any, *, field: str, problems: list[Problem], what: str | None = None) -> Any:
    """``kind(text)``, or the text itself with a problem recorded when it is not a finite number."""
    try:
        value = kind(text)
    except (TypeError, ValueError):
        value = None
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        kind_words = "a whole number" if kind is int else "a number"
        problems.append(Problem(field, f"{what or field}: '{text}' is not {kind_words}"))
        return text
    return value


def _set_dotted(spec: dict[str, Any], dotted: str, value: Any) -> None:
    parent, _, child = dotted.partition(".")
    if child:
        spec.setdefault(parent, {})[child] = value
    else:
        spec[parent] = value


def _first(form: Mapping[str, Any], name: str) -> str:
    value = form.get(name, "")
    if isinstance(value, list):
        value = value[0] if value else ""
    return value if isinstance(value, str) else ""


def _all(form: Mapping[str, Any], name: str) -> list[str]:
    value = form.get(name, [])
    values = value if isinstance(value, list) else [value]
    return [item for item in values if isinstance(item, str)]


def _value_text(value: Any) -> str:
    if isinstance(value, list):
        return ", ".join(str(item) for item in value)
    return str(value)
