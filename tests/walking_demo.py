"""The walking demo case as test data, the ids of a reviewed case, and refit rows left unfinished.

Shared by the service, web and security tests.

The files are the demo's own (``seed_demo/cases/walking_blood_pressure``), read
where they are; nothing is copied.
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from app.services.context import ServiceContext
from app.store.models import Refit

DEMO_DIR = Path(__file__).resolve().parents[1] / "seed_demo" / "cases" / "walking_blood_pressure"


@dataclass(frozen=True)
class Reviewed:
    """Ids of a case whose claim has been refitted once."""

    case_id: int
    dataset_id: int
    claim_id: int
    refit_id: int


def demo_csv_bytes() -> bytes:
    """The walking demo's data file."""
    return (DEMO_DIR / "data.csv").read_bytes()


def demo_claim() -> dict[str, Any]:
    """The walking demo's claim as the fictional manuscript states it."""
    return tomllib.loads((DEMO_DIR / "claim.toml").read_text(encoding="utf-8"))


def add_unfinished_refit(
    ctx: ServiceContext, *, case_id: int, claim_id: int, dataset_id: int, state: str, stage: str
) -> int:
    """A refit row left ``waiting`` or ``running`` at ``stage``, as a busy or stopped worker leaves it; returns its id."""
    with ctx.transaction() as session:
        row = Refit(
            case_id=case_id,
            claim_id=claim_id,
            dataset_id=dataset_id,
            state=state,
            stage=stage,
            dataset_sha256="0" * 64,
            claim_sha256="0" * 64,
        )
        session.add(row)
        session.flush()
        return row.id
