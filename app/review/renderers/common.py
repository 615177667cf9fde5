"""Content shared by every report: the caution, the sample, the estimator comparison, key diagnostics.

Renderers differ only in layout; what they say comes from here, so that a
Markdown report and a printed page never disagree.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

from app.review.checklist import Checklist, ChecklistItem
from app.review.formatting import as_number, confidence_set, count, interval, number, p_value, statistic
from app.review.items import STANDING_LABELS, Judgement, in_utc
from app.review.rules.omitted_causes import analysed_fit
from app.review.rules.overidentification import joint_test
from app.review.view import FindingsView

CAUTION = (
    "A flagged item is a reason to ask the authors, not proof of an error or of misconduct: diagnostics have false "
    "alarms and blind spots, and the reviewer decides what the evidence means.",
    "The replication data are confidential: this report quotes only summary statistics; do not share the data "
    "file beyond the editorial process.",
)

PRODUCT = "SecondStage"

NOTE_MARK = "*"
"""Marks an estimator whose standard errors do not come from the variance estimator the table heading names."""


@dataclass(frozen=True)
class EstimateLine:
    """One estimator's result for one focal coefficient."""

    term: str
    code: str
    name: str
    estimate: float | None
    std_error: float | None
    ci_low: float | None
    ci_high: float | None
    p_value: float | None
    claimed: bool
    note: str | None = None

    @property
    def label(self) -> str:
        """The estimator's name, with :data:`NOTE_MARK` when a note below the table explains its standard errors."""
        return f"{self.name}{NOTE_MARK}" if self.note else self.name


def estimate_lines_by_term(view: FindingsView) -> dict[str, list[EstimateLine]]:
    """Every estimator's row for each focal coefficient that has any, claimed estimator marked."""
    by_term: dict[str, list[EstimateLine]] = {}
    for term in view.focal_terms:
        for row in view.rows_for(term):
            code = str(row.get("estimator"))
            by_term.setdefault(term, []).append(
                EstimateLine(
                    term=term,
                    code=code,
                    name=view.estimator_name(code),
                    estimate=as_number(row.get("estimate")),
                    std_error=as_number(row.get("std_error")),
                    ci_low=as_number(row.get("ci_low")),
                    ci_high=as_number(row.get("ci_high")),
                    p_value=as_number(row.get("p_value")),
                    claimed=code == view.claimed_estimator and term == view.focal_term,
                    note=covariance_note(view, code),
                )
            )
    return by_term


def covariance_note(view: FindingsView, code: str) -> str | None:
    """Why an estimator's standard errors differ from the claim's variance estimator, or None when they do not.

    Heckman's two-step rows use his corrected covariance (Heckman 1979;
    Greene 2003, sec. 22.4), which is neither robust nor clustered; the
    control function's two-step sandwich (Newey 1984) is robust even when the
    claim states classical standard errors.
    """
    if code == "heckman_two_step":
        note = (
            "standard errors from Heckman's (1979) corrected covariance, which assumes homoskedastic normal errors "
            f"(normal reference distribution), not from the {view.variance_label} estimator of the other rows"
        )
        if view.variance_kind == "cluster":
            note += "; the claim clusters its standard errors, but these are not clustered"
        return note + "."
    if code == "control_function" and view.variance_kind == "homoskedastic":
        return (
            "standard errors from the two-step corrected sandwich (Newey 1984), heteroskedasticity-robust with the "
            "HC1 factor, not classical."
        )
    return None


def estimate_notes(lines: list[EstimateLine]) -> list[str]:
    """The notes below a table of estimates, one per marked estimator."""
    return [f"{NOTE_MARK} {line.name}: {line.note}" for line in lines if line.note]


def sample_lines(view: FindingsView) -> list[str]:
    """How the estimation sample came about, one sentence each, then the refit's own warnings."""
    sample = view.sample
    lines = [f"Rows in the data file: {count(sample.get('rows_read'))}."]
    for step in view.sample_entries("filters"):
        lines.append(f"Filter {step.get('filter')}: removed {count(step.get('rows_removed'))} rows.")
    missing = sample.get("missing_by_column")
    if isinstance(missing, Mapping) and missing:
        detail = ", ".join(f"{column} {count(n)}" for column, n in missing.items())
        lines.append(f"Rows removed for missing values: {count(sample.get('rows_dropped_missing'))} ({detail}).")
    if sample.get("rows_dropped_zero_weight"):
        lines.append(f"Rows with zero weight removed: {count(sample['rows_dropped_zero_weight'])}.")
    if sample.get("singletons_dropped"):
        lines.append(f"Singleton groups of the fixed effects removed: {count(sample['singletons_dropped'])}.")
    lines.append(f"Observations used: {count(view.n_obs)}.")
    lines += [f"Refit note: {warning}" for warning in view.warnings]
    return lines


def model_lines(view: FindingsView) -> list[str]:
    """The claim's model in words."""
    names = view.design_columns("exogenous") or view.claim_names("controls")
    controls = [c for c in names if c != "(intercept)"]
    lines = [
        f"Outcome: {view.outcome}.",
        f"Focal regressor(s): {', '.join(view.focal_terms) or 'none named'}.",
    ]
    if view.instruments:
        lines.append(f"Excluded instruments: {', '.join(view.instruments)}.")
    lines.append(f"Controls: {', '.join(controls) or 'none'}.")
    if view.claim_names("fixed_effects"):
        lines.append(f"Fixed effects absorbed: {', '.join(view.claim_names('fixed_effects'))}.")
    if view.claim_name("weights"):
        lines.append(f"Analytic weights: {view.claim_name('weights')}.")
    small_sample = view.covariance.get("small_sample")
    factor = f"; small-sample factor {small_sample}" if small_sample else ""
    lines.append(f"Standard errors: {view.variance_label}{factor}.")
    return lines


