"""The demo: every invented scenario in ``seed_demo/`` loaded as a finished review.

Each scenario's files (``data.csv``, ``claim.toml``) are written by the demo
builder from the scenario's own seeded generator, exactly as they are committed
under ``seed_demo/cases/``, and go through the same services a reviewer uses:
open a case, upload the file, enter the claim, refit. A test loads the demo
into a temporary data directory so that it cannot rot.
"""

from __future__ import annotations

import io
import tempfile
from pathlib import Path
from types import ModuleType

from sqlalchemy import func, select

from app.errors import SecondStageError
from app.services import cases, claims, datasets, refits
from app.services.context import ServiceContext
from app.services.views import CaseDetail
from app.spec import load_claim
from app.store.models import Case
from seed_demo.build import write_case
from seed_demo.scenarios import all_scenarios

DEMO_REFIT_WAIT_SECONDS = 600.0


def load_demo(ctx: ServiceContext) -> list[CaseDetail]:
    """Create one finished case per demo scenario; only into a data directory without cases."""
    with ctx.reading() as session:
        if session.scalar(select(func.count()).select_from(Case)):
            raise SecondStageError(
                "the demo loads only into a data directory without cases; choose a new --data-dir"
            )
    return [load_scenario(ctx, scenario) for scenario in all_scenarios()]


def load_scenario(ctx: ServiceContext, scenario: ModuleType) -> CaseDetail:
    """Open, upload, enter and refit one scenario's case; waits for the refit to finish."""
    with tempfile.TemporaryDirectory(prefix="secondstage-demo-case-") as folder:
        files = write_case(scenario, Path(folder))
        spec = load_claim(files.claim_file)
        data = files.data_file.read_bytes()
    truth = "; ".join(f"{key.replace('_', ' ')}: {value}" for key, value in scenario.TRUE_EFFECT.items())
    case = cases.create_case(
        ctx,
        title=scenario.TITLE,
        reference=f"demo-{scenario.SLUG.replace('_', '-')}",
        notes=f"{scenario.STORY}\n\nInvented data with a known answer. True effect — {truth}.",
    ).case
    dataset = datasets.upload_dataset(ctx, case_id=case.id, source=io.BytesIO(data), file_name=f"{scenario.SLUG}.csv")
    claim = claims.create_claim(
        ctx, case_id=case.id, dataset_id=dataset.dataset.id, spec=spec.model_dump(mode="json")
    ).claim
    refits.start_refit(
        ctx,
        case_id=case.id,
        claim_id=claim.id,
        dataset_id=dataset.dataset.id,
        wait_seconds=DEMO_REFIT_WAIT_SECONDS,
    )
    return cases.get_case(ctx, case_id=case.id)
