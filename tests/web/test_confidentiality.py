"""Confidentiality: no page, stylesheet, script or figure refers to anything outside this server."""

from __future__ import annotations

import re
from urllib.parse import urljoin, urlparse

from fastapi.testclient import TestClient

from tests.web.conftest import Reviewed

REFERENCE = re.compile(r"""(?:href|src|action|hx-get|hx-post|poster|data)\s*=\s*["']([^"']+)["']|url\(\s*['"]?([^'")]+)""")
FOLLOWED = re.compile(r"""(?:href|src|hx-get)\s*=\s*["']([^"']+)["']|url\(\s*['"]?([^'")]+)""")
NAMESPACES = ("http://www.w3.org/2000/svg", "http://www.w3.org/1999/xlink")


def crawl(client: TestClient, start: list[str]) -> dict[str, str]:
    """Every GET-able page and asset reachable from ``start`` on this server, with its text."""
    seen: dict[str, str] = {}
    queue = list(start)
    while queue:
        path = queue.pop()
        if path in seen:
            continue
        response = client.get(path)
        assert response.status_code == 200, path
        seen[path] = response.text
        if "html" not in response.headers["content-type"] and "css" not in response.headers["content-type"]:
            continue
        for match in FOLLOWED.finditer(response.text):
            target = (match.group(1) or match.group(2)).replace("&amp;", "&")
            if target.startswith(("#", "data:")) or "/reports/" in target or "/delete" in target or "/progress" in target:
                continue
            resolved = urlparse(urljoin(f"http://testserver{path}", target))
            if resolved.netloc == "testserver" and resolved.path not in ("/api/v1/openapi.json",):
                queue.append(resolved.path + (f"?{resolved.query}" if resolved.query else ""))
    return seen


def test_nothing_served_refers_to_another_server(client: TestClient, reviewed: Reviewed) -> None:
    pages = crawl(client, ["/", f"{reviewed.refit}/checklist", f"{reviewed.case}/claims/new", "/static/js/secondstage.js"])

    assert any(path.endswith(".svg") for path in pages)
    assert any(path.endswith(".css") for path in pages)
    assert len(pages) > 15
    for path, text in pages.items():
        for match in REFERENCE.finditer(text):
            target = match.group(1) or match.group(2)
            assert not re.match(r"^(?:[a-z][a-z0-9+.-]*:)?//", target, re.IGNORECASE), (path, target)
        stripped = text
        for namespace in NAMESPACES:
            stripped = stripped.replace(namespace, "")
        assert not re.search(r"https?://", stripped), (path, re.search(r"https?://\S+", stripped))


def test_pages_forbid_loading_from_elsewhere(client: TestClient) -> None:
    policy = client.get("/").headers["content-security-policy"]
    assert "default-src 'self'" in policy
    assert "script-src 'self'" in policy and "unsafe-inline" not in policy
    assert client.get("/").headers["referrer-policy"] == "no-referrer"


def test_the_vendored_htmx_is_pinned_with_its_licence(client: TestClient) -> None:
    script = client.get("/static/vendor/htmx/htmx.min.js")
    assert script.status_code == 200 and "htmx" in script.text
    assert client.get("/static/vendor/htmx/LICENSE").status_code == 200
    assert "2.0.11" in client.get("/static/vendor/htmx/VERSION.md").text
