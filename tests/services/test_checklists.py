"""Checklists: built from stored findings; the reviewer's judgements persist and move the verdict."""

from __future__ import annotations

import json
from datetime import UTC, datetime

import pytest

from app.auth.actors import Actor
from app.auth.roles import Role
from app.review.checklist import build_checklist
from app.review.reports import REPORT_FORMATS
from app.services import cases, checklists, refits
from app.services.context import ServiceContext
from app.services.errors import InvalidInput, NotFound
from app.store.models import Refit
from tests.accounts import add_account
from tests.services.conftest import Reviewed


def test_the_checklist_is_the_review_packages_reading_of_the_findings(ctx: ServiceContext, reviewed: Reviewed) -> None:
    view = checklists.get_checklist(ctx, case_id=reviewed.case_id, refit_id=reviewed.refit_id)
    findings = refits.get_refit(ctx, case_id=reviewed.case_id, refit_id=reviewed.refit_id).findings
    assert findings is not None

    with ctx.reading() as session:
        variants = session.get_one(Refit, reviewed.refit_id).variants
    expected = build_checklist(findings, variants=variants)
    items = [item for section in view.sections for item in section.items]
    assert [item["id"] for item in items] == [item.id for item in expected.items]
    assert [item["standing"] for item in items] == [item.standing for item in expected.items]
    assert view.verdict["code"] == expected.verdict.code
    assert view.judged_items == 0 and view.total_items == len(expected.items)
    assert [fmt.name for fmt in view.report_formats] == list(REPORT_FORMATS)


def test_a_judgement_survives_reloading_and_moves_the_summary(ctx: ServiceContext, reviewed: Reviewed) -> None:
    view = checklists.get_checklist(ctx, case_id=reviewed.case_id, refit_id=reviewed.refit_id)
    target = next(
        item for section in view.sections for item in section.items if item["effective_standing"] != "serious"
    )
    serious_before = refits.refit_status(ctx, case_id=reviewed.case_id, refit_id=reviewed.refit_id).serious_items

    saved = checklists.save_judgement(
        ctx,
        case_id=reviewed.case_id,
        refit_id=reviewed.refit_id,
        item_id=target["id"],
        standing="serious",
        note="Table 2 uses a different sample; ask for it.",
    )

    assert saved.item["effective_standing"] == "serious"
    assert saved.judged_items == 1
    reloaded = checklists.get_checklist(ctx, case_id=reviewed.case_id, refit_id=reviewed.refit_id)
    item = next(item for section in reloaded.sections for item in section.items if item["id"] == target["id"])
    assert item["judgement"] == {"standing": "serious", "note": "Table 2 uses a different sample; ask for it."}
    summary = refits.refit_status(ctx, case_id=reviewed.case_id, refit_id=reviewed.refit_id)
    assert summary.serious_items == (serious_before or 0) + 1
    assert cases.list_cases(ctx).cases[0].serious_items == summary.serious_items


def test_clearing_a_judgement_restores_the_automatic_standing(ctx: ServiceContext, reviewed: Reviewed) -> None:
    view = checklists.get_checklist(ctx, case_id=reviewed.case_id, refit_id=reviewed.refit_id)
    item = view.sections[0].items[0]
    arguments = {"case_id": reviewed.case_id, "refit_id": reviewed.refit_id, "item_id": item["id"]}

    checklists.save_judgement(ctx, **arguments, standing="sound", note="checked")
    cleared = checklists.save_judgement(ctx, **arguments, standing=None, note="  ")

    assert cleared.item["judgement"] is None
    assert cleared.item["effective_standing"] == item["standing"]
    assert cleared.judged_items == 0


def test_a_note_without_a_standing_is_kept(ctx: ServiceContext, reviewed: Reviewed) -> None:
    item_id = checklists.get_checklist(ctx, case_id=reviewed.case_id, refit_id=reviewed.refit_id).sections[0].items[0]["id"]
    saved = checklists.save_judgement(
        ctx, case_id=reviewed.case_id, refit_id=reviewed.refit_id, item_id=item_id, standing="", note="Ask about rounding."
    )
    assert saved.item["judgement"] == {"standing": None, "note": "Ask about rounding."}


