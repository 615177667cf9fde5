"""The tF procedure: critical values from the published table, the interval, and when it cannot apply.

Source: reference/weak_instrument_published_values.toml (Lee, McCrary,
Moreira & Porter 2022, Table 3 and text).
"""

from __future__ import annotations

import math
import tomllib
from pathlib import Path

import numpy as np
import pytest

from app.estimation.refit import refit
from app.estimation.tf_procedure import tf_critical_value, tf_procedure
from app.spec import parse_claim
from tests.simulation import IvDesign, iv_claim, iv_sample

PUBLISHED = tomllib.loads((Path(__file__).parent / "reference" / "weak_instrument_published_values.toml").read_text())["tf"]


@pytest.mark.parametrize("point", PUBLISHED["points"], ids=lambda p: f"F={p['first_stage_f']}")
def test_published_critical_values(point: dict) -> None:
    assert tf_critical_value(point["first_stage_f"]) == pytest.approx(point["critical_value"], abs=point["tolerance_abs"])


def test_interpolation_is_linear_in_the_square_root_of_f() -> None:
    """Between the rows sqrt(F) = 3.1 (c = 3.51) and 3.2 (c = 3.39): F = 10 sits at sqrt(10) = 3.1623."""
    expected = 3.51 + (math.sqrt(10.0) - 3.1) / 0.1 * (3.39 - 3.51)
    assert tf_critical_value(10.0) == pytest.approx(expected, abs=1e-12)
    assert tf_critical_value(10.0) == pytest.approx(3.4353, abs=5e-5)


@pytest.mark.parametrize("first_stage_f", PUBLISHED["unbounded_at"])
def test_small_first_stage_f_gives_the_whole_line(first_stage_f: float) -> None:
    result = tf_procedure(estimate=0.8, std_error=0.1, first_stage_f=first_stage_f, n_endog=1, n_instruments=1)
    assert result.details["confidence_set"] == [[-math.inf, math.inf]]
    assert result.details["shape"] == "whole line"
    assert result.details["decision_5pct"].startswith("does not reject")


def test_interval_and_decision() -> None:
    result = tf_procedure(estimate=0.9, std_error=0.25, first_stage_f=10.0, n_endog=1, n_instruments=1)
    critical = tf_critical_value(10.0)
    assert result.statistic == pytest.approx(3.6)
    assert result.details["confidence_set"] == [[pytest.approx(0.9 - critical * 0.25), pytest.approx(0.9 + critical * 0.25)]]
    assert result.details["decision_5pct"] == "rejects no effect at 5%"
    assert result.p_value is None and "not a p-value" in result.details["p_value_note"]


def test_refit_uses_the_first_stage_f_and_standard_error_of_the_claimed_variance() -> None:
    design = IvDesign(n_obs=600, first_stage=(0.15,), heteroskedastic=True)
    frame = iv_sample(design, np.random.default_rng(12))
    findings = refit(frame, parse_claim(iv_claim(design, covariance="robust"))).to_dict()
    tf = findings["diagnostics"]["tf"]
    row = next(r for r in findings["estimates"] if r["estimator"] == "2sls" and r["term"] == "focal")
    assert tf["first_stage_f"] == pytest.approx(findings["diagnostics"]["first_stage"][0]["statistic"], rel=1e-10)
    assert tf["statistic"] == pytest.approx(row["estimate"] / row["std_error"], rel=1e-10)


def test_needs_exactly_one_instrument() -> None:
    result = tf_procedure(estimate=1.0, std_error=0.2, first_stage_f=50.0, n_endog=1, n_instruments=2)
    assert result.standing.value == "not_applicable"
    assert result.reason.startswith("the tF procedure needs exactly one instrument")
