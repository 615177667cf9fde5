"""Plain-text report for the terminal.

Layout: a heading block (claim, file, sample, standard errors), the verdict,
the estimates of each focal coefficient under every estimator with intervals,
the key diagnostics, then the checklist section by section, and the caution.
Lines are wrapped to :data:`WIDTH` columns; nothing but ASCII punctuation is
used for structure, so the report reads the same in any terminal or e-mail.
"""

from __future__ import annotations

import textwrap
from collections.abc import Mapping
from typing import Any

from app.review.checklist import Checklist, ChecklistItem
from app.review.formatting import count, number, p_value_cell
from app.review.renderers.common import (
    CAUTION,
    PRODUCT,
    claimed_sentence,
    estimate_lines_by_term,
    estimate_notes,
    interval_text,
    key_diagnostics,
    model_lines,
    note_heading,
    sample_lines,
    standing_words,
)
from app.review.view import FindingsView

WIDTH = 96
INDENT = "    "
NAME_WIDTH = 32
"""Longest estimator name shown in full in the table of estimates."""


def wrap(text: str, *, indent: str = "", hanging: str | None = None) -> list[str]:
    """Wrap ``text`` to the report width."""
    return textwrap.wrap(
        text, width=WIDTH, initial_indent=indent, subsequent_indent=indent if hanging is None else hanging,
        break_on_hyphens=False,
    ) or [indent]


def heading(title: str) -> list[str]:
    return ["", title.upper(), "=" * len(title)]


def render_text(findings: Mapping[str, Any], checklist: Checklist, *, data_file_name: str) -> str:
    """The report as plain text."""
    view = FindingsView(findings)
    verdict = checklist.verdict
    lines = [f"{PRODUCT} re-analysis", ""]
    lines += wrap(f"Claim:  {view.title}", hanging=" " * 8)
    lines += wrap(f"File:   {data_file_name} ({count(view.n_obs)} observations used)", hanging=" " * 8)
    lines += wrap(claimed_sentence(view))
    lines += heading(f"Verdict: {verdict.label}")
    lines += wrap(verdict.summary)
    lines += heading("Model and sample")
    for sentence in [*model_lines(view), *sample_lines(view)]:
        lines += wrap(sentence, indent="  ", hanging="    ")
    lines += _estimates(view)
    diagnostics = key_diagnostics(view)
    if diagnostics:
        lines += heading("Key diagnostics")
        label_width = min(max(len(label) for label, _ in diagnostics) + 2, 44)
        for label, value in diagnostics:
            lines += wrap(f"{label.ljust(label_width, '.')} {value}", indent="  ", hanging="  " + " " * (label_width + 1))
    lines += heading("Checklist")
    for _, title, items in checklist.sections():
        lines += ["", f"-- {title} " + "-" * max(0, WIDTH - len(title) - 4)]
        for item in items:
            lines += _item(item)
    lines += ["", "-" * WIDTH]
    for sentence in CAUTION:
        lines += wrap(sentence)
    return "\n".join(lines) + "\n"


def _estimates(view: FindingsView) -> list[str]:
    out: list[str] = []
    for term, lines in estimate_lines_by_term(view).items():
        out += heading(f"Effect of {term} on {view.outcome}")
        out.append(f"  standard errors: {view.variance_label}")
        width = min(max(len("estimator"), *(len(line.label) for line in lines)), NAME_WIDTH) + 2
        header = f"  {'':2}{'estimator':<{width}}{'estimate':>11}{'std. error':>12}   {'95% interval':<26}{'p-value':>10}"
        out += ["", header, "  " + "-" * (len(header) - 2)]
        for line in lines:
            marker = "->" if line.claimed else ""
            out.append(
                f"  {marker:2}{_fit(line.label, width - 2):<{width}}{number(line.estimate):>11}{number(line.std_error):>12}   "
                f"{interval_text(line):<26}{p_value_cell(line.p_value):>10}"
            )
        if any(line.claimed for line in lines):
            out.append("  (-> the estimator the claim reports)")
        for note in estimate_notes(lines):
            out += wrap(note, indent="  ", hanging="    ")
    return out


def _fit(name: str, width: int) -> str:
    return name if len(name) <= width else name[: width - 3] + "..."


def _item(item: ChecklistItem) -> list[str]:
    tag = f"[{standing_words(item)}]"
    out = [""]
    out += wrap(f"{item.item}  {tag}", indent="  ", hanging="    ")
    out += wrap(item.evidence, indent=INDENT)
    if item.question and item.effective_standing not in ("sound", "not_applicable"):
        out += wrap(f"Ask: {item.question}", indent=INDENT, hanging=INDENT + "     ")
    if item.judgement and item.judgement.note:
        out += wrap(f"{note_heading(item.judgement)}: {item.judgement.note}", indent=INDENT)
    if item.effective_standing != "not_applicable":
        out += wrap(f"Rule: {item.rule} ({item.source})", indent=INDENT)
    return out
