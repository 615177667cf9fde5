"""HTML pages. Each route validates its input, calls one service and renders the result.

Every page links its JSON twin (the same service result under ``/api/v1``).
Forms post back here and redirect on success; on a problem they are shown
again with the reviewer's input kept and the problems listed. Every route
acts as the signed-in person (:func:`app.web.identity.services`), and the
services check what that person may do.
"""

from __future__ import annotations

from typing import Annotated, Literal

from fastapi import APIRouter, Depends, Form, Request
from fastapi.responses import HTMLResponse, Response
from starlette.concurrency import run_in_threadpool

from app.auth.roles import Action
from app.errors import DataFileError
from app.services import cases, checklists, claims, comparison, datasets, refits
from app.services.context import ServiceContext
from app.services.errors import FileTooLarge, InvalidInput, NotFound, Problem
from app.services.views import ClaimEditor
from app.web import figures, presenters
from app.web.claim_form import ClaimForm
from app.web.identity import services, upload_services
from app.web.params import FormRowId, QueryRowId, RowId, row_id
from app.web.rendering import case_page_cached, form_lists, is_htmx, render, see_other
from app.web.templating import dom_id
from app.web.uploads import receive_dataset

router = APIRouter(include_in_schema=False)
Services = Annotated[ServiceContext, Depends(services)]
UploadServices = Annotated[ServiceContext, Depends(upload_services)]


# -- cases -------------------------------------------------------------------


@router.get("/", name="cases_page")
def cases_page(
    request: Request,
    ctx: Services,
    q: str = "",
    verdict: str = "",
    sort: Literal[cases.SORT_KEYS] = "activity",  # type: ignore[valid-type]
    order: Literal["asc", "desc"] = "desc",
) -> HTMLResponse:
    overview = cases.list_cases(ctx, query=q, verdict=verdict or None, sort=sort, descending=order == "desc")
    twin = str(request.app.url_path_for("api_list_cases"))
    if request.url.query:
        twin += f"?{request.url.query}"
    return render(request, "cases.html", json_twin=twin, page=overview)


@router.get("/cases/new", name="new_case_page")
def new_case_page(request: Request, ctx: Services) -> HTMLResponse:
    cases.ensure_may_open(ctx)
    # A form has no data to mirror: its twin is the API description of the request it sends.
    twin = str(request.app.url_path_for("openapi"))
    return render(request, "case_new.html", json_twin=twin, values={}, problems=[])


@router.post("/cases", name="create_case_form")
def create_case_form(
    request: Request,
    ctx: Services,
    title: Annotated[str, Form()] = "",
    reference: Annotated[str, Form()] = "",
    notes: Annotated[str, Form()] = "",
) -> Response:
    try:
        detail = cases.create_case(ctx, title=title, reference=reference, notes=notes)
    except InvalidInput as error:
        values = {"title": title, "reference": reference, "notes": notes}
        twin = str(request.app.url_path_for("openapi"))
        return render(
            request, "case_new.html", json_twin=twin, values=values, problems=error.problems, status_code=422
        )
    return see_other(str(request.app.url_path_for("case_page", case_id=str(detail.case.id))))


@router.get("/cases/{case_id}", name="case_page")
def case_page(request: Request, ctx: Services, case_id: RowId) -> Response:
    def build() -> HTMLResponse:
        detail = cases.get_case(ctx, case_id=case_id)
        twin = str(request.app.url_path_for("api_get_case", case_id=str(case_id)))
        return render(request, "case.html", json_twin=twin, page=detail)

    return case_page_cached(request, ctx, case_id=case_id, render=build)


@router.get("/cases/{case_id}/delete", name="delete_case_page")
def delete_case_page(request: Request, ctx: Services, case_id: RowId) -> HTMLResponse:
    detail = cases.get_case(ctx, case_id=case_id, need=Action.MANAGE)
    twin = str(request.app.url_path_for("api_get_case", case_id=str(case_id)))
    return render(request, "case_delete.html", json_twin=twin, page=detail)


@router.post("/cases/{case_id}/delete", name="delete_case_form")
def delete_case_form(request: Request, ctx: Services, case_id: RowId) -> Response:
    cases.delete_case(ctx, case_id=case_id)
    return see_other(str(request.app.url_path_for("cases_page")))


