"""Demo case 1: OLS and 2SLS with both instruments miss the truth; the lottery alone recovers it.

True effect: -1.35 mmHg per 1,000 daily steps (seed_demo/scenarios/walking_blood_pressure.py).
"""

from __future__ import annotations

import pytest

from app.estimation.refit import refit
from app.spec import parse_claim
from seed_demo.build import scenario_frame
from seed_demo.scenarios import walking_blood_pressure as scenario

TRUTH = scenario.TRUE_EFFECT["value"]


@pytest.fixture(scope="module")
def frame():
    return scenario_frame(scenario)


def focal(findings, code: str):
    return next(row for row in findings.estimates if row.estimator == code and row.term == "daily_steps_k")


def test_the_claim_as_stated_reproduces_and_misses_the_truth(frame) -> None:
    findings = refit(frame, parse_claim(scenario.claim()))
    claimed = scenario.claim()["claimed"]
    tsls = focal(findings, "2sls")
    assert f"{tsls.estimate:.2f}" == claimed["estimate"]
    assert f"{tsls.std_error:.2f}" == claimed["std_error"]
    assert findings.n_obs == claimed["n_obs"]
    assert not tsls.ci_low <= TRUTH <= tsls.ci_high
    ols = focal(findings, "ols")
    assert ols.ci_high < TRUTH, "OLS overstates the benefit (the omitted motivation)"


def test_the_over_identification_test_rejects_the_pair_of_instruments(frame) -> None:
    diagnostics = refit(frame, parse_claim(scenario.claim())).to_dict()["diagnostics"]
    assert diagnostics["hansen_j"]["p_value"] < 0.001


def test_the_valid_instrument_alone_recovers_the_truth(frame) -> None:
    claim = {**scenario.claim(), "instruments": ["device_lottery"], "claimed": None}
    tsls = focal(refit(frame, parse_claim(claim)), "2sls")
    assert tsls.ci_low <= TRUTH <= tsls.ci_high
