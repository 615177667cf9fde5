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
        line("Confidence level", "90%", "confidence_level"),
        line("Shea partial R²", "0.1523", "shea_partial_r2"),
        line("Instruments", "3", "n_instruments"),
        line("Significance level", "5%", "significance"),
        line("Random seed", "20240611", "seed"),
    ]
    assert shown.sets == [line("90% confidence set", "[-inf, 1.000]", "confidence_set")]
    assert shown.text == [
        line("Shape of the set", "unbounded", "shape"),
        line("Variance estimator", "Cluster-robust", "variance"),
        line("Robust", "yes", "robust"),
    ]
    (table,) = shown.coefficients
    assert (table.caption, table.rows) == ("Coefficients", [["z", "0.4000", "n/a", "n/a", "n/a", "n/a"]])
    assert "missing" not in shown.fields()


def test_a_field_that_means_something_particular_to_one_diagnostic_gets_its_own_label() -> None:
    assert presenters.detail_label("variance_components", "rho")[0] == "Share of the error variance from unit effects (ρ)"
    assert presenters.detail_label("selection", "rho")[0] == "Correlation ρ of the selection and outcome errors"
    assert presenters.detail_label("first_stage", "coefficients")[0] == "First-stage coefficients"


def test_a_field_without_a_label_shows_its_name_in_words() -> None:
    assert presenters.detail_label("something_new", "new_ratio") == ("New ratio", "number")


def test_coefficient_rows_show_interval_and_test_statistic() -> None:
    row = {
        "estimator": "first_stage:steps",
        "term": "lottery",
        "estimate": 1.3389,
        "std_error": 0.07414,
        "statistic": 18.0589,
        "p_value": 2e-68,
        "ci_low": 1.19352,
        "ci_high": 1.4843,
        "df": 2388,
        "distribution": "t",
    }
    (table,) = presenters.details("first_stage", {"coefficients": [row]}).coefficients
    assert table.columns == ["Term", "Estimate", "Std. error", "95% interval", "Test statistic", "p-value"]
    assert table.rows == [["lottery", "1.339", "0.07414", "[1.194, 1.484]", "t(2388) = 18.06", "< 0.0001"]]


def test_a_list_of_records_is_a_table_and_records_inside_a_row_get_a_table_each() -> None:
    criteria = [
        {"criterion": "tsls_relative_bias", "meaning": "bias of 2SLS", "tabulated": False, "reason": "not tabulated"},
        {
            "criterion": "tsls_size",
            "meaning": "size of the 2SLS test",
            "tabulated": True,
            "critical_values": [{"threshold": 0.1, "critical_value": 19.93, "exceeds": True}],
        },
    ]
    main, inner = presenters.details("stock_yogo", {"criteria": criteria}).tables

    assert main.caption == "Critical values, criterion by criterion"
    assert main.columns == ["Criterion", "What it limits", "Tabulated", "Why"]
    assert main.rows == [
        ["Bias of 2SLS relative to OLS", "bias of 2SLS", "no", "not tabulated"],
        ["Size of the 2SLS Wald test", "size of the 2SLS test", "yes", "n/a"],
    ]
    assert inner.caption == "Critical values: Size of the 2SLS Wald test"
    assert (inner.columns, inner.rows) == (
        ["Largest value tolerated", "Critical value", "Statistic above it"],
        [["10%", "19.93", "yes"]],
    )
    assert main.field == inner.field == "criteria"


def test_a_record_is_a_table_of_labels_and_values() -> None:
    wald = {"statistic": -2.29235, "p_value": 0.0589059, "null_hypothesis": "no effect", "method": "restricted"}
    (table,) = presenters.details("wild_cluster_bootstrap", {"wald": wald}).tables
    assert table.caption == "Bootstrap t-test of the 2SLS coefficient" and table.columns == []
    assert table.rows == [["Statistic", "-2.292"], ["p-value", "0.059"], ["Null hypothesis", "no effect"], ["Method", "restricted"]]


def test_values_indexed_by_names_stand_beside_them() -> None:
    shown = presenters.details(
        "disturbance_correlation", {"equations": ["structural", "first stage"], "disturbance_covariance": [[4.0, 0.5], [0.5, 1.0]]}
    )
    (table,) = shown.tables
    assert table.columns == ["", "structural", "first stage"]
    assert table.rows == [["structural", "4.000", "0.5000"], ["first stage", "0.5000", "1.000"]]
    assert shown.fields() == {"equations", "disturbance_covariance"} and shown.lists == []


def test_the_omitted_cause_grid_is_thinned_to_every_fifth_point_and_its_last() -> None:
    axis = [i / 100 for i in range(11)]
    grid = {
        "r2dz_x": axis,
        "r2yz_dx": axis,
        "adjusted_estimate": [[10 * i + j for j in range(11)] for i in range(11)],
        "adjusted_t": [[-(10 * i + j) for j in range(11)] for i in range(11)],
        "critical_t": 1.96,
    }
    (table,) = presenters.details("omitted_cause_sensitivity", {"contour": grid, "alpha": 0.05}).tables
    assert table.columns[1:] == ["0", "0.05000", "0.1000"]
    assert [row[0] for row in table.rows] == ["0", "0.05000", "0.1000"]
    assert table.rows[1][2] == "55.00 (t -55.00)"  # adjusted_estimate[i=5][j=5]
    assert table.rows[2][1] == "10.00 (t -10.00)"  # r2dz_x = 0 (i=0), r2yz_dx = 0.1 (j=10)
    assert "5% level while |t| exceeds 1.960" in table.note


def test_empty_lists_say_none_and_names_are_listed() -> None:
    shown = presenters.details("proportional_selection", {"warnings": [], "identified_set": [-0.2, 0.1]})
    assert shown.lists == [
        presenters.DetailLine("Warnings", "none", "warnings"),
        presenters.DetailLine("Identified set (from the controlled to the bias-adjusted estimate)", "[-0.2000, 0.1000]", "identified_set"),
    ]
