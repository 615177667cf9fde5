"""Every instrument diagnostic appears in the findings with its documented fields, and bad input is named.

These are integration checks of app/estimation/instrument_diagnostics.py
through the engine's entry point ``refit``; the numbers themselves are checked
against outside references in the module-specific test files.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from app.errors import DesignError
from app.estimation.instrument_diagnostics import INSTRUMENT_DIAGNOSTIC_KEYS
from app.estimation.refit import refit
from app.spec import parse_claim
from tests.simulation import IvDesign, iv_claim, iv_sample

DESIGN = IvDesign(n_obs=600, first_stage=(0.4, 0.25, 0.15), n_controls=2, heteroskedastic=True, n_clusters=24, cluster_effect=0.5)
COMMON_FIELDS = {"name", "statistic", "p_value", "df", "distribution", "null_hypothesis", "standing", "reason", "source"}
SET_FIELDS = {"tested_value", "confidence_level", "confidence_set", "shape", "shape_meaning", "inversion"}


@pytest.fixture(scope="module")
def sample() -> pd.DataFrame:
    rng = np.random.default_rng(10)
    frame = iv_sample(DESIGN, rng)
    frame["baseline_income"] = rng.lognormal(3.0, 0.4, len(frame))
    frame["dose"] = 0.6 * frame["z2"] + 0.4 * frame["focal"] + rng.standard_normal(len(frame))
    return frame


def diagnostics_for(frame: pd.DataFrame, design: IvDesign = DESIGN, **fields: object) -> dict:
    findings = refit(frame, parse_claim(iv_claim(design, **fields))).to_dict()
    json.dumps(findings, allow_nan=False)
    return findings["diagnostics"]


def test_every_key_with_its_fields(sample: pd.DataFrame) -> None:
    diagnostics = diagnostics_for(
        sample,
        covariance="cluster",
        cluster=["cluster"],
        pre_treatment=["baseline_income"],
        instrument_subsets=[["z2", "z3"]],
        direct_effect_bound=0.05,
    )
    for key in INSTRUMENT_DIAGNOSTIC_KEYS:
        entries = diagnostics[key] if isinstance(diagnostics[key], list) else [diagnostics[key]]
        for entry in entries:
            assert COMMON_FIELDS <= set(entry), key
    for key in ("anderson_rubin", "kleibergen_k", "clr"):
        assert SET_FIELDS <= set(diagnostics[key]), key
        assert diagnostics[key]["tested_value"] == 0.0
    assert [entry["instruments"] for entry in diagnostics["c_statistic"]] == [["z1"], ["z2"], ["z3"], ["z2", "z3"]]
    assert diagnostics["tf"]["standing"] == "not_applicable"  # three instruments
    assert diagnostics["sanderson_windmeijer_f"]["standing"] == "not_applicable"  # one focal regressor
    for key in set(INSTRUMENT_DIAGNOSTIC_KEYS) - {"tf", "sanderson_windmeijer_f", "c_statistic"}:
        assert diagnostics[key]["standing"] == "computed", key
    assert {"critical_values", "shown", "bias_bound"} <= set(diagnostics["effective_f"])
    assert {"criteria", "compared_statistic", "assumption"} <= set(diagnostics["stock_yogo"])
    assert {"by_regressor", "disturbance_covariance", "estimator"} <= set(diagnostics["disturbance_correlation"])
    assert {"by_covariate", "skipped", "n_obs", "conditioning"} <= set(diagnostics["instrument_balance"])
    assert {"by_regressor", "direct_effect_bound", "box"} <= set(diagnostics["plausibly_exogenous"])
    assert {"replications", "seed", "weights", "clusters", "anderson_rubin", "wald"} <= set(diagnostics["wild_cluster_bootstrap"])


def test_plain_regression_marks_every_instrument_diagnostic_not_applicable(sample: pd.DataFrame) -> None:
    diagnostics = diagnostics_for(sample, instruments=[], covariance="robust")
    for key in INSTRUMENT_DIAGNOSTIC_KEYS:
        assert diagnostics[key]["standing"] == "not_applicable", key
        assert "no instruments" in diagnostics[key]["reason"]


@pytest.mark.parametrize(
    "fields",
    [
        {"endogenous": ["focal", "dose"], "covariance": "robust"},
        {"covariance": "cluster", "cluster": ["cluster", "region"]},
        {"covariance": "homoskedastic", "fixed_effects": ["region"], "weights": "baseline_income"},
        {"covariance": "robust", "fixed_effects": ["region", "site"], "pre_treatment": ["baseline_income", "w1"]},
    ],
    ids=["two focal regressors", "two-way clusters", "fixed effects and weights", "two-way fixed effects"],
)
def test_every_claim_shape_gives_strict_json_without_gaps(sample: pd.DataFrame, fields: dict) -> None:
    diagnostics = diagnostics_for(sample, **fields)
    for key in INSTRUMENT_DIAGNOSTIC_KEYS:
        entries = diagnostics[key] if isinstance(diagnostics[key], list) else [diagnostics[key]]
        for entry in entries:
            if entry["standing"] != "computed":
                assert entry["reason"], key


def test_an_instrument_with_almost_no_first_stage_is_read_not_crashed() -> None:
    """z1 is made uncorrelated with the focal regressor given the controls, up to a trace of 0.002."""
    frame = _orthogonal_instrument(trace=0.002)
    diagnostics = diagnostics_for(frame, ALMOST_IRRELEVANT, covariance="robust")
    assert diagnostics["first_stage"][0]["statistic"] < 0.01
    assert diagnostics["anderson_rubin"]["shape"] in {"whole line", "union of two rays"}
    assert diagnostics["tf"]["confidence_set"] == [[None, None]]
    for key in ("kleibergen_k", "clr"):
        assert diagnostics[key]["shape"] in {"whole line", "union of two rays", "several pieces"}, key


def test_an_instrument_without_any_first_stage_is_named() -> None:
    with pytest.raises(DesignError, match="cannot be estimated on these data"):
        refit(_orthogonal_instrument(trace=0.0), parse_claim(iv_claim(ALMOST_IRRELEVANT, covariance="robust")))


ALMOST_IRRELEVANT = IvDesign(n_obs=400, first_stage=(0.0,), n_controls=1)


def _orthogonal_instrument(*, trace: float) -> pd.DataFrame:
    rng = np.random.default_rng(3)
    frame = iv_sample(ALMOST_IRRELEVANT, rng)
    regressors = np.column_stack([np.ones(len(frame)), frame["w1"], frame["focal"]])
    noise = rng.standard_normal(len(frame))
    frame["z1"] = noise - regressors @ np.linalg.lstsq(regressors, noise, rcond=None)[0] + trace * frame["focal"]
    return frame


def test_collinear_instruments_and_constant_regressors_are_named_before_any_diagnostic(sample: pd.DataFrame) -> None:
    collinear = sample.assign(z3=sample["z1"] + 2 * sample["z2"])
    with pytest.raises(DesignError, match="instrument 'z3' is collinear"):
        refit(collinear, parse_claim(iv_claim(DESIGN, covariance="robust")))
    constant = sample.assign(focal=1.5)
    with pytest.raises(DesignError, match="focal regressor 'focal' does not vary"):
        refit(constant, parse_claim(iv_claim(DESIGN, covariance="robust")))
