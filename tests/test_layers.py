"""Pure computation imports nothing from the web or storage layers (DEVELOPERS.md, 'Layers')."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

APP = Path(__file__).resolve().parents[1] / "app"
PURE_PACKAGES = ("estimation", "data", "review")
FORBIDDEN = ("fastapi", "starlette", "sqlalchemy", "jinja2", "alembic", "uvicorn", "app.web", "app.store", "app.services")


def imported_modules(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    names: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module:
            names.add(node.module)
    return names


@pytest.mark.parametrize("package", PURE_PACKAGES)
def test_pure_packages_do_not_import_web_or_storage(package: str) -> None:
    offenders = {}
    for path in sorted((APP / package).rglob("*.py")):
        bad = {name for name in imported_modules(path) if name.split(".")[0] in FORBIDDEN or name.startswith(FORBIDDEN)}
        if bad:
            offenders[str(path.relative_to(APP))] = sorted(bad)
    assert offenders == {}


def test_no_code_evaluates_text() -> None:
    """No eval/exec and no pandas query/eval anywhere in the application."""
    offenders = []
    for path in sorted(APP.rglob("*.py")):
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.Call):
                function = node.func
                name = function.id if isinstance(function, ast.Name) else function.attr if isinstance(function, ast.Attribute) else ""
                if name in {"eval", "exec", "query"}:
                    offenders.append(f"{path.relative_to(APP)}:{node.lineno} {name}")
    assert offenders == []
