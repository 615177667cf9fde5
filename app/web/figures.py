"""Server-rendered SVG figures of a refit, with the numbers behind them for text alternatives.

Two figures: the focal estimate under every estimator with its interval, next
to the manuscript's number and the weak-instrument-robust confidence sets; and
the first stage (each instrument's coefficient on the focal regressor, beside
its reduced-form coefficient on the outcome). Each figure is built from plain
rows (:class:`PlotRow`) that the page also prints as a table, so the picture
never holds a number the page does not state in words.

matplotlib's object-oriented API with the Agg/SVG backends is used (no pyplot
state); rendering is serialised by a lock because rcParams are global.
"""

from __future__ import annotations

import io
import math
from collections import OrderedDict
from collections.abc import Callable
import re
import threading
from dataclasses import dataclass
from typing import Any

import matplotlib

matplotlib.use("Agg")

from matplotlib.figure import Figure  # noqa: E402  (the backend is chosen first)

from app.review import formatting  # noqa: E402

ROBUST_SET_KEYS = ("anderson_rubin", "kleibergen_k", "clr", "tf")
"""Diagnostics that carry a weak-instrument-robust ``confidence_set`` for the focal coefficient."""

NAIVE_ESTIMATORS = ("ols", "pooled_ols", "random_effects")

COLOURS = {
    "claimed": "#8a4b0f",
    "naive": "#5f6b76",
    "estimator": "#0b5d7a",
    "robust": "#4b3f72",
    "zero": "#1b2631",
    "grid": "#d5d0c6",
}
MARKERS = {"claimed": "D", "naive": "s", "estimator": "o"}

_RENDER_LOCK = threading.Lock()
_RC = {
    "svg.fonttype": "none",
    "svg.hashsalt": "secondstage",
    "font.size": 11,
    "axes.edgecolor": "#5f6b76",
    "axes.labelcolor": "#1b2631",
    "xtick.color": "#1b2631",
    "ytick.color": "#1b2631",
}
SVG_METADATA = {"Date": None, "Creator": None, "Format": None, "Type": None}
"""No metadata block: the figure carries no date (so it is reproducible) and no links to vocabularies."""
_DOCTYPE = re.compile(r"<!DOCTYPE[^>]*>\s*", re.DOTALL)


@dataclass(frozen=True)
class PlotRow:
    """One line of a figure: a point estimate and/or one or more intervals (None = unbounded end)."""

    label: str
    kind: str
    estimate: float | None
    pieces: tuple[tuple[float | None, float | None], ...]
    printed: str | None = None
    note: str = ""

    def describe(self) -> str:
        """The row in words, e.g. ``2SLS: -2.85, interval [-3.3, -2.4]``."""
        parts = []
        if self.printed is not None:
            parts.append(f"{self.printed} as printed")
        elif self.estimate is not None:
            parts.append(formatting.number(self.estimate))
        if self.pieces:
            parts.append(("interval " if self.kind != "robust" else "set ") + formatting.confidence_set(self.pieces))
        elif self.kind == "robust":
            parts.append("empty set")
        if self.note:
            parts.append(self.note)
        return f"{self.label}: {', '.join(parts)}"


@dataclass(frozen=True)
class Panel:
    """One set of axes: a title and its rows, top to bottom."""

    title: str
    rows: tuple[PlotRow, ...]


def estimate_panels(findings: dict[str, Any]) -> list[Panel]:
    """One panel per focal regressor: manuscript, every estimator, and the robust sets."""
    panels = []
    focal = list(findings.get("focal") or [])
    names = {item["code"]: item["name"] for item in findings.get("estimators") or []}
    claimed = (findings.get("claim") or {}).get("claimed") or {}
    for position, term in enumerate(focal):
        rows: list[PlotRow] = []
        claimed_term = claimed.get("term") or (focal[0] if focal else None)
        if claimed.get("estimate") is not None and claimed_term == term:
            rows.append(_claimed_row(claimed))
        for item in findings.get("estimates") or []:
            if item["term"] != term:
                continue
            kind = "naive" if item["estimator"] in NAIVE_ESTIMATORS else "estimator"
            rows.append(
                PlotRow(
                    label=names.get(item["estimator"], item["estimator"]),
                    kind=kind,
                    estimate=item.get("estimate"),
                    pieces=((item.get("ci_low"), item.get("ci_high")),)
                    if item.get("ci_low") is not None and item.get("ci_high") is not None
                    else (),
                )
            )
        if len(focal) == 1 and position == 0:
            rows.extend(_robust_rows(findings.get("diagnostics") or {}))
        panels.append(Panel(title=f"Effect of {term} on {findings.get('outcome', 'the outcome')}", rows=tuple(rows)))
    return [panel for panel in panels if panel.rows]


