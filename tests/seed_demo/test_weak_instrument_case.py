"""Demo case 3 shows a weak instrument: 2SLS looks significant, the robust sets do not.

Scenario: seed_demo/scenarios/budgeting_app_card_debt.py (invented data with a
documented true effect). The claimed numbers must reproduce, the 2SLS interval
must exclude zero while the Anderson-Rubin, K, CLR and tF sets contain zero and
the true effect, and the instrument's weakness must show in its strength
statistics.
"""

from __future__ import annotations

import copy
from decimal import Decimal

import numpy as np
import pytest

from app.estimation.refit import refit
from app.spec import parse_claim
from seed_demo.scenarios import budgeting_app_card_debt as scenario

TERM = scenario.TRUE_EFFECT["term"]


@pytest.fixture(scope="module")
def findings() -> dict:
    frame = scenario.generate(np.random.default_rng(scenario.SEED))
    return refit(frame, parse_claim(copy.deepcopy(scenario.claim()))).to_dict()


def contains(confidence_set: list, value: float) -> bool:
    return any((low is None or low <= value) and (high is None or value <= high) for low, high in confidence_set)


def rounds_to(value: float, printed: str) -> bool:
    exponent = Decimal(printed).as_tuple().exponent
    return abs(Decimal(repr(value)) - Decimal(printed)) <= Decimal(1).scaleb(exponent) / 2


def test_claimed_numbers_reproduce(findings: dict) -> None:
    claimed = scenario.claim()["claimed"]
    row = next(r for r in findings["estimates"] if r["estimator"] == "2sls" and r["term"] == TERM)
    assert findings["n_obs"] == claimed["n_obs"]
    assert rounds_to(row["estimate"], claimed["estimate"])
    assert rounds_to(row["std_error"], claimed["std_error"])
    assert rounds_to(findings["diagnostics"]["first_stage"][0]["statistic"], claimed["first_stage_f"])


def test_2sls_interval_excludes_zero_while_the_robust_sets_do_not(findings: dict) -> None:
    row = next(r for r in findings["estimates"] if r["estimator"] == "2sls" and r["term"] == TERM)
    assert row["ci_high"] < 0
    diagnostics = findings["diagnostics"]
    for key in ("anderson_rubin", "kleibergen_k", "clr", "tf"):
        assert contains(diagnostics[key]["confidence_set"], 0.0), key
        assert contains(diagnostics[key]["confidence_set"], scenario.TRUE_EFFECT["value"]), key
    assert diagnostics["anderson_rubin"]["p_value"] > 0.05


def test_the_instrument_is_weak_but_balanced(findings: dict) -> None:
    diagnostics = findings["diagnostics"]
    effective = diagnostics["effective_f"]
    assert effective["statistic"] < 10
    assert not any(row["exceeds"] for row in effective["critical_values"])
    assert diagnostics["instrument_balance"]["p_value"] > 0.1
    assert diagnostics["wild_cluster_bootstrap"]["standing"] == "computed"
    assert diagnostics["wild_cluster_bootstrap"]["clusters"] == 38