def claimed_sentence(view: FindingsView) -> str:
    """What the manuscript reports, in one sentence."""
    claimed = view.claimed
    parts = []
    if claimed.get("estimate") is not None:
        parts.append(f"an estimate of {claimed['estimate']}")
    if claimed.get("std_error") is not None:
        parts.append(f"a standard error of {claimed['std_error']}")
    if claimed.get("n_obs") is not None:
        parts.append(f"n = {count(claimed['n_obs'])}")
    if claimed.get("first_stage_f") is not None:
        parts.append(f"a first-stage F of {claimed['first_stage_f']}")
    estimator = view.estimator_name(view.claimed_estimator)
    if not parts:
        return f"The manuscript's printed numbers were not entered; the estimate of {view.focal_term} ({estimator}) is reviewed."
    return (
        f"The manuscript reports, for the effect of {view.focal_term} on {view.outcome} ({estimator}), "
        f"{', '.join(parts)}."
    )


def key_diagnostics(view: FindingsView) -> list[tuple[str, str]]:
    """``(label, value)`` pairs for the diagnostics a reader looks at first, when present."""
    rows: list[tuple[str, str]] = []
    for entry in view.first_stages():
        rows.append(
            (
                f"First-stage F, {entry.get('regressor')}",
                f"{statistic(entry.get('statistic'), distribution=entry.get('distribution'), df=entry.get('df'))} "
                f"({view.variance_label}); partial R-squared {number(entry.get('partial_r2'))}",
            )
        )
    effective = view.lookup("effective_f")
    if effective.usable and isinstance(effective.value, Mapping):
        rows.append(("Effective F (Montiel Olea-Pflueger)", number(effective.value.get("statistic"))))
    overid = joint_test(view)
    if overid.usable and isinstance(overid.value, Mapping):
        label = "Sargan over-identification" if overid.key == "sargan" else "Hansen J over-identification"
        rows.append((label, _test_text(overid.value)))
    endogeneity = view.lookup("control_function")
    if endogeneity.usable and isinstance(endogeneity.value, Mapping):
        rows.append(("Endogeneity (control function)", _test_text(endogeneity.value)))
    for key, label in (
        ("anderson_rubin", "Anderson-Rubin 95% set"),
        ("clr", "Conditional likelihood-ratio 95% set"),
        ("tf", "tF 95% interval"),
    ):
        found = view.lookup(key)
        if found.usable and isinstance(found.value, Mapping):
            rows.append((label, confidence_set(found.value.get("confidence_set"))))
    for key, label in (("mundlak", "Mundlak test (random vs fixed effects)"), ("selection", "Test of no selection")):
        found = view.lookup(key)
        if found.usable and isinstance(found.value, Mapping):
            rows.append((label, _test_text(found.value)))
    sensitivity = view.lookup_for("omitted_cause_sensitivity")
    if sensitivity.usable and isinstance(sensitivity.value, Mapping) and not view.claim_uses_instruments:
        analysed = analysed_fit(view, sensitivity.value)
        reference = "" if analysed == view.claimed_estimator else ", for reference"
        rows.append(
            (
                f"Robustness value (Cinelli-Hazlett, {view.estimator_name(analysed)}{reference})",
                f"RV = {number(sensitivity.value.get('robustness_value_q'))}, "
                f"RV at alpha = {number(sensitivity.value.get('robustness_value_q_alpha'))}",
            )
        )
    return rows


def _test_text(test: Mapping[str, object]) -> str:
    return (
        f"{statistic(test.get('statistic'), distribution=test.get('distribution'), df=test.get('df'))}, "
        f"{p_value(test.get('p_value'))}"
    )


def interval_text(line: EstimateLine) -> str:
    return interval(line.ci_low, line.ci_high)


def open_items(checklist: Checklist) -> list[ChecklistItem]:
    """Items whose effective standing is serious or a concern, most severe first."""
    order = {"serious": 0, "concern": 1}
    flagged = [item for item in checklist.items if item.effective_standing in order]
    return sorted(flagged, key=lambda item: order[item.effective_standing])


def awaiting_judgement(checklist: Checklist) -> list[ChecklistItem]:
    """Items left to the reviewer that have no judgement yet."""
    return [item for item in checklist.items if item.effective_standing == "reviewer_judgement"]


def note_heading(judgement: Judgement) -> str:
    """"Reviewer's note" with who saved it and when, as far as known.

    E.g. "Reviewer's note (Dana Reyes, 2026-12-02 14:05 UTC)"; the time is
    given in UTC to the minute. The name is user text: each renderer escapes
    the heading exactly as it escapes the note.
    """
    signature = [" ".join(judgement.author.split())] if judgement.author else []
    if judgement.saved_at is not None:
        signature.append(in_utc(judgement.saved_at).strftime("%Y-%m-%d %H:%M UTC"))
    return f"Reviewer's note ({', '.join(signature)})" if signature else "Reviewer's note"


def standing_words(item: ChecklistItem) -> str:
    """The standing in words, marking a reviewer's judgement that replaced the automatic one."""
    automatic = STANDING_LABELS[item.standing]
    if item.judgement is not None and item.judgement.standing is not None:
        return f"{STANDING_LABELS[item.judgement.standing]} (reviewer; automatic: {automatic})"
    return automatic
