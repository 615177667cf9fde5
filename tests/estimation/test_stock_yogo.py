"""Stock-Yogo critical values: the shipped table reproduces the published cells and refuses to extrapolate.

Source: reference/weak_instrument_published_values.toml (Stock & Yogo 2005,
Tables 5.1-5.4; which cells are quoted from memory is stated there).
"""

from __future__ import annotations

import tomllib
from pathlib import Path

import numpy as np
import pytest

from app.estimation.refit import refit
from app.estimation.stock_yogo import stock_yogo, stock_yogo_table
from app.spec import parse_claim
from tests.simulation import IvDesign, iv_claim, iv_sample

PUBLISHED = tomllib.loads((Path(__file__).parent / "reference" / "weak_instrument_published_values.toml").read_text())["stock_yogo"]


@pytest.mark.parametrize("cell", PUBLISHED["cells"], ids=lambda c: f"{c['criterion']}-{c['n_endog']}-{c['n_instruments']}")
def test_published_cells(cell: dict) -> None:
    rows = stock_yogo_table()[(cell["criterion"], cell["n_endog"], cell["n_instruments"])]
    assert [threshold for threshold, _ in rows] == cell["thresholds"]
    assert [value for _, value in rows] == cell["values"]


@pytest.mark.parametrize("cell", PUBLISHED["not_tabulated"], ids=lambda c: f"{c['criterion']}-{c['n_endog']}-{c['n_instruments']}")
def test_cells_outside_the_table_are_not_tabulated(cell: dict) -> None:
    result = stock_yogo(n_endog=cell["n_endog"], n_instruments=cell["n_instruments"], statistic=12.0, covariance_kind="homoskedastic")
    if result.standing.value == "not_applicable":
        assert result.reason.startswith("not tabulated")
        return
    entry = next(c for c in result.details["criteria"] if c["criterion"] == cell["criterion"])
    assert entry["tabulated"] is False
    assert entry["reason"].startswith("not tabulated: Stock and Yogo cover")
    assert "critical_values" not in entry


def test_nothing_tabulated_for_four_focal_regressors() -> None:
    result = stock_yogo(n_endog=4, n_instruments=6, statistic=30.0, covariance_kind="homoskedastic")
    assert result.standing.value == "not_applicable"
    assert "4 focal regressor(s) and 6 excluded instrument(s)" in result.reason


def test_lookup_compares_the_cragg_donald_f_with_each_cell() -> None:
    result = stock_yogo(n_endog=1, n_instruments=3, statistic=10.0, covariance_kind="homoskedastic")
    bias = next(c for c in result.details["criteria"] if c["criterion"] == "tsls_relative_bias")
    assert [cell["exceeds"] for cell in bias["critical_values"]] == [False, True, True, True]  # 13.91, 9.08, 6.46, 5.39
    assert result.details["notes"] == []


def test_robust_claims_are_told_that_the_table_assumes_homoskedastic_errors() -> None:
    design = IvDesign(n_obs=400, first_stage=(0.4, 0.3, 0.2))
    frame = iv_sample(design, np.random.default_rng(2))
    diagnostics = refit(frame, parse_claim(iv_claim(design, covariance="robust"))).to_dict()["diagnostics"]
    table = diagnostics["stock_yogo"]
    assert table["statistic"] == pytest.approx(diagnostics["cragg_donald_f"]["statistic"])
    assert table["compared_statistic"] == "cragg_donald_f"
    assert "homoskedastic" in table["notes"][0] and "effective F" in table["notes"][0]
