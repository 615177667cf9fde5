"""Field-by-field differences between two JSON mappings (claim specs, package versions)."""

from __future__ import annotations

from typing import Any

from app.services.views import FieldChange


def flatten(data: dict[str, Any], *, prefix: str = "") -> dict[str, Any]:
    """Nested mappings become dotted keys (``claimed.estimate``); lists stay values."""
    flat: dict[str, Any] = {}
    for key, value in data.items():
        name = f"{prefix}{key}"
        if isinstance(value, dict) and value:
            flat.update(flatten(value, prefix=f"{name}."))
        else:
            flat[name] = value
    return flat


def field_changes(before: dict[str, Any] | None, after: dict[str, Any] | None) -> list[FieldChange]:
    """Every dotted field whose value differs, in the order of ``after`` then fields only in ``before``."""
    old, new = flatten(before or {}), flatten(after or {})
    names = list(new) + [name for name in old if name not in new]
    return [
        FieldChange(field=name, before=old.get(name), after=new.get(name))
        for name in names
        if old.get(name) != new.get(name)
    ]
