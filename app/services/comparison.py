"""Two refits of one case side by side: what changed (data, claim, packages, estimates, verdict) and why.

The "why" is what people recorded: each claim version's change note (for
example the authors' reply that led to it) comes with the comparison.
"""

from __future__ import annotations

from typing import Any

from app.review.checklist import Checklist
from app.services import checklists
from app.services.context import ServiceContext
from app.services.diffs import field_changes
from app.services.records import case_info, load_refit, refit_info
from app.services.views import Comparison, EstimateChange, StandingChange
from app.store.models import Refit


def compare_refits(ctx: ServiceContext, *, case_id: int, before_id: int, after_id: int) -> Comparison:
    """Compare refit ``before_id`` with refit ``after_id`` (both of case ``case_id``)."""
    with ctx.reading() as session:
        before = load_refit(session, case_id, before_id, actor=ctx.actor)
        after = load_refit(session, case_id, after_id, actor=ctx.actor)
        data_changed = before.dataset_sha256 != after.dataset_sha256
        claim_changes = field_changes(before.claim.spec, after.claim.spec)
        old, new = before.findings, after.findings
        package_changes = field_changes(_packages(old), _packages(new))
        estimates = _estimate_changes(old, new)
        old_checklist = _checklist(before)
        new_checklist = _checklist(after)
        standing_changes = _standing_changes(old_checklist, new_checklist)
        comparison = Comparison(
            case=case_info(before.case),
            before=refit_info(before),
            after=refit_info(after),
            data_changed=data_changed,
            rows_before=old.get("n_obs") if old else None,
            rows_after=new.get("n_obs") if new else None,
            claim_changes=claim_changes,
            change_note_before=before.claim.change_note,
            change_note_after=after.claim.change_note,
            package_changes=package_changes,
            estimates=estimates,
            verdict_before=old_checklist.verdict.to_dict() if old_checklist else None,
            verdict_after=new_checklist.verdict.to_dict() if new_checklist else None,
            standing_changes=standing_changes,
            explanation=[],
        )
    return comparison.model_copy(update={"explanation": explain(comparison)})


def explain(comparison: Comparison) -> list[str]:
    """Sentences that say what changed between the refits and what the differences can be attributed to."""
    before, after = comparison.before, comparison.after
    lines: list[str] = []
    if comparison.data_changed:
        rows = ""
        if comparison.rows_before is not None and comparison.rows_after is not None:
            rows = f"; the estimation sample went from {comparison.rows_before:,} to {comparison.rows_after:,} rows"
        lines.append(
            f"The data changed: version {before.dataset_version} ({before.data_file_name}) became "
            f"version {after.dataset_version} ({after.data_file_name}){rows}."
        )
    else:
        lines.append(f"Both refits read the same data file ({after.data_file_name}, identical bytes).")
    if comparison.claim_changes:
        count = len(comparison.claim_changes)
        lines.append(
            f"The claim changed from claim {before.claim_number} version {before.claim_version} to claim "
            f"{after.claim_number} version {after.claim_version} in {count} field{'' if count == 1 else 's'}, "
            "listed below."
        )
        if comparison.change_note_after:
            lines.append(
                f"Recorded with claim {after.claim_number} version {after.claim_version}: "
                f"“{comparison.change_note_after}”."
            )
    else:
        lines.append("Both refits computed the same claim.")
    if comparison.package_changes:
        packages = ", ".join(
            f"{change.field} {change.before} to {change.after}" for change in comparison.package_changes
        )
        lines.append(f"The computing packages changed: {packages}.")
    causes = [
        cause
        for cause, changed in (
            ("the data", comparison.data_changed),
            ("the claim", bool(comparison.claim_changes)),
            ("the package versions", bool(comparison.package_changes)),
        )
        if changed
    ]
    moved = any(change.difference not in (None, 0.0) for change in comparison.estimates)
    if not causes:
        lines.append(
            "Nothing that enters the computation changed, so the estimates agree."
            if not moved
            else "Nothing that enters the computation changed, yet the estimates differ: report this as a defect."
        )
    elif len(causes) == 1:
        lines.append(f"Only {causes[0]} changed, so every difference below comes from {causes[0]}.")
    else:
        lines.append(
            f"Several inputs changed ({' and '.join(causes)}), so a difference cannot be attributed to one of "
            "them; refit the new claim on the old data (or the reverse) to separate them."
        )
    if comparison.verdict_before and comparison.verdict_after:
        old, new = comparison.verdict_before, comparison.verdict_after
        if old["code"] == new["code"]:
            lines.append(f"The verdict is the same: {new['label']}.")
        else:
            lines.append(f"The verdict moved from “{old['label']}” to “{new['label']}”.")
    elif before.state != "finished" or after.state != "finished":
        lines.append("One of the refits has no findings, so only their inputs can be compared.")
    if comparison.standing_changes:
        lines.append(f"{len(comparison.standing_changes)} checklist item(s) changed standing; they are listed below.")
    return lines


def _packages(findings: dict[str, Any] | None) -> dict[str, Any]:
    if not findings:
        return {}
    return dict(findings.get("provenance", {}).get("package_versions", {}))


def _focal_rows(findings: dict[str, Any] | None) -> dict[tuple[str, str], dict[str, Any]]:
    if not findings:
        return {}
    focal = set(findings.get("focal", []))
    return {(row["estimator"], row["term"]): row for row in findings.get("estimates", []) if row["term"] in focal}


def _estimate_changes(old: dict[str, Any] | None, new: dict[str, Any] | None) -> list[EstimateChange]:
    before_rows, after_rows = _focal_rows(old), _focal_rows(new)
    keys = list(after_rows) + [key for key in before_rows if key not in after_rows]
    changes = []
    for estimator, term in keys:
        first, second = before_rows.get((estimator, term)), after_rows.get((estimator, term))
        low = first["estimate"] if first else None
        high = second["estimate"] if second else None
        changes.append(
            EstimateChange(
                estimator=estimator,
                term=term,
                before=low,
                after=high,
                difference=high - low if low is not None and high is not None else None,
                before_ci=[first["ci_low"], first["ci_high"]] if first else None,
                after_ci=[second["ci_low"], second["ci_high"]] if second else None,
            )
        )
    return changes


def _checklist(row: Refit) -> Checklist | None:
    if row.state != "finished" or not row.findings:
        return None
    return checklists.checklist_of(row)


def _standing_changes(
    old: Checklist | None, new: Checklist | None
) -> list[StandingChange]:
    if old is None or new is None:
        return []
    before = {item.id: item for item in old.items}
    after = {item.id: item for item in new.items}
    changes = []
    for item_id in list(after) + [key for key in before if key not in after]:
        first, second = before.get(item_id), after.get(item_id)
        standing_before = first.effective_standing if first else None
        standing_after = second.effective_standing if second else None
        if standing_before != standing_after:
            title = (second or first).item  # type: ignore[union-attr]
            changes.append(StandingChange(id=item_id, item=title, before=standing_before, after=standing_after))
    return changes
