"""The journal club's presentation: every step, not only the overview, carries the caution."""

from __future__ import annotations

import re

from fastapi.testclient import TestClient

from tests.web.conftest import Reviewed

CAUTION = "A flag is a reason to ask the authors, not proof of error or misconduct; the reviewer decides."
STEP_COUNT = re.compile(r"Step 1 of (\d+)")


def test_every_presentation_step_says_a_flag_is_not_proof(client: TestClient, reviewed: Reviewed) -> None:
    opened = client.post(f"/api/v1/cases/{reviewed.case_id}/refits/{reviewed.refit_id}/links", json={"hours": 2})
    assert opened.status_code == 201, opened.text
    key = opened.json()["key"]
    overview = client.get(f"/follow/{key}/present/0").text
    counted = STEP_COUNT.search(overview)
    assert counted is not None
    steps = int(counted.group(1))
    assert steps > 1

    for step in range(steps):
        page = client.get(f"/follow/{key}/present/{step}")
        assert page.status_code == 200, step
        assert page.text.count(CAUTION) == 1, step
