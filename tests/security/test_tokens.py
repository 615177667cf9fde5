"""API tokens act as their owner with the owner's current role and access; revoked or expired ones are refused.

Secrets (API tokens, session cookies, session-link keys) are stored only as
digests: none of them can be found in the database files.
"""

from __future__ import annotations

from datetime import timedelta

from fastapi.testclient import TestClient
from sqlalchemy import update

from app.auth.actors import Actor
from app.auth.cookies import SESSION_COOKIE
from app.auth.roles import Role
from app.services import tokens, users
from app.store.models import ApiToken, utc_now
from tests.security.conftest import Shared


def bearer(shared: Shared, secret: str) -> TestClient:
    return TestClient(shared.app, headers={"Authorization": f"Bearer {secret}"})


def new_token(shared: Shared, name: str = "referee", *, days: int | None = None) -> tuple[int, str]:
    created = tokens.create_token(shared.as_user(name), label=shared.unique("script"), days=days)
    return created.token.id, created.secret


def test_a_token_acts_as_its_owner_and_sees_only_the_owners_cases(shared: Shared) -> None:
    _, secret = new_token(shared)
    client = bearer(shared, secret)
    assert client.get("/api/v1/me").json()["user"]["name"] == "referee"
    listed = {row["id"] for row in client.get("/api/v1/cases").json()["cases"]}
    assert shared.own.case_id in listed and shared.other.case_id not in listed
    assert client.get(f"/api/v1/cases/{shared.other.case_id}").status_code == 404


def test_a_token_opens_no_page(shared: Shared) -> None:
    _, secret = new_token(shared)
    page = bearer(shared, secret).get(f"/cases/{shared.own.case_id}", follow_redirects=False)
    assert page.status_code == 303 and page.headers["location"].startswith("/sign-in")


def test_a_revoked_token_is_refused_at_once(shared: Shared) -> None:
    token_id, secret = new_token(shared)
    client = bearer(shared, secret)
    assert client.get("/api/v1/me").status_code == 200
    tokens.revoke_token(shared.as_user("referee"), token_id=token_id)
    refused = client.get("/api/v1/me")
    assert refused.status_code == 401
    assert refused.headers["www-authenticate"].startswith("Bearer")
    assert refused.json()["error"]["code"] == "sign_in_required"


def test_an_expired_token_is_refused(shared: Shared) -> None:
    token_id, secret = new_token(shared, days=1)
    with shared.ctx.transaction() as session:
        session.execute(update(ApiToken).where(ApiToken.id == token_id).values(expires_at=utc_now() - timedelta(seconds=1)))
    assert bearer(shared, secret).get("/api/v1/me").status_code == 401


def test_only_its_owner_can_revoke_a_token(shared: Shared) -> None:
    token_id, secret = new_token(shared)
    answer = shared.clients["reader"].post(f"/account/tokens/{token_id}/revoke", follow_redirects=False)
    assert answer.status_code == 404
    assert bearer(shared, secret).get("/api/v1/me").status_code == 200


def test_a_token_follows_its_owners_role(shared: Shared) -> None:
    name = shared.unique("demoted")
    user_id = users.add_user(shared.ctx, name=name, role="coordinator", password="a long password").id
    owner = shared.ctx.acting_as(Actor(name=name, kind="user", role=Role.COORDINATOR, user_id=user_id))
    client = bearer(shared, tokens.create_token(owner, label="script", days=None).secret)
    assert client.get(f"/api/v1/cases/{shared.other.case_id}").status_code == 200
    users.set_role(shared.ctx, user_id=user_id, role="reader")
    assert client.get(f"/api/v1/cases/{shared.other.case_id}").status_code == 404


def test_malformed_authorization_is_refused(shared: Shared) -> None:
    for header in ("Bearer", "Bearer sst_not-a-real-token", "Basic c3Rld2FyZDpwYXNzd29yZA==", "Bearer " + "x" * 5000):
        response = TestClient(shared.app, headers={"Authorization": header}).get("/api/v1/me")
        assert response.status_code == 401, header


def test_the_token_list_shows_no_secret(shared: Shared) -> None:
    _, secret = new_token(shared)
    page = shared.clients["referee"].get("/account").text
    assert secret not in page and secret[:10] in page
    assert secret not in shared.clients["referee"].get("/api/v1/me").text


def test_no_secret_is_stored_in_the_clear(shared: Shared) -> None:
    _, token = new_token(shared)
    cookie = shared.clients["steward"].cookies[SESSION_COOKIE]
    session_secret = shared.app.state.keys.sessions.unsign(cookie, max_age_seconds=3600)
    shared.ctx.database.checkpoint()
    stored = b"".join(
        path.read_bytes() for path in shared.ctx.settings.data_dir.glob("secondstage.sqlite3*") if path.is_file()
    )
    for secret in (token, session_secret, shared.link_key):
        assert secret and secret.encode() not in stored
    assert shared.csv[:200] not in stored  # the data file itself lives in the file store, never in the database
