"""The report formats, looked up by name (the CLI's ``--format`` and the web export use this registry).

Every renderer has the signature
``render(findings: dict, checklist: Checklist, *, data_file_name: str) -> str``.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

from app.review.renderers.html import render_html
from app.review.renderers.json import render_json
from app.review.renderers.markdown import render_markdown
from app.review.renderers.script import render_script
from app.review.renderers.text import render_text


@dataclass(frozen=True)
class ReportFormat:
    """One export format of the review."""

    name: str
    media_type: str
    extension: str
    render: Callable[..., str]
    description: str = ""


REPORT_FORMATS: dict[str, ReportFormat] = {
    report.name: report
    for report in (
        ReportFormat("text", "text/plain; charset=utf-8", ".txt", render_text, "plain-text report for the terminal"),
        ReportFormat("markdown", "text/markdown; charset=utf-8", ".md", render_markdown, "Markdown to paste into a referee report"),
        ReportFormat("html", "text/html; charset=utf-8", ".html", render_html, "standalone printable page"),
        ReportFormat("json", "application/json", ".json", render_json, "findings with the checklist and verdict"),
        ReportFormat("script", "text/x-python; charset=utf-8", ".py", render_script, "Python script that recomputes the key numbers"),
    )
}
