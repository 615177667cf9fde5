"""Markdown report, ready to paste into a referee report.

Order: verdict and summary paragraph; the comparison of estimators; key
diagnostics; the points to raise with the authors (items that are not sound,
each with its drafted question); points left to the reviewer; the full
checklist as a table; the caution. Table cells escape ``|`` and never hold a
line break, so the tables survive any Markdown renderer that supports them.
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from typing import Any

from app.review.checklist import Checklist
from app.review.formatting import number, p_value_cell
from app.review.renderers.common import (
    CAUTION,
    PRODUCT,
    awaiting_judgement,
    claimed_sentence,
    estimate_lines_by_term,
    estimate_notes,
    interval_text,
    key_diagnostics,
    model_lines,
    note_heading,
    open_items,
    sample_lines,
    standing_words,
)
from app.review.view import FindingsView

_EMPHASIS_UNDERSCORE = re.compile(r"(?<![0-9A-Za-z])_|_(?![0-9A-Za-z])")
_TAG_START = re.compile(r"<(?=[A-Za-z/!?])")
_BLOCK_START = re.compile(r"^(?=[#+-](?:\s|$)|>|=+\s*$)")
_ORDERED_START = re.compile(r"^(\d+)(?=[.)](?:\s|$))")


def inline(text: object) -> str:
    """Running text with the few characters escaped that would start Markdown markup.

    Escaping is kept minimal so that the raw text stays readable when pasted
    into a plain-text referee form: underscores inside names (``daily_steps``)
    and brackets are left alone, since they start no markup there.
    """
    escaped = str(text).replace("\\", "\\\\").replace("`", "\\`").replace("*", "\\*").replace("](", "\\](")
    escaped = _EMPHASIS_UNDERSCORE.sub(r"\\_", escaped)
    escaped = _TAG_START.sub(r"\\<", escaped)
    escaped = _ORDERED_START.sub(r"\1\\", escaped)  # "1. " becomes "1\. ": a backslash before a digit would show
    return _BLOCK_START.sub("\\\\", escaped)


def cell(text: object) -> str:
    """Text safe inside a Markdown table cell: on one line, with ``|`` escaped."""
    return inline(" ".join(str(text).split())).replace("|", "\\|")


def render_markdown(findings: Mapping[str, Any], checklist: Checklist, *, data_file_name: str) -> str:
    """The report as Markdown text."""
    view = FindingsView(findings)
    verdict = checklist.verdict
    lines = [
        f"# Re-analysis of the claim: {inline(view.title)}",
        "",
        f"**Verdict: {inline(verdict.label)}.** {inline(verdict.summary)}",
        "",
        "## Summary",
        "",
        inline(
            f"{claimed_sentence(view)} We refitted the stated model on the replication file {data_file_name} "
            f"({view.n_obs or 0:,} observations used) with {_fitted(view)} and ran the published diagnostics. "
            f"{_flag_count(checklist)}"
        ),
        "",
        *(f"- {inline(line)}" for line in model_lines(view)),
        *(f"- {inline(line)}" for line in sample_lines(view)),
        "",
    ]
    lines += _estimates_table(view)
    diagnostics = key_diagnostics(view)
    if diagnostics:
        lines += ["## Key diagnostics", "", "| Diagnostic | Result |", "| --- | --- |"]
        lines += [f"| {cell(label)} | {cell(value)} |" for label, value in diagnostics]
        lines.append("")
    lines += _points_to_raise(checklist)
    lines += _left_to_reviewer(checklist)
    lines += ["## Full checklist", "", "| Section | Item | Reading | Evidence |", "| --- | --- | --- | --- |"]
    titles = {section: title for section, title, _ in checklist.sections()}
    for item in checklist.items:
        reading = standing_words(item)
        if item.judgement and item.judgement.note:
            reading += f". {note_heading(item.judgement)}: {item.judgement.note}"
        lines.append(f"| {cell(titles[item.section])} | {cell(item.item)} | {cell(reading)} | {cell(item.evidence)} |")
    lines += ["", "---", "", *(f"*{inline(sentence)}*" for sentence in CAUTION), ""]
    lines.append(f"*Prepared with {PRODUCT}; every number above can be recomputed with its reproduction script.*")
    return "\n".join(lines) + "\n"


def _fitted(view: FindingsView) -> str:
    """The estimators fitted to the focal coefficient, by name: "OLS, 2SLS and LIML"."""
    names = [line.name for line in estimate_lines_by_term(view).get(view.focal_term or "", [])]
    if not names:
        return "the design's estimators"
    return names[0] if len(names) == 1 else f"{', '.join(names[:-1])} and {names[-1]}"


def _flag_count(checklist: Checklist) -> str:
    flagged = open_items(checklist)
    if not flagged:
        return "No automatic check raised a point to put to the authors."
    noun = "point" if len(flagged) == 1 else "points"
    return f"{len(flagged)} {noun} below should be put to the authors."


def _estimates_table(view: FindingsView) -> list[str]:
    out = []
    for term, lines in estimate_lines_by_term(view).items():
        out += [
            f"## Estimates of the effect of {inline(term)}",
            "",
            f"Standard errors: {inline(view.variance_label)}.",
            "",
            "| Estimator | Estimate | Std. error | 95% interval | p-value |",
            "| --- | ---: | ---: | --- | ---: |",
        ]
        for line in lines:
            name = f"{line.label} (claimed)" if line.claimed else line.label
            out.append(
                f"| {cell(name)} | {cell(number(line.estimate))} | {cell(number(line.std_error))} | "
                f"{cell(interval_text(line))} | {cell(p_value_cell(line.p_value))} |"
            )
        out.append("")
        out += [item for note in estimate_notes(lines) for item in (inline(note), "")]
    return out


def _points_to_raise(checklist: Checklist) -> list[str]:
    flagged = open_items(checklist)
    if not flagged:
        return []
    out = ["## Points to raise with the authors", ""]
    for number_, item in enumerate(flagged, start=1):
        out += [f"### {number_}. {inline(item.item)} ({inline(standing_words(item))})", "", inline(item.evidence), ""]
        if item.question:
            out += [f"**Question to the authors.** {inline(item.question)}", ""]
        if item.judgement and item.judgement.note:
            # On one line, as in the table: a typed line break must not start a heading or a list.
            note = " ".join(item.judgement.note.split())
            out += [f"**{inline(note_heading(item.judgement))}.** {inline(note)}", ""]
        out += [f"*Rule: {inline(item.rule)} Source: {inline(item.source)}.*", ""]
    return out


def _left_to_reviewer(checklist: Checklist) -> list[str]:
    waiting = awaiting_judgement(checklist)
    if not waiting:
        return []
    out = ["## Points for the reviewer's own judgement", ""]
    for item in waiting:
        out.append(f"- **{inline(item.item)}.** {inline(item.question or item.rule)}")
    return [*out, ""]
