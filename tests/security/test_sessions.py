"""Sign-in sessions: fixation, expiry, sign-out, password resets, limits on failures, the first run, cookie flags."""

from __future__ import annotations

from collections.abc import Callable, Iterator
from contextlib import contextmanager
from datetime import timedelta
from pathlib import Path
from typing import Any

import pytest
from fastapi.testclient import TestClient
from itsdangerous import TimestampSigner
from sqlalchemy import select, update

from app.auth.cookies import SESSION_COOKIE
from app.services import users
from app.store.models import AuditEntry, WebSession, utc_now
from app.web.app import create_app
from tests.accounts import PASSWORD, add_account, form_token, sign_in
from tests.security.conftest import security_settings

SIGN_IN = "/sign-in"


@pytest.fixture
def server(tmp_path: Path) -> Callable[..., Any]:
    """``server(**settings)``: a fresh app with a steward and a referee, as a context manager yielding a client."""

    @contextmanager
    def start(first_run_key: str | None = None, with_accounts: bool = True, **overrides: Any) -> Iterator[TestClient]:
        app = create_app(security_settings(tmp_path / "data", **overrides), first_run_key=first_run_key)
        with TestClient(app) as client:
            if with_accounts:
                add_account(app.state.services, "steward", "steward")
                add_account(app.state.services, "referee", "referee")
            yield client

    return start


def attempt(client: TestClient, name: str, password: str, *, next_path: str = "/") -> Any:
    page = client.get(SIGN_IN)
    data = {"name": name, "password": password, "next": next_path, "csrf_token": form_token(page.text)}
    return client.post(SIGN_IN, data=data, follow_redirects=False)


def signed_in(client: TestClient) -> bool:
    return client.get("/account", follow_redirects=False).status_code == 200


def test_a_page_without_a_sign_in_sends_to_the_sign_in_page_and_back(server: Callable[..., Any]) -> None:
    with server() as client:
        response = client.get("/cases/1?x=1", follow_redirects=False)
        assert response.status_code == 303
        assert response.headers["location"] == "/sign-in?next=%2Fcases%2F1%3Fx%3D1"
        answer = attempt(client, "steward", PASSWORD, next_path="/account")
        assert answer.headers["location"] == "/account"


@pytest.mark.parametrize("target", ["//elsewhere.example/", "https://elsewhere.example/", "/\\elsewhere.example", "account"])
def test_after_sign_in_the_server_never_sends_the_browser_elsewhere(server: Callable[..., Any], target: str) -> None:
    with server() as client:
        assert attempt(client, "steward", PASSWORD, next_path=target).headers["location"] == "/"


def test_a_session_planted_before_sign_in_is_replaced_and_ended(server: Callable[..., Any]) -> None:
    """Session fixation: someone slips their own valid session cookie into the referee's browser."""
    with server() as client:
        attempt(client, "steward", PASSWORD)
        planted = client.cookies[SESSION_COOKIE]
        victim = TestClient(client.app, cookies={SESSION_COOKIE: planted})

        answer = attempt(victim, "referee", PASSWORD)

        issued = answer.cookies[SESSION_COOKIE]
        assert issued != planted
        assert "referee" in TestClient(client.app, cookies={SESSION_COOKIE: issued}).get("/account").text
        assert not signed_in(TestClient(client.app, cookies={SESSION_COOKIE: planted}))


def test_a_made_up_session_cookie_is_refused(server: Callable[..., Any]) -> None:
    with server() as client:
        assert not signed_in(TestClient(client.app, cookies={SESSION_COOKIE: "made-up.value.signature"}))


def test_signing_in_again_ends_the_earlier_session(server: Callable[..., Any]) -> None:
    with server() as client:
        attempt(client, "steward", PASSWORD)
        earlier = client.cookies[SESSION_COOKIE]
        attempt(client, "steward", PASSWORD)
        assert client.cookies[SESSION_COOKIE] != earlier
        replay = TestClient(client.app, cookies={SESSION_COOKIE: earlier})
        assert not signed_in(replay)


