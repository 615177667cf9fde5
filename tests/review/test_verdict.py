"""The verdict rules (app/review/verdict.py), in the order they apply.

1. undetermined: no estimate of the claimed coefficient;
2. not_reproduced: a serious reproduction item;
3. not_supported: any other serious item;
4. fragile: any concern;
5. holds_up: otherwise.
A reviewer's judgement replaces the automatic standing of its item.
"""

from __future__ import annotations

from app.review.checklist import Judgement, build_checklist
from tests.review.findings_builder import effective_f, iv_findings, result, with_claim, with_diagnostic


def verdict_of(findings: dict, **options):
    return build_checklist(findings, **options).verdict


def test_a_healthy_claim_holds_up():
    verdict = verdict_of(iv_findings())
    assert verdict.code == "holds_up"
    assert verdict.label == "Holds up"
    assert verdict.drivers == ["reproduction.estimate", "relevance.effective_f"]
    assert "items await the reviewer's judgement" in verdict.summary


def test_a_concern_makes_the_claim_fragile():
    verdict = verdict_of(with_diagnostic(iv_findings(), "effective_f", effective_f(15.0)))
    assert verdict.code == "fragile"
    assert verdict.drivers == ["relevance.effective_f"]


def test_a_serious_item_means_not_supported():
    findings = with_diagnostic(iv_findings(), "hansen_j", result(25.0, 1e-6, df=1, distribution="chi2"))
    verdict = verdict_of(findings)
    assert verdict.code == "not_supported"
    assert verdict.drivers[0] == "overidentification.joint_test"
    assert "The instruments agree with each other" in verdict.summary


def test_an_estimate_that_does_not_reproduce_comes_first():
    findings = with_claim(iv_findings(), claimed={"estimate": "0.91"})
    findings = with_diagnostic(findings, "hansen_j", result(25.0, 1e-6, df=1, distribution="chi2"))
    verdict = verdict_of(findings)
    assert verdict.code == "not_reproduced"
    assert verdict.drivers == ["reproduction.estimate"]


def test_no_estimate_of_the_claimed_coefficient_is_undetermined():
    findings = iv_findings()
    findings["estimates"] = [r for r in findings["estimates"] if r["estimator"] != "2sls"]
    verdict = verdict_of(findings)
    assert verdict.code == "undetermined"
    assert verdict.drivers == []


def test_at_most_two_drivers_one_per_section_in_checklist_order():
    findings = with_diagnostic(iv_findings(), "hansen_j", result(25.0, 1e-6, df=1, distribution="chi2"))
    findings = with_diagnostic(findings, "effective_f", effective_f(5.0))
    findings = with_diagnostic(findings, "kleibergen_paap_rk_lm", result(1.0, 0.6, df=2, distribution="chi2"))
    verdict = verdict_of(findings)
    assert verdict.drivers == ["relevance.effective_f", "overidentification.joint_test"]


def test_the_reviewer_can_overrule_an_automatic_standing():
    findings = with_diagnostic(iv_findings(), "effective_f", effective_f(15.0))
    cleared = verdict_of(findings, judgements={"relevance.effective_f": Judgement("sound", "F is fine for this design")})
    assert cleared.code == "holds_up"
    raised = verdict_of(iv_findings(), judgements={"exclusion.argument": Judgement("serious", "distance affects sales")})
    assert raised.code == "not_supported"
    assert raised.drivers == ["exclusion.argument"]


def test_judged_items_no_longer_count_as_waiting():
    item_ids = [i.id for i in build_checklist(iv_findings()).items if i.standing == "reviewer_judgement"]
    judgements = {item_id: Judgement("sound", "") for item_id in item_ids}
    assert "await" not in verdict_of(iv_findings(), judgements=judgements).summary


def test_a_judgement_without_a_standing_keeps_the_automatic_one():
    findings = with_diagnostic(iv_findings(), "effective_f", effective_f(15.0))
    verdict = verdict_of(findings, judgements={"relevance.effective_f": Judgement(None, "asked the authors")})
    assert verdict.code == "fragile"
