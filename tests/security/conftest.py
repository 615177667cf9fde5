"""One shared server per test module: an account of every role, two reviewed cases, a token and a session link.

The *own* case is given to the referee and the reader; the *other* case to
nobody, so for them it must not exist. A *bystander* reader exists only to be
given and refused access without changing what the principals see. Clients are
signed in through the real sign-in form and send their form token; the
anonymous client has no cookie at all.
"""

from __future__ import annotations

import io
import itertools
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pytest
from fastapi import FastAPI
from fastapi.testclient import TestClient

from app.auth.actors import Actor
from app.auth.roles import Role
from app.services import access, cases, checklists, claims, datasets, refits, session_links, tokens
from app.services.context import ServiceContext
from app.settings import Settings
from app.web.app import create_app
from tests.accounts import FAST_HASHING, add_account, sign_in
from tests.walking_demo import demo_claim, demo_csv_bytes

ROLES = ("steward", "coordinator", "referee", "reader")
UPLOAD_LIMIT = 1024 * 1024


@dataclass(frozen=True)
class CaseIds:
    """Ids of a reviewed case and a real checklist item of its refit."""

    case_id: int
    dataset_id: int
    claim_id: int
    refit_id: int
    item_id: str


@dataclass
class Shared:
    """The shared server of a test module and what lives on it."""

    app: FastAPI
    ctx: ServiceContext
    user_ids: dict[str, int]
    clients: dict[str, TestClient]
    own: CaseIds
    other: CaseIds
    token: str
    link_key: str
    bystander_id: int
    spec: dict[str, Any]
    csv: bytes
    counter: Iterator[int] = field(default_factory=itertools.count)

    def actor(self, name: str) -> Actor:
        """The account ``name`` as a service actor (for setting things up through the services)."""
        return Actor(name=name, kind="user", role=Role(name), user_id=self.user_ids[name], via="test")

    def as_user(self, name: str) -> ServiceContext:
        return self.ctx.acting_as(self.actor(name))

    def unique(self, prefix: str) -> str:
        return f"{prefix}-{next(self.counter)}"

    def fresh_case(self, *, own: bool) -> int:
        """A new, empty case; given to the referee and the reader when ``own``."""
        case_id = cases.create_case(self.ctx, title=self.unique("Throwaway")).case.id
        if own:
            for name in ("referee", "reader"):
                access.grant_access(self.ctx, case_id=case_id, user_id=self.user_ids[name])
        return case_id

    def fresh_link(self, case: CaseIds, *, opener: str) -> int:
        """A new link to the case's refit, opened by ``opener`` where they may open one (else by the server)."""
        may_open = opener in ("steward", "coordinator") or (opener == "referee" and case == self.own)
        ctx = self.as_user(opener) if may_open else self.ctx
        return session_links.open_link(ctx, case_id=case.case_id, refit_id=case.refit_id, hours=1).link.id

    def fresh_user(self) -> int:
        return add_account(self.ctx, self.unique("throwaway"), "referee")

    def fresh_token(self, name: str) -> int:
        return tokens.create_token(self.as_user(name), label=self.unique("token"), days=None).token.id

    def signed_in_client(self, name: str) -> TestClient:
        """Another browser of ``name``, with its own new web session."""
        client = TestClient(self.app)
        sign_in(client, name)
        return client


def reviewed_case(ctx: ServiceContext, *, title: str, csv: bytes, spec: dict[str, Any]) -> CaseIds:
    """A case with the walking demo uploaded, its claim entered and refitted."""
    case_id = cases.create_case(ctx, title=title, reference=title.upper()).case.id
    dataset_id = datasets.upload_dataset(ctx, case_id=case_id, source=io.BytesIO(csv), file_name="walking.csv").dataset.id
    claim_id = claims.create_claim(ctx, case_id=case_id, dataset_id=dataset_id, spec=spec).claim.id
    refit = refits.start_refit(ctx, case_id=case_id, claim_id=claim_id, dataset_id=dataset_id, wait_seconds=60)
    assert refit.state == "finished", refit.error
    item_id = checklists.get_checklist(ctx, case_id=case_id, refit_id=refit.id).sections[0].items[0]["id"]
    return CaseIds(case_id=case_id, dataset_id=dataset_id, claim_id=claim_id, refit_id=refit.id, item_id=item_id)


def security_settings(data_dir: Path, **overrides: Any) -> Settings:
    """Settings of the shared server: refits are not waited for, uploads capped at 1 MiB."""
    options: dict[str, Any] = {
        "data_dir": data_dir,
        "refit_wait_seconds": 0.0,
        "max_upload_bytes": UPLOAD_LIMIT,
        **FAST_HASHING,
        **overrides,
    }
    return Settings(**options)


@pytest.fixture(scope="module")
def shared(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Shared]:
    """The module's shared server, with its lifespan running."""
    app = create_app(security_settings(tmp_path_factory.mktemp("security") / "data"))
    with TestClient(app):
        ctx: ServiceContext = app.state.services
        user_ids = {name: add_account(ctx, name, name) for name in ROLES}
        bystander_id = add_account(ctx, "bystander", "reader")
        csv = demo_csv_bytes()
        spec = demo_claim()
        own = reviewed_case(ctx, title="Own case", csv=csv, spec=spec)
        other = reviewed_case(ctx, title="Other case", csv=csv, spec=spec)
        for name in ("referee", "reader"):
            access.grant_access(ctx, case_id=own.case_id, user_id=user_ids[name])
        clients = {"anonymous": TestClient(app)}
        for name in ROLES:
            clients[name] = TestClient(app)
            sign_in(clients[name], name)
        referee = Actor(name="referee", kind="user", role=Role.REFEREE, user_id=user_ids["referee"], via="test")
        token = tokens.create_token(ctx.acting_as(referee), label="scripts", days=None).secret
        clients["referee token"] = TestClient(app, headers={"Authorization": f"Bearer {token}"})
        link_key = session_links.open_link(ctx, case_id=own.case_id, refit_id=own.refit_id, hours=24).key
        yield Shared(
            app=app,
            ctx=ctx,
            user_ids=user_ids,
            clients=clients,
            own=own,
            other=other,
            token=token,
            link_key=link_key,
            bystander_id=bystander_id,
            spec=spec,
            csv=csv,
        )