def test_signing_out_ends_the_session_on_the_server(server: Callable[..., Any]) -> None:
    with server() as client:
        token = sign_in(client, "steward")
        cookie = client.cookies[SESSION_COOKIE]
        answer = client.post("/sign-out", data={"csrf_token": token}, follow_redirects=False)
        assert answer.headers["location"] == "/sign-in?signed_out=1"
        assert not signed_in(TestClient(client.app, cookies={SESSION_COOKIE: cookie}))


def test_an_expired_session_is_refused(server: Callable[..., Any]) -> None:
    with server() as client:
        sign_in(client, "steward")
        ctx = client.app.state.services  # type: ignore[attr-defined]
        with ctx.transaction() as session:
            session.execute(update(WebSession).values(expires_at=utc_now() - timedelta(seconds=1)))
        response = client.get("/account", follow_redirects=False)
        assert response.status_code == 303 and response.headers["location"].startswith(SIGN_IN)
        assert client.get("/api/v1/me").status_code == 401


def test_a_cookie_older_than_the_session_lifetime_is_refused_even_if_its_row_remains(
    server: Callable[..., Any], monkeypatch: pytest.MonkeyPatch
) -> None:
    with server(session_hours=1.0) as client:
        sign_in(client, "steward")
        keys = client.app.state.keys  # type: ignore[attr-defined]
        secret = keys.sessions.unsign(client.cookies[SESSION_COOKIE], max_age_seconds=3600)
        two_hours_ago = int(utc_now().timestamp()) - 7200
        monkeypatch.setattr(TimestampSigner, "get_timestamp", lambda self: two_hours_ago)
        stale = keys.sessions.sign(secret)
        monkeypatch.undo()
        assert not signed_in(TestClient(client.app, cookies={SESSION_COOKIE: stale}))


def test_the_session_cookie_is_http_only_same_site_and_lasts_the_configured_time(server: Callable[..., Any]) -> None:
    with server(session_hours=2.0, secure_cookies=True) as client:
        browser = TestClient(client.app, base_url="https://testserver")
        headers = attempt(browser, "steward", PASSWORD).headers.get_list("set-cookie")
        session_cookie = next(header for header in headers if header.startswith(f"{SESSION_COOKIE}="))
        for attribute in ("HttpOnly", "SameSite=lax", "Secure", "Path=/", "Max-Age=7200"):
            assert attribute in session_cookie, (attribute, session_cookie)


def test_a_reset_password_ends_the_persons_sessions_and_the_old_password(server: Callable[..., Any]) -> None:
    with server() as client:
        sign_in(client, "referee")
        ctx = client.app.state.services  # type: ignore[attr-defined]
        referee = users.user_id_of(ctx, name="referee")
        users.reset_password(ctx, user_id=referee, password="a brand new password")
        assert not signed_in(client)
        assert attempt(client, "referee", PASSWORD).status_code == 401
        assert attempt(client, "referee", "a brand new password").status_code == 303


def test_a_removed_account_can_do_nothing_more(server: Callable[..., Any]) -> None:
    with server() as client:
        sign_in(client, "referee")
        ctx = client.app.state.services  # type: ignore[attr-defined]
        users.remove_user(ctx, user_id=users.user_id_of(ctx, name="referee"))
        assert not signed_in(client)
        assert attempt(client, "referee", PASSWORD).status_code == 401


def test_a_refusal_does_not_say_whether_the_name_exists(server: Callable[..., Any]) -> None:
    with server() as client:
        wrong_password = attempt(client, "steward", "not the password")
        no_such_name = attempt(client, "nobody-here", "not the password")
        assert wrong_password.status_code == no_such_name.status_code == 401
        message = "the name or the password is not right"
        assert message in wrong_password.text and message in no_such_name.text