@pytest.mark.parametrize(
    ("standing", "note", "field"),
    [("proven", "", "standing"), ("sound", "x" * (checklists.MAX_NOTE_LENGTH + 1), "note")],
)
def test_invalid_judgements_are_refused(
    ctx: ServiceContext, reviewed: Reviewed, standing: str, note: str, field: str
) -> None:
    item_id = checklists.get_checklist(ctx, case_id=reviewed.case_id, refit_id=reviewed.refit_id).sections[0].items[0]["id"]
    with pytest.raises(InvalidInput) as caught:
        checklists.save_judgement(
            ctx, case_id=reviewed.case_id, refit_id=reviewed.refit_id, item_id=item_id, standing=standing, note=note
        )
    assert [problem.field for problem in caught.value.problems] == [field]


def test_a_judgement_on_an_unknown_item_is_not_found(ctx: ServiceContext, reviewed: Reviewed) -> None:
    with pytest.raises(NotFound, match="no checklist item 'relevance.horoscope'"):
        checklists.save_judgement(
            ctx, case_id=reviewed.case_id, refit_id=reviewed.refit_id, item_id="relevance.horoscope", standing="sound", note=""
        )


def test_the_markdown_report_carries_the_reviewers_note(ctx: ServiceContext, reviewed: Reviewed) -> None:
    item_id = checklists.get_checklist(ctx, case_id=reviewed.case_id, refit_id=reviewed.refit_id).sections[0].items[0]["id"]
    checklists.save_judgement(
        ctx, case_id=reviewed.case_id, refit_id=reviewed.refit_id, item_id=item_id, standing="concern", note="Ask for the do-file."
    )

    report = checklists.export_report(ctx, case_id=reviewed.case_id, refit_id=reviewed.refit_id, format_name="markdown")

    assert report.file_name == f"secondstage-case{reviewed.case_id}-refit{reviewed.refit_id}.md"
    assert report.media_type.startswith("text/markdown")
    assert "Ask for the do-file." in report.content
    assert "walking.csv" in report.content


def test_exported_notes_name_their_author_and_save_time(ctx: ServiceContext, reviewed: Reviewed) -> None:
    name = "ana <b>kim</b>"
    user_id = add_account(ctx, "ana", "coordinator")
    ana = ctx.acting_as(Actor(name=name, kind="user", role=Role.COORDINATOR, user_id=user_id, via="web session"))
    item_id = checklists.get_checklist(ctx, case_id=reviewed.case_id, refit_id=reviewed.refit_id).sections[0].items[0]["id"]
    saved = checklists.save_judgement(
        ana, case_id=reviewed.case_id, refit_id=reviewed.refit_id, item_id=item_id, standing="concern", note="Ask for the do-file."
    )
    minute = saved.saved_at.astimezone(UTC).strftime("%Y-%m-%d %H:%M UTC")

    def export(format_name: str) -> str:
        return checklists.export_report(ctx, case_id=reviewed.case_id, refit_id=reviewed.refit_id, format_name=format_name).content

    document = json.loads(export("json"))
    judgement = next(item["judgement"] for item in document["checklist"] if item["id"] == item_id)
    assert judgement["author"] == name
    assert datetime.fromisoformat(judgement["saved_at"]) == saved.saved_at
    assert f"Reviewer's note ({name}, {minute}): Ask for the do-file." in " ".join(export("text").split())
    assert f"Reviewer's note (ana &lt;b&gt;kim&lt;/b&gt;, {minute}): Ask for the do-file." in export("html").replace("&#x27;", "'")
    assert saved.item["judgement"] == {"standing": "concern", "note": "Ask for the do-file."}, "the view names the author once, in saved_by"
    assert saved.item["saved_by"] == name


def test_an_unknown_report_format_is_not_found(ctx: ServiceContext, reviewed: Reviewed) -> None:
    with pytest.raises(NotFound, match="no report format 'docx'"):
        checklists.export_report(ctx, case_id=reviewed.case_id, refit_id=reviewed.refit_id, format_name="docx")


def test_saving_as_one_types_leaves_one_line_in_the_history(ctx: ServiceContext, reviewed: Reviewed) -> None:
    item_id = checklists.get_checklist(ctx, case_id=reviewed.case_id, refit_id=reviewed.refit_id).sections[0].items[0]["id"]
    for note in ("Ask", "Ask for", "Ask for the code."):
        checklists.save_judgement(
            ctx, case_id=reviewed.case_id, refit_id=reviewed.refit_id, item_id=item_id, standing=None, note=note
        )
    kinds = [event.kind for event in cases.get_case(ctx, case_id=reviewed.case_id).events]
    assert kinds.count("judgement_saved") == 1