def first_stage_panels(findings: dict[str, Any]) -> list[Panel]:
    """Per focal regressor: the instruments' first-stage coefficients, then their reduced-form ones."""
    diagnostics = findings.get("diagnostics") or {}
    stages = diagnostics.get("first_stage")
    if not isinstance(stages, list):
        return []
    panels = []
    for stage in stages:
        if stage.get("standing") != "computed" or not stage.get("coefficients"):
            continue
        summary = [f"F = {formatting.number(stage.get('statistic'))}"]
        if stage.get("partial_r2") is not None:
            summary.append(f"partial R² = {formatting.number(stage['partial_r2'], digits=3)}")
        panels.append(
            Panel(
                title=f"Instruments → {stage.get('regressor', 'focal regressor')} ({', '.join(summary)})",
                rows=tuple(_coefficient_row(item, kind="estimator") for item in stage["coefficients"]),
            )
        )
    reduced = diagnostics.get("reduced_form")
    if panels and isinstance(reduced, dict) and reduced.get("coefficients"):
        panels.append(
            Panel(
                title=f"Instruments → {findings.get('outcome', 'outcome')} (reduced form)",
                rows=tuple(_coefficient_row(item, kind="naive") for item in reduced["coefficients"]),
            )
        )
    return panels


def figure_svg(findings: dict[str, Any] | None, *, figure: str) -> str | None:
    """The ``estimates`` or ``first-stage`` figure of a refit, or None when there is nothing to draw."""
    if not findings:
        return None
    panels = estimate_panels(findings) if figure == "estimates" else first_stage_panels(findings)
    return render_svg(panels, x_label="coefficient") if panels else None


class SvgCache:
    """Rendered figures of finished refits, newest kept (refits never change, so entries never go stale)."""

    def __init__(self, *, size: int = 64) -> None:
        self._size = size
        self._entries: OrderedDict[tuple[int, str], str | None] = OrderedDict()
        self._lock = threading.Lock()

    def get_or_render(self, key: tuple[int, str], render: Callable[[], str | None]) -> str | None:
        """The cached figure, or ``render()`` stored under ``key``."""
        with self._lock:
            if key in self._entries:
                self._entries.move_to_end(key)
                return self._entries[key]
        svg = render()
        with self._lock:
            self._entries[key] = svg
            while len(self._entries) > self._size:
                self._entries.popitem(last=False)
        return svg


def describe_panels(panels: list[Panel]) -> str:
    """A text alternative: each panel's title and rows in one paragraph."""
    return " ".join(
        f"{panel.title}. " + "; ".join(row.describe() for row in panel.rows) + "." for panel in panels
    )


def render_svg(panels: list[Panel], *, x_label: str) -> str:
    """Draw the panels stacked vertically as one SVG document."""
    heights = [0.55 + 0.42 * len(panel.rows) for panel in panels]
    with _RENDER_LOCK, matplotlib.rc_context(_RC):
        figure = Figure(figsize=(10.0, sum(heights) + 0.5), layout="constrained")
        axes_list = figure.subplots(len(panels), 1, squeeze=False, height_ratios=heights)[:, 0]
        for axes, panel in zip(axes_list, panels, strict=True):
            _draw_panel(axes, panel, x_label=x_label)
        buffer = io.StringIO()
        figure.savefig(buffer, format="svg", metadata=SVG_METADATA)
    return _DOCTYPE.sub("", buffer.getvalue())


