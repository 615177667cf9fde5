"""Standalone printable HTML report.

One file with its style sheet inline and no external resource (no fonts,
scripts or images from anywhere), so it can be opened offline, printed or
attached to an editorial system. Every piece of text passes through
:func:`html.escape`; the markup is well-formed XML apart from the doctype.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from html import escape
from typing import Any

from app.review.checklist import Checklist, ChecklistItem
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

STYLE = """
body { font-family: Georgia, 'Times New Roman', serif; color: #1d1d1f; max-width: 52rem; margin: 2rem auto;
       padding: 0 1.25rem; line-height: 1.45; }
h1 { font-size: 1.55rem; margin-bottom: 0.3rem; }
h2 { font-size: 1.2rem; border-bottom: 1px solid #c9c9c9; padding-bottom: 0.2rem; margin-top: 2rem; }
h3 { font-size: 1.02rem; margin-bottom: 0.3rem; }
.verdict { border: 2px solid #444; padding: 0.7rem 1rem; margin: 1rem 0; }
.verdict .label { font-weight: bold; font-size: 1.1rem; }
table { border-collapse: collapse; width: 100%; margin: 0.6rem 0; font-size: 0.92rem; }
th, td { border-bottom: 1px solid #dcdcdc; padding: 0.3rem 0.45rem; text-align: left; vertical-align: top; }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
tr.claimed td { font-weight: bold; }
.item { border-left: 5px solid #9a9a9a; padding: 0.2rem 0 0.2rem 0.8rem; margin: 0.9rem 0; page-break-inside: avoid; }
.item.sound { border-left-color: #3f7f5a; }
.item.concern { border-left-color: #c08a1e; }
.item.serious { border-left-color: #a3322b; }
.item.reviewer_judgement { border-left-color: #4a63a0; }
.item .standing { font-variant: small-caps; letter-spacing: 0.03em; }
.item p { margin: 0.25rem 0; }
.meta { color: #555; font-size: 0.88rem; }
.question { font-style: italic; }
footer { margin-top: 2.5rem; border-top: 1px solid #c9c9c9; padding-top: 0.6rem; font-size: 0.88rem; color: #444; }
@media print { body { margin: 0; max-width: none; } h2 { page-break-after: avoid; } }
"""


def tag(name: str, content: str | Iterable[str] = "", **attributes: str) -> str:
    """An element with escaped attribute values; ``content`` must already be safe markup."""
    body = content if isinstance(content, str) else "".join(content)
    attrs = "".join(f' {key.rstrip("_")}="{escape(value, quote=True)}"' for key, value in attributes.items())
    return f"<{name}{attrs}>{body}</{name}>"


def text(value: object) -> str:
    """Escaped text."""
    return escape(str(value), quote=True)


def render_html(findings: Mapping[str, Any], checklist: Checklist, *, data_file_name: str) -> str:
    """The report as a standalone HTML document."""
    view = FindingsView(findings)
    verdict = checklist.verdict
    body = [
        tag("h1", text(f"Re-analysis of the claim: {view.title}")),
        tag("p", text(f"Replication file {data_file_name}; {view.n_obs or 0:,} observations used."), class_="meta"),
        tag(
            "div",
            [tag("div", text(f"Verdict: {verdict.label}"), class_="label"), tag("p", text(verdict.summary))],
            class_="verdict",
        ),
        tag("h2", text("Summary")),
        tag("p", text(claimed_sentence(view))),
        tag("ul", [tag("li", text(line)) for line in [*model_lines(view), *sample_lines(view)]]),
        *_estimates(view),
        *_diagnostics(view),
        *_points_to_raise(checklist),
        *_left_to_reviewer(checklist),
        tag("h2", text("Full checklist")),
        *_full_checklist(checklist),
        tag("footer", [tag("p", text(sentence)) for sentence in CAUTION] + [tag("p", text(f"Prepared with {PRODUCT}."))]),
    ]
    head = tag(
        "head",
        [
            '<meta charset="utf-8" />',
            '<meta name="viewport" content="width=device-width, initial-scale=1" />',
            tag("title", text(f"Re-analysis: {view.title}")),
            tag("style", STYLE),
        ],
    )
    return "<!DOCTYPE html>\n" + tag("html", [head, tag("body", body)], lang="en") + "\n"


def _estimates(view: FindingsView) -> list[str]:
    out = []
    header = tag(
        "tr",
        [tag("th", text(h)) for h in ("Estimator", "Estimate", "Std. error", "95% interval", "p-value")],
    )
    for term, lines in estimate_lines_by_term(view).items():
        rows = [
            tag(
                "tr",
                [
                    tag("td", text(f"{line.label} (claimed)" if line.claimed else line.label)),
                    tag("td", text(number(line.estimate)), class_="num"),
                    tag("td", text(number(line.std_error)), class_="num"),
                    tag("td", text(interval_text(line))),
                    tag("td", text(p_value_cell(line.p_value)), class_="num"),
                ],
                **({"class_": "claimed"} if line.claimed else {}),
            )
            for line in lines
        ]
        out += [
            tag("h2", text(f"Estimates of the effect of {term}")),
            tag("p", text(f"Standard errors: {view.variance_label}."), class_="meta"),
            tag("table", [tag("thead", header), tag("tbody", rows)]),
            *(tag("p", text(note), class_="meta") for note in estimate_notes(lines)),
        ]
    return out


def _diagnostics(view: FindingsView) -> list[str]:
    rows = key_diagnostics(view)
    if not rows:
        return []
    body = [tag("tr", [tag("th", text(label), scope="row"), tag("td", text(value))]) for label, value in rows]
    return [tag("h2", text("Key diagnostics")), tag("table", tag("tbody", body))]


def _item_block(item: ChecklistItem, *, heading: str = "h3") -> str:
    parts = [
        tag(heading, [text(item.item), " ", tag("span", text(f"[{standing_words(item)}]"), class_="standing")]),
        tag("p", text(item.evidence)),
    ]
    if item.question and item.effective_standing != "sound":
        parts.append(tag("p", text(f"Question to the authors: {item.question}"), class_="question"))
    if item.judgement and item.judgement.note:
        parts.append(tag("p", text(f"{note_heading(item.judgement)}: {item.judgement.note}")))
    parts.append(tag("p", text(f"Rule: {item.rule} Source: {item.source}."), class_="meta"))
    parts.append(tag("p", text(item.explanation), class_="meta"))
    return tag("div", parts, class_=f"item {item.effective_standing}", id=item.id)


def _points_to_raise(checklist: Checklist) -> list[str]:
    flagged = open_items(checklist)
    if not flagged:
        return []
    return [tag("h2", text("Points to raise with the authors")), *(_item_block(item) for item in flagged)]


def _left_to_reviewer(checklist: Checklist) -> list[str]:
    waiting = awaiting_judgement(checklist)
    if not waiting:
        return []
    entries = [tag("li", [tag("strong", text(item.item)), text(f" {item.question or item.rule}")]) for item in waiting]
    return [tag("h2", text("Points for the reviewer's own judgement")), tag("ul", entries)]


def _reading(item: ChecklistItem) -> str:
    """The standing, and the reviewer's note when there is one."""
    reading = text(standing_words(item))
    if item.judgement and item.judgement.note:
        reading += tag("p", text(f"{note_heading(item.judgement)}: {item.judgement.note}"), class_="meta")
    return reading


def _full_checklist(checklist: Checklist) -> list[str]:
    out = []
    for _, title, items in checklist.sections():
        out.append(tag("h3", text(title)))
        rows = [
            tag("tr", [tag("td", text(item.item)), tag("td", _reading(item)), tag("td", text(item.evidence))])
            for item in items
        ]
        header = tag("tr", [tag("th", text(h)) for h in ("Item", "Reading", "Evidence")])
        out.append(tag("table", [tag("thead", header), tag("tbody", rows)]))
    return out
