"""A comparison carries the reason recorded with each claim version."""

from __future__ import annotations

from typing import Any

from app.services import claims, comparison, refits
from app.services.context import ServiceContext
from tests.services.conftest import Reviewed


def test_both_versions_change_notes_come_with_the_comparison(
    ctx: ServiceContext, reviewed: Reviewed, demo_spec: dict[str, Any]
) -> None:
    note = "authors' reply: the lottery alone is the instrument in the final draft"
    revised = claims.revise_claim(
        ctx,
        case_id=reviewed.case_id,
        claim_id=reviewed.claim_id,
        dataset_id=reviewed.dataset_id,
        spec={**demo_spec, "instruments": ["device_lottery"]},
        change_note=note,
    ).claim
    after = refits.start_refit(ctx, case_id=reviewed.case_id, claim_id=revised.id, dataset_id=reviewed.dataset_id)

    view = comparison.compare_refits(ctx, case_id=reviewed.case_id, before_id=reviewed.refit_id, after_id=after.id)

    assert (view.change_note_before, view.change_note_after) == ("", note)
    assert f"Recorded with claim 1 version 2: “{note}”." in view.explanation
    assert "in 1 field, listed below." in " ".join(view.explanation)
