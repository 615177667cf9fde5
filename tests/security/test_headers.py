"""Every response carries the hardening headers; templates always escape; pages and answers are never cached by browsers."""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from fastapi.testclient import TestClient

from app.web.app import create_app
from app.web.templating import TEMPLATES_DIR, build_templates
from tests.security.conftest import Shared, security_settings


def responses(shared: Shared) -> dict[str, object]:
    """One response of every kind: page, API answer, error page, API error, redirect, figure, static file, link page."""
    steward, anonymous = shared.clients["steward"], shared.clients["anonymous"]
    own = shared.own
    return {
        "page": steward.get(f"/cases/{own.case_id}/refits/{own.refit_id}/checklist"),
        "api": steward.get(f"/api/v1/cases/{own.case_id}"),
        "error page": steward.get("/cases/999999"),
        "api error": anonymous.get("/api/v1/cases"),
        "redirect": anonymous.get("/", follow_redirects=False),
        "figure": steward.get(f"/cases/{own.case_id}/refits/{own.refit_id}/figures/estimates.svg"),
        "static": anonymous.get("/static/css/secondstage.css"),
        "sign-in page": anonymous.get("/sign-in"),
        "session link": anonymous.get(f"/follow/{shared.link_key}"),
    }


def test_every_response_forbids_framing_sniffing_referrers_and_outside_sources(shared: Shared) -> None:
    for kind, response in responses(shared).items():
        headers = response.headers  # type: ignore[attr-defined]
        policy = headers["content-security-policy"]
        assert "frame-ancestors 'none'" in policy and "object-src 'none'" in policy, kind
        assert "base-uri 'none'" in policy and "form-action 'self'" in policy, kind
        assert not re.search(r"https?:|\*|unsafe-inline|unsafe-eval", policy), kind
        assert headers["x-content-type-options"] == "nosniff", kind
        assert headers["referrer-policy"] == "no-referrer", kind
        assert headers["x-frame-options"] == "DENY", kind
        assert headers["cross-origin-opener-policy"] == "same-origin", kind


def test_confidential_answers_are_never_stored_by_the_browser(shared: Shared) -> None:
    for kind, response in responses(shared).items():
        cache = response.headers.get("cache-control", "")  # type: ignore[attr-defined]
        if kind == "static":
            assert "no-store" not in cache
        else:
            assert cache == "no-store", kind


def test_the_form_cookie_is_strict_and_http_only(shared: Shared) -> None:
    header = TestClient(shared.app).get("/sign-in").headers["set-cookie"]
    assert "HttpOnly" in header and "SameSite=strict" in header and "Path=/" in header


@pytest.mark.parametrize("name", sorted(path.name for path in TEMPLATES_DIR.glob("*.html")))
def test_every_template_is_autoescaped(name: str) -> None:
    environment = build_templates().env
    assert environment.autoescape(name) if callable(environment.autoescape) else environment.autoescape
    source = (TEMPLATES_DIR / name).read_text(encoding="utf-8")
    assert "|safe" not in source.replace(" ", "") and "autoescape false" not in source
    assert "Markup(" not in source


def test_markup_reaches_pages_only_escaped(shared: Shared) -> None:
    rendered = build_templates().env.from_string("{{ text }}").render(text='<script>alert("x")</script>')
    assert rendered == "&lt;script&gt;alert(&#34;x&#34;)&lt;/script&gt;"


def test_no_template_loads_anything_from_elsewhere() -> None:
    for path in Path(TEMPLATES_DIR).glob("*.html"):
        assert not re.search(r"""(?:src|href|action)\s*=\s*["'](?:https?:)?//""", path.read_text()), path.name


def test_a_server_behind_https_tells_browsers_to_keep_to_it(tmp_path: Path) -> None:
    with TestClient(create_app(security_settings(tmp_path / "data", secure_cookies=True))) as client:
        assert client.get("/sign-in").headers["strict-transport-security"] == "max-age=31536000"
    with TestClient(create_app(security_settings(tmp_path / "plain"))) as client:
        assert "strict-transport-security" not in client.get("/sign-in").headers
