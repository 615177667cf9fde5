"""What the summary sentences say: the corrected estimate beside a naive claim, and the estimators actually fitted."""

from __future__ import annotations

from app.review.checklist import build_checklist
from app.review.reports import REPORT_FORMATS
from tests.review.findings_builder import iv_findings, row, with_claim, with_rows


def test_a_naive_claim_verdict_names_the_corrected_estimate_with_its_interval():
    findings = with_claim(iv_findings(), claimed={"estimator": "ols", "estimate": "0.61", "std_error": "0.04"})
    summary = build_checklist(findings).verdict.summary
    assert "Corrected estimate (2SLS): 0.4213, 95% interval [0.2629, 0.5797]." in summary


def test_an_instrumented_claim_verdict_names_no_second_estimate():
    assert "Corrected estimate" not in build_checklist(iv_findings()).verdict.summary


def test_a_panel_claim_on_random_effects_names_the_within_estimate():
    findings = with_claim(iv_findings(), design="panel", instruments=[], unit="store_id", claimed={"estimator": "random_effects"})
    findings["sample"]["columns"]["instruments"] = []
    findings["estimators"] += [{"code": "within", "name": "Fixed effects (within)"}, {"code": "random_effects", "name": "Random effects"}]
    findings = with_rows(findings, row("random_effects", 0.5, 0.05), row("within", 0.3, 0.05))
    assert "Corrected estimate (Fixed effects (within)): 0.3000, 95% interval [0.2020, 0.3980]." in build_checklist(findings).verdict.summary


def test_the_markdown_summary_names_the_estimators_fitted():
    findings = iv_findings()
    text = REPORT_FORMATS["markdown"].render(findings, build_checklist(findings), data_file_name="sales.csv")
    assert "with OLS, 2SLS, LIML and Two-step GMM and ran the published diagnostics" in text
    assert "instrument-based" not in text
