"""Accounts for tests: create people through the services and sign them in through the real sign-in form.

Shared by the web, security and browser tests (never copied). Tests use cheap
Argon2 work factors (:data:`FAST_HASHING`); the server's defaults are tested
where they matter.
"""

from __future__ import annotations

import re
from typing import Any

from fastapi.testclient import TestClient

from app.services import users
from app.services.context import ServiceContext

PASSWORD = "correct horse battery"
FAST_HASHING: dict[str, Any] = {"password_time_cost": 1, "password_memory_kib": 8}
"""Settings that make Argon2 hashing take microseconds in tests."""

FORM_TOKEN = re.compile(r'name="csrf_token" value="([^"]*)"')


def add_account(ctx: ServiceContext, name: str, role: str, *, password: str = PASSWORD) -> int:
    """Create an account as the server itself; returns its id."""
    return users.add_user(ctx, name=name, role=role, password=password).id


def form_token(html: str) -> str:
    """The form token carried by a page's forms."""
    match = FORM_TOKEN.search(html)
    assert match is not None, "the page carries no form token"
    return match.group(1)


def sign_in(client: TestClient, name: str, *, password: str = PASSWORD, send_token: bool = True) -> str:
    """Sign in through the sign-in form; returns the session's form token.

    With ``send_token`` the client then sends the token in the ``X-CSRF-Token``
    header of every request, as the app's own pages and scripts do.
    """
    client.headers.pop("X-CSRF-Token", None)
    page = client.get("/sign-in")
    answer = client.post(
        "/sign-in",
        data={"name": name, "password": password, "next": "/account", "csrf_token": form_token(page.text)},
        follow_redirects=False,
    )
    assert answer.status_code == 303, answer.text
    token = form_token(client.get("/account").text)
    if send_token:
        client.headers["X-CSRF-Token"] = token
    return token
