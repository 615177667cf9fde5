"""Fixtures for the service tests: a server context on a temporary data directory, and demo data.

The data come from the shared demo scenario (the ``demo_csv`` and ``demo_spec``
fixtures of ``tests/conftest.py``) and the shared simulation generator
(``tests/simulation.py``); nothing is copied.
"""

from __future__ import annotations

import io
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from app.services import cases, claims, datasets, refits
from app.services.context import ServiceContext
from app.settings import Settings
from tests.accounts import FAST_HASHING
from tests.simulation import IvDesign, iv_claim, iv_sample
from tests.walking_demo import Reviewed


@pytest.fixture
def settings(tmp_path: Path) -> Settings:
    """Settings on a temporary data directory; refits are waited for, uploads capped at 4 MB, cheap password hashing."""
    return Settings(data_dir=tmp_path / "data", refit_wait_seconds=60.0, max_upload_bytes=4 * 1024 * 1024, **FAST_HASHING)


@pytest.fixture
def ctx(settings: Settings) -> Iterator[ServiceContext]:
    """An open service context, closed (worker stopped, engine disposed) after the test."""
    context = ServiceContext.open(settings)
    yield context
    context.close()


def simulated_csv(*, seed: int = 7, **design: Any) -> bytes:
    """A simulated IV sample (shared generator) as CSV bytes."""
    frame = iv_sample(IvDesign(**design), np.random.default_rng(seed))
    return frame.to_csv(index=False).encode()


def simulated_spec(**fields: Any) -> dict[str, Any]:
    """The claim matching :func:`simulated_csv`'s columns."""
    return iv_claim(IvDesign(), **fields)


def upload(ctx: ServiceContext, case_id: int, content: bytes, name: str = "data.csv") -> int:
    """Upload bytes as the case's next data version; returns the dataset id."""
    return datasets.upload_dataset(ctx, case_id=case_id, source=io.BytesIO(content), file_name=name).dataset.id


@pytest.fixture
def reviewed(ctx: ServiceContext, demo_csv: bytes, demo_spec: dict[str, Any]) -> Reviewed:
    """The walking demo opened, uploaded, entered and refitted through the services."""
    case_id = cases.create_case(ctx, title="Walking and blood pressure", reference="MS-2026-0117").case.id
    dataset_id = upload(ctx, case_id, demo_csv, "walking.csv")
    claim_id = claims.create_claim(ctx, case_id=case_id, dataset_id=dataset_id, spec=demo_spec).claim.id
    refit = refits.start_refit(ctx, case_id=case_id, claim_id=claim_id, dataset_id=dataset_id)
    assert refit.state == "finished", refit.error
    return Reviewed(case_id=case_id, dataset_id=dataset_id, claim_id=claim_id, refit_id=refit.id)
