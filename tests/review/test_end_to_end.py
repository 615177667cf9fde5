"""End to end on invented data: refit with the engine, then review.

Data come from the shared seeded generators (tests/simulation.py,
tests/design_simulation.py); each test states what the generator makes true
and what the checklist must therefore say.
"""

from __future__ import annotations

import numpy as np

from app.estimation.refit import refit
from app.review.checklist import build_checklist
from app.review.reproduction import covariance_variants
from app.spec import parse_claim
from tests.design_simulation import MediationDesign, mediation_sample
from tests.simulation import IvDesign, iv_claim, iv_sample

INSTRUMENT_SECTIONS = ("relevance", "exclusion", "overidentification", "inference")
FLAGS = ("concern", "serious")


def review(design: IvDesign, *, seed: int, **claim_fields):
    frame = iv_sample(design, np.random.default_rng(seed))
    findings = refit(frame, parse_claim(iv_claim(design, **claim_fields))).to_dict()
    return findings, build_checklist(findings)


STRONG = IvDesign(n_obs=1_200, first_stage=(0.7, 0.5), endogeneity=0.5)
WEAK = IvDesign(n_obs=1_200, first_stage=(0.05, 0.04), endogeneity=0.5)


def test_a_strong_valid_instrument_raises_no_instrument_concern():
    _, checklist = review(STRONG, seed=101)
    flagged = [i.id for i in checklist.items if i.section in INSTRUMENT_SECTIONS and i.standing in FLAGS]
    assert flagged == []
    assert checklist.item("relevance.effective_f").standing == "sound"
    assert checklist.item("inference.weak_iv_robust").standing == "sound"
    assert checklist.verdict.code == "holds_up"


def test_a_weak_instrument_raises_relevance_and_changes_the_verdict():
    _, strong = review(STRONG, seed=101)
    _, weak = review(WEAK, seed=101)
    assert weak.item("relevance.effective_f").standing == "serious"
    assert weak.item("relevance.first_stage_f").standing == "serious"
    assert weak.verdict.code != strong.verdict.code
    assert weak.verdict.code == "not_supported"
    assert weak.verdict.drivers[0].startswith("relevance.")


def test_an_invalid_instrument_is_flagged_and_named():
    invalid = IvDesign(n_obs=1_500, first_stage=(0.6, 0.5, 0.5), direct=(0.0, 0.0, 0.6), endogeneity=0.5)
    _, checklist = review(invalid, seed=7)
    assert checklist.item("overidentification.joint_test").standing == "serious"
    blamed = checklist.item("overidentification.blamed_instrument")
    assert blamed.standing == "serious"
    assert "z3" in blamed.question and "z1" not in blamed.question and "z2" not in blamed.question


def test_a_mediator_claim_from_a_randomized_experiment_raises_the_mediator_item():
    frame = mediation_sample(MediationDesign(), np.random.default_rng(2024))
    claim = {
        "design": "mediation", "outcome": "outcome", "mediator": "mediator", "treatment": ["arm_a", "arm_b"],
        "controls": ["baseline"], "covariance": "robust", "claimed": {"estimator": "ols_with_treatment"},
    }
    findings = refit(frame, parse_claim(claim)).to_dict()
    item = build_checklist(findings).item("design.mediator")
    assert item.standing == "serious"
    assert "arm_a" in item.question


def test_a_printed_estimate_that_does_not_reproduce_is_caught():
    findings, checklist = review(STRONG, seed=101, claimed={"estimator": "2sls", "estimate": "0.91", "n_obs": 1_200})
    item = checklist.item("reproduction.estimate")
    assert item.standing == "serious"
    assert "0.91" in item.evidence
    assert checklist.verdict.code == "not_reproduced"


def test_a_sample_that_differs_by_missing_values_is_explained():
    frame = iv_sample(STRONG, np.random.default_rng(101))
    frame.loc[frame.index[:37], "w2"] = np.nan
    spec = parse_claim(iv_claim(STRONG, claimed={"n_obs": 1_200}))
    checklist = build_checklist(refit(frame, spec).to_dict())
    item = checklist.item("reproduction.n_obs")
    assert item.standing == "concern"
    assert "before deleting rows with missing values (w2: 37)" in item.evidence


def test_a_standard_error_traced_to_classical_errors():
    frame = iv_sample(STRONG, np.random.default_rng(101))
    classical = refit(frame, parse_claim(iv_claim(STRONG, covariance="homoskedastic"))).to_dict()
    printed = next(r for r in classical["estimates"] if r["estimator"] == "2sls" and r["term"] == "focal")["std_error"]
    spec = parse_claim(iv_claim(STRONG, covariance="robust", claimed={"estimator": "2sls", "std_error": f"{printed:.4f}"}))
    findings = refit(frame, spec).to_dict()
    item = build_checklist(findings, variants=covariance_variants(frame, spec)).item("reproduction.std_error")
    assert item.standing in FLAGS
    assert "matches the refit with classical (homoskedastic) standard errors" in item.evidence