def _draw_panel(axes: Any, panel: Panel, *, x_label: str) -> None:
    rows = panel.rows
    low, high = _limits(rows)
    axes.set_xlim(low, high)
    axes.set_ylim(len(rows) - 0.5, -0.5)
    axes.set_yticks(range(len(rows)), [row.label for row in rows])
    axes.set_title(panel.title, loc="left", fontsize=11, fontweight="bold")
    axes.set_xlabel(x_label)
    axes.grid(axis="x", color=COLOURS["grid"], linewidth=0.8)
    axes.set_axisbelow(True)
    if low < 0 < high:
        axes.axvline(0, color=COLOURS["zero"], linewidth=1, linestyle=(0, (4, 3)))
    for position, row in enumerate(rows):
        colour = COLOURS[row.kind]
        outside = []
        for left, right in row.pieces:
            if (left is not None and left > high) or (right is not None and right < low):
                outside.append((left, right))
                continue
            # An end beyond the axis (or unbounded) is drawn at the edge with an arrow.
            open_left = left is None or left < low
            open_right = right is None or right > high
            start = low if open_left else left
            end = high if open_right else right
            axes.plot([start, end], [position, position], color=colour, linewidth=2.6, solid_capstyle="butt")
            if open_left:
                axes.plot([start], [position], marker="<", color=colour, markersize=8)
            if open_right:
                axes.plot([end], [position], marker=">", color=colour, markersize=8)
        if outside:
            text = "also " + formatting.confidence_set(outside) + " (off the axis)"
            right_side = outside[0][0] is not None and outside[0][0] > high
            axes.annotate(
                text,
                xy=(1.0 if right_side else 0.0, position),
                xycoords=("axes fraction", "data"),
                xytext=(-4 if right_side else 4, 0),
                textcoords="offset points",
                ha="right" if right_side else "left",
                va="center",
                color=colour,
                fontsize=9,
            )
        if row.estimate is not None:
            axes.plot(
                [row.estimate],
                [position],
                marker=MARKERS.get(row.kind, "o"),
                markersize=7,
                color="white",
                markeredgecolor=colour,
                markeredgewidth=2,
            )
        if row.kind == "robust" and not row.pieces:
            axes.text(low + 0.02 * (high - low), position, "empty set", va="center", color=colour)


def _limits(rows: tuple[PlotRow, ...]) -> tuple[float, float]:
    """The x range: the estimates and their intervals; robust sets only when nothing else is plotted.

    Weak-instrument-robust sets can be unbounded or hold far-away pieces; they
    are clipped to the range the estimators need (with arrows and a note), so
    that the estimators stay readable.
    """
    anchored = [row for row in rows if row.kind != "robust"] or list(rows)
    values = [row.estimate for row in anchored if row.estimate is not None]
    values += [end for row in anchored for piece in row.pieces for end in piece if end is not None]
    values = [value for value in values if math.isfinite(value)]
    if not values:
        return -1.0, 1.0
    low, high = min(values), max(values)
    span = high - low or max(abs(high), 1.0)
    return low - 0.12 * span, high + 0.12 * span


def _claimed_row(claimed: dict[str, Any]) -> PlotRow:
    estimate = float(claimed["estimate"])
    pieces: tuple[tuple[float | None, float | None], ...] = ()
    note = ""
    if claimed.get("std_error") is not None:
        half = 1.96 * float(claimed["std_error"])
        pieces = ((estimate - half, estimate + half),)
        note = f"standard error {claimed['std_error']} as printed, drawn as estimate ± 1.96 standard errors"
    return PlotRow(
        label="Manuscript", kind="claimed", estimate=estimate, pieces=pieces, printed=str(claimed["estimate"]), note=note
    )


def _robust_rows(diagnostics: dict[str, Any]) -> list[PlotRow]:
    rows = []
    for key in ROBUST_SET_KEYS:
        result = diagnostics.get(key)
        if not isinstance(result, dict) or result.get("standing") != "computed":
            continue
        pieces = result.get("confidence_set")
        if not isinstance(pieces, list):
            continue
        rows.append(
            PlotRow(
                label=str(result.get("name") or key),
                kind="robust",
                estimate=None,
                pieces=tuple((piece[0], piece[1]) for piece in pieces),
            )
        )
    return rows


def _coefficient_row(item: dict[str, Any], *, kind: str) -> PlotRow:
    low, high = item.get("ci_low"), item.get("ci_high")
    return PlotRow(
        label=str(item["term"]),
        kind=kind,
        estimate=item.get("estimate"),
        pieces=((low, high),) if low is not None and high is not None else (),
    )
