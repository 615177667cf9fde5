"""Wording shared by several readers' refusals."""

from __future__ import annotations

from app.errors import DataFileError


def damaged(display: str, label: str, error: Exception) -> DataFileError:
    """The refusal of a file that looks like ``label`` but that its library could not read."""
    detail = str(error).strip() or type(error).__name__
    return DataFileError(
        f'"{display}" looks like {label} but could not be read ({detail}). The file may be damaged, '
        "incomplete (an interrupted upload or download), or written by a program version that is not supported."
    )


def name_list(names: list[str]) -> str:
    """Up to eight names in quotes, and how many more there are."""
    shown = ", ".join(f'"{name}"' for name in names[:8])
    return shown + (f" and {len(names) - 8} more" if len(names) > 8 else "")


def human_bytes(count: int) -> str:
    """A byte count in binary units, e.g. ``1.5 GiB``."""
    size = float(count)
    for unit in ("bytes", "KiB", "MiB", "GiB", "TiB"):
        if size < 1024 or unit == "TiB":
            return f"{size:,.0f} {unit}" if unit == "bytes" else f"{size:,.1f} {unit}"
        size /= 1024
    return f"{count} bytes"
