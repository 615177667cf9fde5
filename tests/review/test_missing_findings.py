"""Findings with keys missing or malformed give items that say so; nothing raises.

Stored refits may come from an engine without some diagnostic, or be damaged;
the checklist and every report must still be built.
"""

from __future__ import annotations

import copy

import pytest

from app.review.checklist import build_checklist
from app.review.reports import REPORT_FORMATS
from tests.review.findings_builder import iv_findings

TOP_LEVEL_KEYS = sorted(iv_findings())
DIAGNOSTIC_KEYS = sorted(iv_findings()["diagnostics"])
GARBAGE = [None, "text", 3.5, [], ["text", 1], {"standing": "computed"}]


def render_everything(findings: dict) -> None:
    checklist = build_checklist(findings)
    for report in REPORT_FORMATS.values():
        assert report.render(findings, checklist, data_file_name="sales.csv")


@pytest.mark.parametrize("key", TOP_LEVEL_KEYS)
def test_without_a_top_level_key(key):
    findings = iv_findings()
    del findings[key]
    render_everything(findings)


@pytest.mark.parametrize("key", DIAGNOSTIC_KEYS)
def test_without_a_diagnostic_the_item_says_it_is_missing(key):
    findings = iv_findings()
    del findings["diagnostics"][key]
    checklist = build_checklist(findings)
    mentions = [item for item in checklist.items if f"'{key}'" in item.evidence]
    readers = {"effective_f": "relevance.effective_f", "kleibergen_paap_rk_lm": "relevance.identification",
               "hansen_j": "overidentification.joint_test", "control_function": "omitted_causes.naive_vs_instrumented",
               "clr": None, "anderson_rubin": None}
    if readers.get(key):
        item = checklist.item(readers[key])
        assert item.standing == "not_applicable"
        assert item in mentions
    render_everything(findings)


@pytest.mark.parametrize("key", DIAGNOSTIC_KEYS)
@pytest.mark.parametrize("garbage", GARBAGE, ids=repr)
def test_malformed_diagnostics_do_not_raise(key, garbage):
    findings = iv_findings()
    findings["diagnostics"][key] = copy.deepcopy(garbage)
    render_everything(findings)


@pytest.mark.parametrize("garbage", GARBAGE, ids=repr)
def test_malformed_estimate_rows_and_sample_do_not_raise(garbage):
    findings = iv_findings()
    findings["estimates"].append(copy.deepcopy(garbage))
    findings["sample"]["missing_by_column"] = copy.deepcopy(garbage)
    findings["claim"]["claimed"] = copy.deepcopy(garbage)
    render_everything(findings)


def test_empty_findings_cannot_be_judged():
    checklist = build_checklist({})
    assert checklist.verdict.code == "undetermined"
    assert all(item.standing in ("not_applicable", "reviewer_judgement") for item in checklist.items)
    render_everything({})


@pytest.mark.parametrize("key", TOP_LEVEL_KEYS)
@pytest.mark.parametrize("garbage", GARBAGE, ids=repr)
def test_malformed_top_level_values_do_not_raise(key, garbage):
    findings = iv_findings()
    findings[key] = copy.deepcopy(garbage)
    render_everything(findings)


NESTED = [("claim", key) for key in sorted(iv_findings()["claim"])] + [
    ("sample", key) for key in sorted(iv_findings()["sample"])
] + [("covariance", key) for key in sorted(iv_findings()["covariance"])]


@pytest.mark.parametrize(("parent", "key"), NESTED)
@pytest.mark.parametrize("garbage", GARBAGE, ids=repr)
def test_malformed_claim_sample_and_covariance_fields_do_not_raise(parent, key, garbage):
    findings = iv_findings()
    findings[parent][key] = copy.deepcopy(garbage)
    render_everything(findings)


@pytest.mark.parametrize("role", sorted(iv_findings()["sample"]["columns"]))
@pytest.mark.parametrize("garbage", GARBAGE, ids=repr)
def test_malformed_design_columns_do_not_raise(role, garbage):
    findings = iv_findings()
    findings["sample"]["columns"][role] = copy.deepcopy(garbage)
    render_everything(findings)
