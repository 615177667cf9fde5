"""The demo loads every scenario as a finished review, through the same services a reviewer uses."""

from __future__ import annotations

import pytest

from app.errors import SecondStageError
from app.services import cases, demo, refits
from app.services.context import ServiceContext
from seed_demo.scenarios import all_scenarios


def test_every_demo_scenario_becomes_a_finished_review(ctx: ServiceContext) -> None:
    loaded = demo.load_demo(ctx)

    scenarios = all_scenarios()
    assert [case.case.title for case in loaded] == [scenario.TITLE for scenario in scenarios]
    for case, scenario in zip(loaded, scenarios, strict=True):
        assert len(case.datasets) == len(case.claims) == len(case.refits) == 1
        refit = case.refits[0]
        assert refit.state == "finished", refit.error
        assert refit.verdict is not None
        results = refits.get_refit(ctx, case_id=case.case.id, refit_id=refit.id)
        assert results.findings is not None
        assert results.findings["focal"], scenario.SLUG
    assert cases.list_cases(ctx).total_cases == len(scenarios)


def test_the_demo_only_loads_into_an_empty_data_directory(ctx: ServiceContext) -> None:
    cases.create_case(ctx, title="A real manuscript")
    with pytest.raises(SecondStageError, match="without cases"):
        demo.load_demo(ctx)
