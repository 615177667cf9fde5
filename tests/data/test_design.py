"""The design builder: what it keeps, what it reports, and how it refuses bad input."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from app.data.design import INTERCEPT, build_design
from app.errors import DesignError, SpecError
from app.spec import parse_claim
from tests.simulation import IvDesign, iv_claim, iv_sample

DESIGN = IvDesign(n_obs=300, n_clusters=30)


@pytest.fixture
def frame() -> pd.DataFrame:
    return iv_sample(DESIGN, np.random.default_rng(11))


def build(frame: pd.DataFrame, **fields: object):
    return build_design(frame, parse_claim(iv_claim(DESIGN, **fields)))


class TestSample:
    def test_filters_and_missing_values_are_counted_by_column(self, frame: pd.DataFrame) -> None:
        frame.loc[:9, "w1"] = np.nan
        frame.loc[5:14, "z2"] = np.nan
        design = build(frame, filters=[{"column": "region", "op": "!=", "value": 0}])
        report = design.sample
        removed = report.filter_steps[0].rows_removed
        assert removed == int((frame["region"] == 0).sum())
        kept = frame["region"] != 0
        assert report.missing_by_column == {"z2": int(frame.loc[kept, "z2"].isna().sum()), "w1": int(frame.loc[kept, "w1"].isna().sum())}
        complete = kept & frame[["w1", "z2"]].notna().all(axis=1)
        assert report.n_obs == design.n_obs == int(complete.sum())
        assert report.rows_dropped_missing == int(kept.sum() - complete.sum())

    def test_in_filter_keeps_listed_values(self, frame: pd.DataFrame) -> None:
        design = build(frame, filters=[{"column": "region", "op": "in", "value": [1, 2]}])
        assert design.n_obs == int(frame["region"].isin([1, 2]).sum())

    def test_rows_are_ordered_by_the_first_cluster_variable(self, frame: pd.DataFrame) -> None:
        design = build(frame, covariance="cluster", cluster=["cluster"])
        assert np.all(np.diff(design.clusters[0]) >= 0)
        np.testing.assert_allclose(design.data[:, 0], frame["outcome"].to_numpy()[design.rows])

    def test_gram_is_the_cross_product_of_the_stacked_array(self, frame: pd.DataFrame) -> None:
        design = build(frame)
        np.testing.assert_allclose(design.gram, design.data.T @ design.data, rtol=1e-12)
        assert design.columns == ["outcome", "focal", "z1", "z2", INTERCEPT, "w1", "w2"]


class TestCategoricalControls:
    def test_levels_become_indicators_with_the_first_level_as_reference(self, frame: pd.DataFrame) -> None:
        design = build(frame, categorical=["region"])
        expansion = design.sample.categorical[0]
        assert expansion.reference == "0"
        assert design.exogenous[-6:] == [f"region={level}" for level in range(1, 7)]
        column = design.columns.index("region=3")
        np.testing.assert_array_equal(design.data[:, column], (frame["region"].to_numpy()[design.rows] == 3).astype(float))

    def test_a_stated_reference_level_is_omitted(self, frame: pd.DataFrame) -> None:
        design = build(frame, categorical=[{"column": "region", "reference": 4}])
        assert design.sample.categorical[0].reference == "4"
        assert "region=4" not in design.exogenous and "region=0" in design.exogenous

    def test_an_unknown_reference_level_is_refused(self, frame: pd.DataFrame) -> None:
        with pytest.raises(DesignError, match="reference level 9 of categorical control 'region'"):
            build(frame, categorical=[{"column": "region", "reference": 9}])


class TestFixedEffects:
    def test_singleton_groups_are_dropped_and_reported(self, frame: pd.DataFrame) -> None:
        frame["plant"] = np.arange(len(frame)) // 3
        frame.loc[[0, 1], "plant"] = [-1, -2]
        design = build(frame, fixed_effects=["plant"])
        assert design.sample.singletons_dropped == 3
        assert design.n_obs == len(frame) - 3
        assert INTERCEPT not in design.exogenous

    def test_a_control_absorbed_by_the_fixed_effects_is_dropped_and_reported(self, frame: pd.DataFrame) -> None:
        frame["region_size"] = frame["region"] * 2.5 + 1
        design = build(frame, controls=["w1", "w2", "region_size"], fixed_effects=["region"])
        assert design.sample.absorbed_columns == ["region_size"]
        assert "region_size" not in design.exogenous
        assert design.data.shape[1] == 1 + 1 + 2 + 2

    def test_absorbed_degrees_of_freedom_count_connected_components(self, frame: pd.DataFrame) -> None:
        frame["block_a"] = np.where(frame.index < 150, frame["region"], frame["region"] + 10)
        frame["block_b"] = np.where(frame.index < 150, 0, 1)
        design = build(frame, fixed_effects=["block_a", "block_b"])
        levels_a = frame["block_a"].nunique()
        assert design.absorbed.components == 2
        assert design.absorbed_dof == levels_a + 2 - 2


class TestBadInput:
    """Every refusal names the problem (the CLI prints these messages without a traceback)."""

    def test_unknown_column_is_named_with_close_matches(self, frame: pd.DataFrame) -> None:
        with pytest.raises(DesignError, match="column 'fcal' is not in the data file; similar columns: focal"):
            build(frame, endogenous=["fcal"])

    def test_text_column_in_a_numeric_role(self, frame: pd.DataFrame) -> None:
        frame["sector"] = np.where(frame["region"] > 3, "retail", "health")
        with pytest.raises(DesignError, match="column 'sector' holds text .* but its role needs numbers"):
            build(frame, controls=["w1", "sector"])

    def test_fewer_instruments_than_focal_regressors(self) -> None:
        with pytest.raises(SpecError, match="1 instrument\\(s\\) for 2 focal regressor\\(s\\)"):
            parse_claim(iv_claim(DESIGN, endogenous=["focal", "w2"], instruments=["z1"], controls=["w1"]))

    def test_instrument_collinear_with_the_controls_is_named(self, frame: pd.DataFrame) -> None:
        frame["z2"] = 2.0 * frame["w1"] - frame["w2"] + 3.0
        with pytest.raises(DesignError, match="instrument 'z2' is collinear with .*w1.*w2"):
            build(frame)

    def test_as_many_parameters_as_rows(self, frame: pd.DataFrame) -> None:
        with pytest.raises(DesignError, match="5 rows for 5 parameters"):
            build(frame.head(5))

    def test_constant_regressor(self, frame: pd.DataFrame) -> None:
        frame["w2"] = 4.0
        with pytest.raises(DesignError, match="control 'w2' is constant"):
            build(frame)

    def test_single_cluster(self, frame: pd.DataFrame) -> None:
        frame["cluster"] = 7
        with pytest.raises(DesignError, match="single cluster"):
            build(frame, covariance="cluster", cluster=["cluster"])

    def test_every_row_dropped_by_filters(self, frame: pd.DataFrame) -> None:
        with pytest.raises(DesignError, match="every row was dropped by the filters: 'region > 50' removed 300"):
            build(frame, filters=[{"column": "region", "op": ">", "value": 50}])

    def test_every_row_dropped_by_missing_values(self, frame: pd.DataFrame) -> None:
        frame["w2"] = np.nan
        with pytest.raises(DesignError, match="every row was dropped because of missing values: w2 \\(300 missing\\)"):
            build(frame)

    def test_infinite_values(self, frame: pd.DataFrame) -> None:
        frame.loc[3, "outcome"] = np.inf
        with pytest.raises(DesignError, match="column 'outcome' holds 1 infinite value"):
            build(frame)

    def test_negative_weights(self, frame: pd.DataFrame) -> None:
        frame["weight"] = -1.0
        with pytest.raises(DesignError, match="negative"):
            build(frame, weights="weight")

    def test_text_filter_on_a_numeric_column(self, frame: pd.DataFrame) -> None:
        with pytest.raises(DesignError, match="compares it with text"):
            build(frame, filters=[{"column": "region", "op": "==", "value": "north"}])

    def test_focal_regressor_that_is_a_combination_of_controls(self, frame: pd.DataFrame) -> None:
        frame["focal"] = frame["w1"] + frame["w2"]
        with pytest.raises(DesignError, match="focal regressor 'focal' is an exact linear combination of"):
            build(frame)


def test_near_collinearity_is_a_warning_naming_the_columns(frame: pd.DataFrame) -> None:
    frame["w2"] = frame["w1"] + 1e-4 * np.random.default_rng(2).standard_normal(len(frame))
    design = build(frame)
    assert any("'w2' is nearly collinear with w1" in warning for warning in design.sample.warnings)


def test_control_far_from_zero_that_varies_is_not_constant(frame: pd.DataFrame) -> None:
    """Spread 1 around 1e6 is 1e-12 of the magnitude: real variation at double precision, not a constant."""
    amount = 1e6 + np.random.default_rng(6).standard_normal(len(frame))
    design = build(frame.assign(amount=amount), controls=["w1", "amount"])
    assert "amount" in design.exogenous
    assert any("'amount' varies little relative to its size" in warning for warning in design.sample.warnings)
    with pytest.raises(DesignError, match="control 'level' is constant"):
        build(frame.assign(level=1e6 + 0.1), controls=["w1", "level"])


def test_calendar_year_control_draws_no_precision_warning(frame: pd.DataFrame) -> None:
    design = build(frame.assign(year=2016.0 + np.arange(len(frame)) % 2), controls=["w1", "year"])
    assert not [warning for warning in design.sample.warnings if "varies little" in warning]


def test_firm_effects_nested_in_firm_clusters_are_reported(frame: pd.DataFrame) -> None:
    nested = build(frame, fixed_effects=["site"], covariance="cluster", cluster=["site"])
    crossed = build(frame, fixed_effects=["region"], covariance="cluster", cluster=["site"])
    assert nested.nested_dof == nested.absorbed_dof == 40
    assert nested.absorbed.to_dict()["dof_nested_in_clusters"] == 40
    assert crossed.nested_dof == 0
