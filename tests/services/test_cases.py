"""Cases: opening, the triage overview (filters, order), reading and deleting."""

from __future__ import annotations

import pytest
from sqlalchemy import func, select

from app.services import cases, refits
from app.services.context import ServiceContext
from app.services.errors import InvalidInput, NotFound
from app.store.models import Claim, Dataset, Event, Judgement, Refit
from tests.services.conftest import Reviewed, simulated_csv, upload


def test_opening_a_case_records_it_in_the_history(ctx: ServiceContext) -> None:
    detail = cases.create_case(ctx, title="  Vouchers raise earnings ", reference="JOE-2026-114")

    assert detail.case.title == "Vouchers raise earnings"
    assert detail.case.reference == "JOE-2026-114"
    assert [event.kind for event in detail.events] == ["case_opened"]
    assert detail.datasets == detail.claims == detail.refits == []


@pytest.mark.parametrize(("fields", "field"), [({"title": "   "}, "title"), ({"title": "t", "reference": "x" * 101}, "reference")])
def test_a_case_needs_a_title_and_a_short_reference(ctx: ServiceContext, fields: dict[str, str], field: str) -> None:
    with pytest.raises(InvalidInput) as caught:
        cases.create_case(ctx, **fields)
    assert [problem.field for problem in caught.value.problems] == [field]
    assert cases.list_cases(ctx).total_cases == 0


def test_an_unknown_case_is_not_found(ctx: ServiceContext) -> None:
    with pytest.raises(NotFound, match="no case 41"):
        cases.get_case(ctx, case_id=41)


def test_the_overview_shows_the_latest_verdict_of_each_case(ctx: ServiceContext, reviewed: Reviewed) -> None:
    cases.create_case(ctx, title="Not yet reviewed")

    overview = cases.list_cases(ctx)

    by_title = {row.title: row for row in overview.cases}
    done = by_title["Walking and blood pressure"]
    refit = refits.refit_status(ctx, case_id=reviewed.case_id, refit_id=reviewed.refit_id)
    assert done.latest_refit_id == reviewed.refit_id
    assert (done.verdict, done.serious_items, done.reproduction) == (refit.verdict, refit.serious_items, refit.reproduction)
    assert done.verdict is not None and done.reproduction is not None
    pending = by_title["Not yet reviewed"]
    assert (pending.verdict, pending.serious_items, pending.latest_refit_id) == (None, None, None)


def test_the_overview_filters_by_text_and_verdict(ctx: ServiceContext, reviewed: Reviewed) -> None:
    cases.create_case(ctx, title="Class size and test scores", reference="AER-77")
    verdict = cases.list_cases(ctx).cases[-1].verdict or ""

    assert [row.reference for row in cases.list_cases(ctx, query="aer-").cases] == ["AER-77"]
    assert [row.id for row in cases.list_cases(ctx, verdict=verdict).cases] == [reviewed.case_id]
    assert [row.title for row in cases.list_cases(ctx, verdict=cases.NOT_REVIEWED).cases] == [
        "Class size and test scores"
    ]
    assert cases.list_cases(ctx, query="nothing like this").total_cases == 2


def test_the_overview_sorts_by_title_and_puts_unreviewed_cases_last_by_verdict(
    ctx: ServiceContext, reviewed: Reviewed
) -> None:
    cases.create_case(ctx, title="Apprenticeships and wages")

    by_title = cases.list_cases(ctx, sort="title", descending=False).cases
    assert [row.title for row in by_title] == ["Apprenticeships and wages", "Walking and blood pressure"]
    by_verdict = cases.list_cases(ctx, sort="verdict").cases
    assert [row.title for row in by_verdict] == ["Walking and blood pressure", "Apprenticeships and wages"]


def test_an_unknown_sort_key_is_refused(ctx: ServiceContext) -> None:
    with pytest.raises(InvalidInput, match="sort must be one of"):
        cases.list_cases(ctx, sort="colour")


def test_deleting_a_case_removes_its_rows_and_files(ctx: ServiceContext, reviewed: Reviewed) -> None:
    detail = cases.get_case(ctx, case_id=reviewed.case_id)
    sha256 = detail.datasets[0].sha256
    assert ctx.files.contains(sha256)

    cases.delete_case(ctx, case_id=reviewed.case_id)

    with pytest.raises(NotFound):
        cases.get_case(ctx, case_id=reviewed.case_id)
    assert not ctx.files.contains(sha256)
    with ctx.reading() as session:
        for model in (Dataset, Claim, Refit, Judgement, Event):
            assert session.scalar(select(func.count()).select_from(model)) == 0, model.__name__


def test_deleting_a_case_keeps_a_file_another_case_holds(ctx: ServiceContext) -> None:
    content = simulated_csv()
    first = cases.create_case(ctx, title="First").case.id
    second = cases.create_case(ctx, title="Second").case.id
    upload(ctx, first, content)
    upload(ctx, second, content)
    sha256 = cases.get_case(ctx, case_id=first).datasets[0].sha256

    cases.delete_case(ctx, case_id=first)

    assert ctx.files.contains(sha256)
    assert cases.get_case(ctx, case_id=second).datasets[0].sha256 == sha256


def test_ids_of_deleted_cases_are_not_reused(ctx: ServiceContext) -> None:
    first = cases.create_case(ctx, title="Gone").case.id
    cases.delete_case(ctx, case_id=first)
    assert cases.create_case(ctx, title="New").case.id != first
