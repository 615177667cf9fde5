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


def test_details_label_extra_fields_in_words_and_write_them_like_the_page() -> None:
    shown = presenters.details(
        "effective_f",
        {
            "name": "Effective F",
            "statistic": 3.0,
            "confidence_set": [[None, 1.0]],
            "confidence_level": 0.9,
            "shea_partial_r2": 0.15234,
            "n_instruments": 3,
            "significance": 0.05,
            "seed": 20240611,
            "shape": "unbounded",
            "variance": "cluster",
            "robust": True,
            "coefficients": [{"term": "z", "estimate": 0.4}],
            "missing": None,
        },
    )

    line = presenters.DetailLine
    assert shown.numbers == [
        line("Confidence level", "90%"),
        line("Shea partial R²", "0.1523"),
        line("Instruments", "3"),
        line("Significance level", "5%"),
        line("Random seed", "20240611"),
    ]
    assert shown.sets == [line("90% confidence set", "[-inf, 1.000]")]
    assert shown.text == [line("Shape of the set", "unbounded"), line("Variance estimator", "Cluster-robust"), line("Robust", "yes")]
    assert shown.coefficients == [presenters.CoefficientTable("Coefficients", [{"term": "z", "estimate": 0.4}])]


def test_a_field_that_means_something_particular_to_one_diagnostic_gets_its_own_label() -> None:
    assert presenters.detail_label("variance_components", "rho")[0] == "Share of the error variance from unit effects (ρ)"
    assert presenters.detail_label("selection", "rho")[0] == "Correlation ρ of the selection and outcome errors"
    assert presenters.detail_label("first_stage", "coefficients")[0] == "First-stage coefficients"


def test_a_field_without_a_label_shows_its_name_in_words() -> None:
    assert presenters.detail_label("something_new", "new_ratio") == ("New ratio", "number")
