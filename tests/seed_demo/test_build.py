"""The committed demo cases are exactly what their seeded generators write."""

from __future__ import annotations

from pathlib import Path

import pytest

from seed_demo.build import CASES_DIR, build_all
from seed_demo.scenarios import all_scenarios

REQUIRED = ("SLUG", "TITLE", "STORY", "TRUE_EFFECT", "SEED", "generate", "claim")


def test_every_scenario_declares_its_story_and_truth() -> None:
    scenarios = all_scenarios()
    assert len(scenarios) >= 4
    for scenario in scenarios:
        missing = [name for name in REQUIRED if not hasattr(scenario, name)]
        assert missing == [], scenario.__name__
        assert {"term", "value"} <= set(scenario.TRUE_EFFECT), scenario.__name__


def test_committed_cases_match_a_fresh_build(tmp_path: Path) -> None:
    cases = build_all(tmp_path)
    assert sorted(case.slug for case in cases) == sorted(p.name for p in CASES_DIR.iterdir() if p.is_dir())
    for case in cases:
        for fresh in sorted((tmp_path / case.slug).iterdir()):
            committed = CASES_DIR / case.slug / fresh.name
            assert committed.read_bytes() == fresh.read_bytes(), f"{committed} differs from its generator; run python -m seed_demo.build"


@pytest.mark.parametrize("scenario", all_scenarios(), ids=lambda s: s.SLUG)
def test_generators_are_deterministic(scenario) -> None:
    from seed_demo.build import scenario_frame

    first, second = scenario_frame(scenario), scenario_frame(scenario)
    assert first.equals(second)