# -- datasets ------------------------------------------------------------------


@router.get("/cases/{case_id}/datasets/new", name="upload_page")
def upload_page(request: Request, ctx: Services, case_id: RowId) -> HTMLResponse:
    detail = cases.get_case(ctx, case_id=case_id, need=Action.EDIT)
    twin = str(request.app.url_path_for("api_get_case", case_id=str(case_id)))
    return render(request, "upload.html", json_twin=twin, page=detail, problem=None)


@router.post("/cases/{case_id}/datasets", name="upload_form")
async def upload_form(request: Request, ctx: UploadServices, case_id: RowId) -> Response:
    try:
        uploaded = await receive_dataset(request, ctx, case_id=case_id)
    except DataFileError as error:
        detail = await run_in_threadpool(cases.get_case, ctx, case_id=case_id)
        status = 413 if isinstance(error, FileTooLarge) else 422
        twin = str(request.app.url_path_for("api_get_case", case_id=str(case_id)))
        return render(request, "upload.html", json_twin=twin, page=detail, problem=str(error), status_code=status)
    path = request.app.url_path_for("dataset_page", case_id=str(case_id), dataset_id=str(uploaded.dataset.id))
    return see_other(str(path))


@router.get("/cases/{case_id}/datasets/{dataset_id}", name="dataset_page")
def dataset_page(request: Request, ctx: Services, case_id: RowId, dataset_id: RowId) -> HTMLResponse:
    detail = datasets.get_dataset(ctx, case_id=case_id, dataset_id=dataset_id)
    twin = str(request.app.url_path_for("api_get_dataset", case_id=str(case_id), dataset_id=str(dataset_id)))
    return render(request, "dataset.html", json_twin=twin, page=detail)


# -- claims --------------------------------------------------------------------


@router.get("/cases/{case_id}/claims/new", name="new_claim_page")
def new_claim_page(request: Request, ctx: Services, case_id: RowId, dataset_id: QueryRowId | None = None) -> HTMLResponse:
    editor = claims.claim_editor(ctx, case_id=case_id, dataset_id=dataset_id)
    return _claim_form(request, editor, form=ClaimForm.blank(), problems=[])


@router.get("/cases/{case_id}/claims/{claim_id}/revise", name="revise_claim_page")
def revise_claim_page(
    request: Request, ctx: Services, case_id: RowId, claim_id: RowId, dataset_id: QueryRowId | None = None
) -> HTMLResponse:
    editor = claims.claim_editor(ctx, case_id=case_id, dataset_id=dataset_id, claim_id=claim_id)
    form = ClaimForm.from_spec(editor.base.spec) if editor.base is not None else ClaimForm.blank()
    return _claim_form(request, editor, form=form, problems=[])


@router.post("/cases/{case_id}/claims", name="create_claim_form")
async def create_claim_form(request: Request, ctx: Services, case_id: RowId) -> Response:
    return await _submit_claim(request, ctx, case_id=case_id, claim_id=None)


@router.post("/cases/{case_id}/claims/{claim_id}/revise", name="revise_claim_form")
async def revise_claim_form(request: Request, ctx: Services, case_id: RowId, claim_id: RowId) -> Response:
    return await _submit_claim(request, ctx, case_id=case_id, claim_id=claim_id)


@router.post("/cases/{case_id}/claims/check", name="check_claim_form")
async def check_claim_form(request: Request, ctx: Services, case_id: RowId) -> HTMLResponse:
    """Inline validation while the form is filled in (htmx); nothing is stored."""
    fields = form_lists(await request.form())
    editor = await run_in_threadpool(
        claims.claim_editor, ctx, case_id=case_id, dataset_id=_int(fields, "dataset_id")
    )
    form = ClaimForm.from_submission(fields, editor.columns)
    spec, problems = form.to_spec(editor.columns)
    problems += await run_in_threadpool(_spec_problems, ctx, editor, spec, known=problems)
    return render(request, "_claim_problems.html", json_twin=None, problems=problems, checked=True)