def test_failures_lock_the_account_for_a_while_even_for_the_right_password(server: Callable[..., Any]) -> None:
    with server(sign_in_failures_per_account=3, sign_in_failures_per_address=50) as client:
        for _ in range(3):
            assert attempt(client, "referee", "guess").status_code == 401
        locked = attempt(client, "referee", PASSWORD)
        assert locked.status_code == 429
        assert 0 < int(locked.headers["retry-after"]) <= 15 * 60
        assert "too many failed sign-ins" in locked.text
        assert attempt(client, "steward", PASSWORD).status_code == 303


def test_a_successful_sign_in_starts_the_account_count_again(server: Callable[..., Any]) -> None:
    with server(sign_in_failures_per_account=3, sign_in_failures_per_address=50) as client:
        for _ in range(2):
            attempt(client, "referee", "guess")
        assert attempt(client, "referee", PASSWORD).status_code == 303
        for _ in range(2):
            attempt(client, "referee", "guess")
        assert attempt(client, "referee", PASSWORD).status_code == 303


def test_failures_from_one_address_lock_that_address_for_every_account(server: Callable[..., Any]) -> None:
    with server(sign_in_failures_per_account=50, sign_in_failures_per_address=4) as client:
        for name in ("anna", "bruno", "chen", "dara"):
            attempt(client, name, "guess")
        assert attempt(client, "steward", PASSWORD).status_code == 429


def test_every_failure_is_in_the_audit_trail_with_the_name_and_the_address(server: Callable[..., Any]) -> None:
    with server() as client:
        attempt(client, "steward", "guess")
        with client.app.state.services.reading() as session:  # type: ignore[attr-defined]
            entry = session.scalars(select(AuditEntry).where(AuditEntry.action == "sign_in_failed")).one()
        assert (entry.subject, entry.address) == ("steward", "testclient")


def test_there_is_no_default_account(server: Callable[..., Any]) -> None:
    with server(with_accounts=False) as client:
        for name, password in (("admin", "admin"), ("steward", "steward"), ("admin", "password")):
            assert attempt(client, name, password).status_code == 401
        assert "This server has no account yet" in client.get(SIGN_IN).text


def test_the_first_run_link_creates_one_steward_once(server: Callable[..., Any]) -> None:
    with server(first_run_key="the-printed-key", with_accounts=False) as client:
        assert client.get("/welcome/a-guessed-key").status_code == 404
        page = client.get("/welcome/the-printed-key")
        fields = {"name": "Ada", "password": PASSWORD, "repeat": PASSWORD, "csrf_token": form_token(page.text)}
        assert client.post("/welcome/the-printed-key", data={k: v for k, v in fields.items() if k != "csrf_token"}).status_code == 403

        created = client.post("/welcome/the-printed-key", data=fields, follow_redirects=False)

        assert created.status_code == 303 and created.headers["location"] == "/"
        assert "ada" in client.get("/account").text
        assert client.get("/welcome/the-printed-key").status_code == 404
        again = TestClient(client.app).post("/welcome/the-printed-key", data=fields, follow_redirects=False)
        assert again.status_code == 404


def test_the_first_run_form_keeps_what_was_typed_when_the_passwords_differ(server: Callable[..., Any]) -> None:
    with server(first_run_key="key", with_accounts=False) as client:
        page = client.get("/welcome/key")
        fields = {"name": "ada", "password": PASSWORD, "repeat": "something else", "csrf_token": form_token(page.text)}
        answer = client.post("/welcome/key", data=fields)
        assert answer.status_code == 422
        assert "the two passwords differ" in answer.text and 'value="ada"' in answer.text


def test_expired_sessions_are_cleared_out_when_someone_signs_in(server: Callable[..., Any]) -> None:
    with server() as client:
        sign_in(client, "referee")
        ctx = client.app.state.services  # type: ignore[attr-defined]
        with ctx.transaction() as session:
            session.execute(update(WebSession).values(expires_at=utc_now() - timedelta(seconds=1)))
        attempt(TestClient(client.app), "steward", PASSWORD)
        with ctx.reading() as session:
            assert len(session.scalars(select(WebSession)).all()) == 1
