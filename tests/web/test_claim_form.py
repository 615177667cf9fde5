"""The claim form maps fields to the spec's structured roles and back, and never evaluates text."""

from __future__ import annotations

from typing import Any

import pytest

from app.services.views import ColumnChoice
from app.spec import ClaimSpec, parse_claim
from app.web.claim_form import ClaimForm

COLUMNS = [
    ColumnChoice(name=name, kind=kind, n_missing=0, n_distinct=10)
    for name, kind in [
        ("wage", "numeric"),
        ("school", "integer"),
        ("distance", "numeric"),
        ("siblings", "integer"),
        ("age", "integer"),
        ("region", "text"),
        ("firm", "integer"),
        ("cohort", "integer"),
    ]
]


def submission(form: ClaimForm) -> dict[str, Any]:
    """What a browser submits for a form showing ``form``."""
    fields: dict[str, Any] = {
        "title": form.title,
        "design": form.design,
        "covariance": form.covariance,
        "intercept": "1" if form.intercept else "",
        "sensitivity-multipliers": form.multipliers,
        "instrument_subsets": form.instrument_subsets,
        "references": form.references,
        "order": [str(position) for position in form.order_positions(COLUMNS)],
    }
    for position, column in enumerate(COLUMNS):
        fields[f"role-{position}"] = form.roles.get(column.name, "")
        fields[f"flag-{position}"] = sorted(form.flags.get(column.name, ()))
    for position, row in enumerate(form.filter_rows):
        fields.update({f"filter-column-{position}": row.column, f"filter-op-{position}": row.op, f"filter-value-{position}": row.value})
    fields.update({f"claimed-{name}": value for name, value in form.claimed.items()})
    fields.update(form.advanced)
    return fields


FULL_CLAIM: dict[str, Any] = {
    "title": "Schooling raises wages",
    "design": "iv",
    "outcome": "wage",
    "endogenous": ["school"],
    "instruments": ["siblings", "distance"],
    "controls": ["age"],
    "categorical": [{"column": "region", "reference": "north"}],
    "fixed_effects": ["firm"],
    "cluster": ["firm"],
    "covariance": "cluster",
    "filters": [{"column": "age", "op": ">=", "value": 25}, {"column": "region", "op": "in", "value": ["north", "south"]}],
    "claimed": {"estimator": "2sls", "term": "school", "estimate": "0.090", "std_error": "0.012", "n_obs": 3010},
    "benchmarks": ["age"],
    "instrument_subsets": [["siblings"], ["distance"]],
    "direct_effect_bound": 0.05,
    "bootstrap": {"replications": 999, "seed": 7},
    "sensitivity": {"q": 0.5, "multipliers": [1.0, 4.0]},
}


def test_a_claim_survives_the_round_trip_through_the_form() -> None:
    form = ClaimForm.from_spec(FULL_CLAIM)
    spec, problems = ClaimForm.from_submission(submission(form), COLUMNS).to_spec(COLUMNS)

    assert problems == []
    assert ClaimSpec.model_validate(spec) == parse_claim(FULL_CLAIM)


def test_list_roles_keep_the_stored_order() -> None:
    form = ClaimForm.from_spec(FULL_CLAIM)
    spec, _ = ClaimForm.from_submission(submission(form), COLUMNS).to_spec(COLUMNS)
    assert spec["instruments"] == ["siblings", "distance"]


def test_a_new_form_starts_without_roles_and_with_the_spec_defaults() -> None:
    form = ClaimForm.blank()
    assert form.roles == {} and form.filters == ()
    assert form.advanced["bootstrap-replications"] == "9999"
    assert len(form.filter_rows) == 3


def test_two_outcomes_are_a_problem_of_the_form() -> None:
    fields = {"role-0": "outcome", "role-1": "outcome", "design": "iv"}
    _, problems = ClaimForm.from_submission(fields, COLUMNS).to_spec(COLUMNS)
    assert [(problem.field, problem.message) for problem in problems] == [
        ("outcome", "outcome: choose one column as outcome, not 2 (wage, school)")
    ]


@pytest.mark.parametrize(
    ("fields", "field", "message"),
    [
        ({"filter-column-0": "age", "filter-op-0": ">", "filter-value-0": "thirty"}, "filters", "filter on age: 'thirty' is not a number"),
        ({"claimed-n_obs": "3,010"}, "claimed.n_obs", "'3,010' is not a whole number"),
        ({"bootstrap-replications": "lots"}, "bootstrap.replications", "'lots' is not a whole number"),
        ({"sensitivity-q": "nan"}, "sensitivity.q", "'nan' is not a number"),
        ({"references": "region"}, "categorical", "write it as column = level"),
    ],
)
def test_values_that_are_not_numbers_are_named(fields: dict[str, str], field: str, message: str) -> None:
    _, problems = ClaimForm.from_submission({"design": "iv", "role-5": "categorical", **fields}, COLUMNS).to_spec(COLUMNS)
    assert [problem.field for problem in problems] == [field]
    assert message in problems[0].message


def test_text_is_kept_as_text_and_never_evaluated() -> None:
    hostile = "__import__('os').system('rm -rf /')"
    fields = {"role-0": "outcome", "filter-column-0": "region", "filter-op-0": "==", "filter-value-0": hostile, "title": hostile}
    spec, problems = ClaimForm.from_submission(fields, COLUMNS).to_spec(COLUMNS)
    assert problems == []
    assert spec["filters"] == [{"column": "region", "op": "==", "value": hostile}]
    assert spec["title"] == hostile


def test_numbers_in_filters_on_numeric_columns_become_numbers() -> None:
    fields = {"filter-column-0": "age", "filter-op-0": "in", "filter-value-0": "25, 30.5 ,40"}
    spec, _ = ClaimForm.from_submission(fields, COLUMNS).to_spec(COLUMNS)
    assert spec["filters"] == [{"column": "age", "op": "in", "value": [25, 30.5, 40]}]


def test_unknown_flags_and_positions_are_ignored() -> None:
    fields = {"role-0": "outcome", "flag-0": ["cluster", "detonate"], "order": ["99", "x", "0"]}
    form = ClaimForm.from_submission(fields, COLUMNS)
    assert form.flags == {"wage": frozenset({"cluster"})}
    assert form.order == ("wage",)
