"""Arranging findings for the results page: comparison tables and diagnostics grouped by question."""

from __future__ import annotations

from app.web import presenters


def test_the_table_puts_the_printed_numbers_beside_every_estimator() -> None:
    findings = {
        "focal": ["school"],
        "outcome": "wage",
        "estimators": [{"code": "ols", "name": "OLS", "description": "naive"}, {"code": "2sls", "name": "2SLS", "description": "iv"}],
        "estimates": [
            {"estimator": "ols", "term": "school", "estimate": 0.12, "std_error": 0.01, "ci_low": 0.1, "ci_high": 0.14, "p_value": 0.0},
            {"estimator": "ols", "term": "age", "estimate": 0.3},
            {"estimator": "2sls", "term": "school", "estimate": 0.085, "std_error": 0.02, "ci_low": None, "ci_high": None, "p_value": None},
        ],
        "claim": {"claimed": {"estimator": "2sls", "term": None, "estimate": "0.090", "std_error": "0.012"}},
    }

    (table,) = presenters.estimate_tables(findings)

    assert (table.term, table.outcome) == ("school", "wage")
    assert table.claimed == presenters.ClaimedLine(estimator="2SLS", estimate="0.090", std_error="0.012")
    assert [line.code for line in table.lines] == ["ols", "2sls"]
    assert [line.naive for line in table.lines] == [True, False]
    assert table.lines[0].minus_claimed == 0.12 - 0.09
    assert table.lines[1].minus_claimed == 0.085 - 0.09


def test_without_printed_numbers_there_is_no_manuscript_line() -> None:
    findings = {"focal": ["x"], "estimates": [{"estimator": "ols", "term": "x", "estimate": 1.0}], "claim": {"claimed": None}}
    (table,) = presenters.estimate_tables(findings)
    assert table.claimed is None and table.lines[0].minus_claimed is None


def test_diagnostics_are_grouped_by_the_question_they_answer() -> None:
    diagnostics = {
        "hansen_j": {"name": "Hansen J"},
        "first_stage": [{"name": "First stage for a"}, {"name": "First stage for b"}],
        "mundlak": {"name": "Mundlak"},
        "something_new": {"name": "A new test"},
        "ignored": "not a result",
    }

    groups = presenters.group_diagnostics(diagnostics)

    assert [(group.id, [key for key, _ in group.results]) for group in groups] == [
        ("strength", ["first_stage", "first_stage"]),
        ("overid", ["hansen_j"]),
        ("panel", ["mundlak"]),
        ("other", ["something_new"]),
    ]
    assert all(group.meaning for group in groups)


def test_details_sort_extra_fields_by_how_they_are_shown() -> None:
    shown = presenters.details(
        {
            "name": "Anderson-Rubin",
            "statistic": 3.0,
            "confidence_set": [[None, 1.0]],
            "partial_r2": 0.15,
            "df_within": 12,
            "shape": "unbounded",
            "robust": True,
            "coefficients": [{"term": "z", "estimate": 0.4}],
            "missing": None,
        }
    )
    assert shown == {
        "numbers": [("partial_r2", 0.15), ("df_within", 12)],
        "text": [("shape", "unbounded"), ("robust", "yes")],
        "coefficients": [("coefficients", [{"term": "z", "estimate": 0.4}])],
        "sets": [("confidence_set", [[None, 1.0]])],
    }