@router.get("/cases/{case_id}/claims/{claim_id}", name="claim_page")
def claim_page(request: Request, ctx: Services, case_id: RowId, claim_id: RowId) -> HTMLResponse:
    detail = claims.get_claim(ctx, case_id=case_id, claim_id=claim_id)
    twin = str(request.app.url_path_for("api_get_claim", case_id=str(case_id), claim_id=str(claim_id)))
    return render(request, "claim.html", json_twin=twin, page=detail)


async def _submit_claim(request: Request, ctx: ServiceContext, *, case_id: RowId, claim_id: int | None) -> Response:
    fields = form_lists(await request.form())
    editor = await run_in_threadpool(
        claims.claim_editor, ctx, case_id=case_id, dataset_id=_int(fields, "dataset_id"), claim_id=claim_id
    )
    form = ClaimForm.from_submission(fields, editor.columns)
    spec, problems = form.to_spec(editor.columns)
    if problems:
        problems += await run_in_threadpool(_spec_problems, ctx, editor, spec, known=problems)
        return _claim_form(request, editor, form=form, problems=problems, status_code=422)
    try:
        if claim_id is None:
            detail = await run_in_threadpool(
                claims.create_claim, ctx, case_id=case_id, dataset_id=editor.dataset.id, spec=spec
            )
        else:
            detail = await run_in_threadpool(
                claims.revise_claim,
                ctx,
                case_id=case_id,
                claim_id=claim_id,
                dataset_id=editor.dataset.id,
                spec=spec,
                change_note=form.change_note,
            )
    except InvalidInput as error:
        return _claim_form(request, editor, form=form, problems=error.problems, status_code=422)
    if "refit" in fields.get("then", []):
        refit = await run_in_threadpool(
            refits.start_refit, ctx, case_id=case_id, claim_id=detail.claim.id, dataset_id=editor.dataset.id
        )
        return see_other(str(request.app.url_path_for("refit_page", case_id=str(case_id), refit_id=str(refit.id))))
    return see_other(
        str(request.app.url_path_for("claim_page", case_id=str(case_id), claim_id=str(detail.claim.id)))
    )


def _spec_problems(
    ctx: ServiceContext, editor: ClaimEditor, spec: dict[str, object], *, known: list[Problem]
) -> list[Problem]:
    """The claim service's problems with the spec, except on fields the form already reported."""
    check = claims.check_claim(ctx, case_id=editor.case.id, dataset_id=editor.dataset.id, spec=spec)
    reported = {problem.field for problem in known if problem.field}
    return [Problem(field=item.field, message=item.message) for item in check.problems if item.field not in reported]


def _claim_form(
    request: Request, editor: ClaimEditor, *, form: ClaimForm, problems: list[Problem], status_code: int = 200
) -> HTMLResponse:
    params = {"case_id": str(editor.case.id)}
    twin = str(request.app.url_path_for("api_claim_editor", **params)) + f"?dataset_id={editor.dataset.id}"
    if editor.base is not None:
        twin += f"&claim_id={editor.base.id}"
    return render(
        request,
        "claim_form.html",
        json_twin=twin,
        page=editor,
        form=form,
        problems=problems,
        status_code=status_code,
    )


def _int(fields: dict[str, list[str]], name: str) -> int | None:
    values = fields.get(name) or []
    return row_id(values[0]) if values else None


# -- refits --------------------------------------------------------------------


@router.post("/cases/{case_id}/refits", name="start_refit_form")
def start_refit_form(
    request: Request,
    ctx: Services,
    case_id: RowId,
    claim_id: FormRowId,
    dataset_id: FormRowId,
) -> Response:
    refit = refits.start_refit(ctx, case_id=case_id, claim_id=claim_id, dataset_id=dataset_id)
    return see_other(str(request.app.url_path_for("refit_page", case_id=str(case_id), refit_id=str(refit.id))))


@router.get("/cases/{case_id}/refits/{refit_id}", name="refit_page")
def refit_page(request: Request, ctx: Services, case_id: RowId, refit_id: RowId) -> Response:
    def build() -> HTMLResponse:
        results = refits.get_refit(ctx, case_id=case_id, refit_id=refit_id)
        twin = str(request.app.url_path_for("api_get_refit", case_id=str(case_id), refit_id=str(refit_id)))
        return render(
            request,
            "refit.html",
            json_twin=twin,
            page=results,
            stages=refits.STAGES,
            **presenters.results_body(results.findings or {}),
        )

    return case_page_cached(request, ctx, case_id=case_id, render=build)


