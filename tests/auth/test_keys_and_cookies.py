"""Secrets, digests, the signing key and signed cookies."""

from __future__ import annotations

import os
import stat
from pathlib import Path

from app.auth import csrf
from app.auth.cookies import CookieSigner
from app.auth.keys import TOKEN_PREFIX, digest, load_or_create_key, new_api_token, new_secret


def test_secrets_are_long_random_and_stored_as_digests() -> None:
    secrets = {new_secret() for _ in range(100)}
    assert len(secrets) == 100 and all(len(secret) >= 43 for secret in secrets)
    token = new_api_token()
    assert token.startswith(TOKEN_PREFIX)
    assert digest(token) != token and len(digest(token)) == 64


def test_the_signing_key_is_made_once_readable_by_its_owner_only(tmp_path: Path) -> None:
    path = tmp_path / "data" / "secret.key"
    key = load_or_create_key(path)
    assert load_or_create_key(path) == key and len(key) == 32
    assert stat.S_IMODE(os.stat(path).st_mode) == 0o600
    assert [entry.name for entry in path.parent.iterdir()] == ["secret.key"]


def test_a_signed_cookie_comes_back_only_unchanged_and_in_time() -> None:
    signer = CookieSigner(b"k" * 32, purpose="session")
    signed = signer.sign("the-secret")
    assert signer.unsign(signed, max_age_seconds=60) == "the-secret"
    assert signer.unsign(signed.replace("the-secret", "the-secreT"), max_age_seconds=60) is None
    assert CookieSigner(b"o" * 32, purpose="session").unsign(signed, max_age_seconds=60) is None
    assert CookieSigner(b"k" * 32, purpose="form").unsign(signed, max_age_seconds=60) is None
    assert signer.unsign(None, max_age_seconds=60) is None


def test_form_tokens_belong_to_one_session() -> None:
    key = b"k" * 32
    token = csrf.session_token(key, "session one")
    assert csrf.accepted(token, token)
    assert not csrf.accepted(token, csrf.session_token(key, "session two"))
    assert not csrf.accepted(token, None)
    assert csrf.pre_session_token(key, "session one") != token
