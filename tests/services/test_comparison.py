"""Comparing two refits: what changed (data, claim, estimates, verdict) and to what it can be attributed."""

from __future__ import annotations

import io
from typing import Any

import pandas as pd

from app.services import claims, comparison, refits
from app.services.context import ServiceContext
from tests.services.conftest import Reviewed, upload


def estimate(findings: dict[str, Any], estimator: str, term: str) -> float:
    return next(row["estimate"] for row in findings["estimates"] if (row["estimator"], row["term"]) == (estimator, term))


def test_a_changed_claim_is_named_as_the_only_cause(
    ctx: ServiceContext, reviewed: Reviewed, demo_spec: dict[str, Any]
) -> None:
    revised = claims.revise_claim(
        ctx,
        case_id=reviewed.case_id,
        claim_id=reviewed.claim_id,
        dataset_id=reviewed.dataset_id,
        spec={**demo_spec, "instruments": ["device_lottery"]},
    ).claim
    after = refits.start_refit(ctx, case_id=reviewed.case_id, claim_id=revised.id, dataset_id=reviewed.dataset_id)

    view = comparison.compare_refits(ctx, case_id=reviewed.case_id, before_id=reviewed.refit_id, after_id=after.id)

    assert not view.data_changed
    assert [change.field for change in view.claim_changes] == ["instruments"]
    assert "Only the claim changed" in " ".join(view.explanation)
    old = refits.get_refit(ctx, case_id=reviewed.case_id, refit_id=reviewed.refit_id).findings
    new = refits.get_refit(ctx, case_id=reviewed.case_id, refit_id=after.id).findings
    assert old is not None and new is not None
    tsls = next(change for change in view.estimates if (change.estimator, change.term) == ("2sls", "daily_steps_k"))
    assert tsls.before == estimate(old, "2sls", "daily_steps_k")
    assert tsls.after == estimate(new, "2sls", "daily_steps_k")
    assert tsls.difference == tsls.after - tsls.before
    assert view.verdict_before is not None and view.verdict_after is not None


def test_new_data_is_named_with_the_change_in_the_sample(
    ctx: ServiceContext, reviewed: Reviewed, demo_csv: bytes
) -> None:
    frame = pd.read_csv(io.BytesIO(demo_csv))
    dataset_id = upload(ctx, reviewed.case_id, frame[frame["age"] >= 30].to_csv(index=False).encode(), "over30.csv")
    after = refits.start_refit(ctx, case_id=reviewed.case_id, claim_id=reviewed.claim_id, dataset_id=dataset_id)

    view = comparison.compare_refits(ctx, case_id=reviewed.case_id, before_id=reviewed.refit_id, after_id=after.id)

    assert view.data_changed and view.claim_changes == []
    assert view.rows_after is not None and view.rows_before is not None and view.rows_after < view.rows_before
    text = " ".join(view.explanation)
    assert "The data changed: version 1 (walking.csv) became version 2 (over30.csv)" in text
    assert "Only the data changed" in text


def test_a_refit_compared_with_itself_shows_no_change(ctx: ServiceContext, reviewed: Reviewed) -> None:
    view = comparison.compare_refits(ctx, case_id=reviewed.case_id, before_id=reviewed.refit_id, after_id=reviewed.refit_id)
    assert view.claim_changes == view.package_changes == view.standing_changes == []
    assert all(change.difference == 0.0 for change in view.estimates)
    assert "Nothing that enters the computation changed, so the estimates agree." in view.explanation