@router.get("/cases/{case_id}/refits/{refit_id}/progress", name="refit_progress")
def refit_progress(request: Request, ctx: Services, case_id: RowId, refit_id: RowId) -> HTMLResponse:
    """The progress box alone (polled by htmx); once the refit is over, htmx reloads the page."""
    refit = refits.refit_status(ctx, case_id=case_id, refit_id=refit_id)
    response = render(request, "_refit_progress.html", json_twin=None, refit=refit, stages=refits.STAGES)
    if refit.state in ("finished", "failed"):
        response.headers["HX-Refresh"] = "true"
    return response


@router.get("/cases/{case_id}/refits/{refit_id}/figures/{figure}.svg", name="refit_figure")
def refit_figure(
    request: Request, ctx: Services, case_id: RowId, refit_id: RowId, figure: Literal["estimates", "first-stage"]
) -> Response:
    refits.refit_status(ctx, case_id=case_id, refit_id=refit_id)  # NotFound before any cached figure is served

    def draw() -> str | None:
        return figures.figure_svg(refits.get_refit(ctx, case_id=case_id, refit_id=refit_id).findings, figure=figure)

    svg = request.app.state.figures.get_or_render((refit_id, figure), draw)
    if svg is None:
        raise NotFound(f"refit {refit_id} has no {figure} figure")
    return Response(svg, media_type="image/svg+xml")


# -- checklist -------------------------------------------------------------------


@router.get("/cases/{case_id}/refits/{refit_id}/checklist", name="checklist_page")
def checklist_page(request: Request, ctx: Services, case_id: RowId, refit_id: RowId) -> Response:
    def build() -> HTMLResponse:
        view = checklists.get_checklist(ctx, case_id=case_id, refit_id=refit_id)
        twin = str(request.app.url_path_for("api_get_checklist", case_id=str(case_id), refit_id=str(refit_id)))
        return render(request, "checklist.html", json_twin=twin, page=view)

    return case_page_cached(request, ctx, case_id=case_id, render=build)


@router.post("/cases/{case_id}/refits/{refit_id}/checklist/{item_id}", name="judgement_form")
def judgement_form(
    request: Request,
    ctx: Services,
    case_id: RowId,
    refit_id: RowId,
    item_id: str,
    standing: Annotated[str, Form()] = "",
    note: Annotated[str, Form()] = "",
    loaded_at: Annotated[str | None, Form()] = None,
) -> Response:
    """Save one item's judgement; the form's ``loaded_at`` is the version it shows (a stale save gets 409)."""
    saved = checklists.save_judgement(
        ctx,
        case_id=case_id,
        refit_id=refit_id,
        item_id=item_id,
        standing=standing or None,
        note=note,
        loaded=None if loaded_at is None else checklists.LoadedVersion.from_text(loaded_at),
    )
    if is_htmx(request):
        return render(request, "_judgement_saved.html", json_twin=None, saved=saved)
    path = request.app.url_path_for("checklist_page", case_id=str(case_id), refit_id=str(refit_id))
    return see_other(f"{path}#item-{dom_id(item_id)}")


# -- comparison ------------------------------------------------------------------


@router.get("/cases/{case_id}/compare", name="compare_page")
def compare_page(
    request: Request,
    ctx: Services,
    case_id: RowId,
    before: QueryRowId,
    after: QueryRowId,
) -> HTMLResponse:
    view = comparison.compare_refits(ctx, case_id=case_id, before_id=before, after_id=after)
    twin = str(request.app.url_path_for("api_compare_refits", case_id=str(case_id)))
    twin += f"?before={before}&after={after}"
    return render(request, "compare.html", json_twin=twin, page=view)


# -- API reference ---------------------------------------------------------------


@router.get("/api", name="api_page", dependencies=[Depends(services)])
def api_page(request: Request) -> HTMLResponse:
    schema = request.app.openapi()
    twin = str(request.app.url_path_for("openapi"))
    return render(request, "api.html", json_twin=twin, schema=schema)
