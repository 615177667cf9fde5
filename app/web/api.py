"""The JSON API under /api/v1: the twin of every page, documented by OpenAPI.

Each route validates its body with a pydantic model, calls one service and
returns the service's view. Errors share one shape (:class:`app.web.errors.ErrorBody`).
"""

from __future__ import annotations

from typing import Annotated, Any, Literal

from fastapi import APIRouter, Depends, Query, Request, status
from fastapi.responses import Response
from pydantic import BaseModel, ConfigDict, Field

from app.services import cases, checklists, claims, comparison, datasets, refits
from app.services.context import ServiceContext
from app.services.views import (
    CaseDetail,
    CaseOverview,
    ChecklistView,
    ClaimCheck,
    ClaimDetail,
    ClaimEditor,
    Comparison,
    DatasetDetail,
    JudgementSaved,
    RefitInfo,
    RefitResults,
)
from app.web.errors import ErrorBody
from app.web.rendering import services
from app.web.uploads import receive_dataset

ERROR_RESPONSES: dict[int | str, dict[str, Any]] = {
    404: {"model": ErrorBody, "description": "No such case, or nothing of that id in this case"},
    409: {"model": ErrorBody, "description": "The refit has not finished (or failed)"},
    413: {"model": ErrorBody, "description": "The upload is larger than the server accepts"},
    422: {"model": ErrorBody, "description": "Invalid input; `problems` names each field"},
}

router = APIRouter(prefix="/api/v1", responses=ERROR_RESPONSES)
Services = Annotated[ServiceContext, Depends(services)]


class Body(BaseModel):
    """Request bodies refuse unknown fields."""

    model_config = ConfigDict(extra="forbid")


class NewCase(Body):
    title: str = Field(description="What the manuscript claims, in a few words")
    reference: str = Field(default="", description="The journal's manuscript reference")
    notes: str = ""


class NewClaim(Body):
    dataset_id: int = Field(description="The dataset version whose columns the claim names")
    spec: dict[str, Any] = Field(description="The claim spec (see app/spec.py): variables by role, never formulas")


class ClaimVersion(NewClaim):
    change_note: str = Field(default="", description="Why the claim changed")


class NewRefit(Body):
    claim_id: int
    dataset_id: int


class JudgementInput(Body):
    standing: Literal["sound", "concern", "serious"] | None = Field(
        default=None, description="The reviewer's own standing; null leaves the automatic one"
    )
    note: str = Field(default="", max_length=checklists.MAX_NOTE_LENGTH)


@router.get("/cases", name="api_list_cases")
def list_cases(
    ctx: Services,
    q: str = "",
    verdict: str = "",
    sort: Literal[cases.SORT_KEYS] = "activity",  # type: ignore[valid-type]
    order: Literal["asc", "desc"] = "desc",
) -> CaseOverview:
    """The triage overview: every case with its latest verdict, serious items and reproduction status."""
    return cases.list_cases(ctx, query=q, verdict=verdict or None, sort=sort, descending=order == "desc")


@router.post("/cases", name="api_create_case", status_code=status.HTTP_201_CREATED)
def create_case(ctx: Services, body: NewCase) -> CaseDetail:
    """Open a case for one manuscript."""
    return cases.create_case(ctx, title=body.title, reference=body.reference, notes=body.notes)


@router.get("/cases/{case_id}", name="api_get_case")
def get_case(ctx: Services, case_id: int) -> CaseDetail:
    """A case with its datasets, claims (every version), refits and history."""
    return cases.get_case(ctx, case_id=case_id)


@router.delete("/cases/{case_id}", name="api_delete_case", status_code=status.HTTP_204_NO_CONTENT)
def delete_case(ctx: Services, case_id: int) -> Response:
    """Delete a case, its refits, judgements and (unless another case holds the same bytes) its files."""
    cases.delete_case(ctx, case_id=case_id)
    return Response(status_code=status.HTTP_204_NO_CONTENT)


@router.post(
    "/cases/{case_id}/datasets",
    name="api_upload_dataset",
    status_code=status.HTTP_201_CREATED,
    openapi_extra={
        "requestBody": {
            "required": True,
            "content": {
                "multipart/form-data": {
                    "schema": {
                        "type": "object",
                        "required": ["file"],
                        "properties": {"file": {"type": "string", "format": "binary"}},
                    }
                }
            },
        }
    },
)
async def upload_dataset(request: Request, case_id: int) -> DatasetDetail:
    """Upload a replication file (CSV/TSV, Stata, SPSS, SAS, Excel, Parquet) as the next data version."""
    return await receive_dataset(request, request.app.state.services, case_id=case_id)


@router.get("/cases/{case_id}/datasets/{dataset_id}", name="api_get_dataset")
def get_dataset(ctx: Services, case_id: int, dataset_id: int) -> DatasetDetail:
    """A dataset version with its variable profile."""
    return datasets.get_dataset(ctx, case_id=case_id, dataset_id=dataset_id)


@router.get("/cases/{case_id}/claims/editor", name="api_claim_editor")
def claim_editor(
    ctx: Services, case_id: int, dataset_id: int | None = None, claim_id: int | None = None
) -> ClaimEditor:
    """What the claim form offers: the dataset's columns and, when revising, the version being edited."""
    return claims.claim_editor(ctx, case_id=case_id, dataset_id=dataset_id, claim_id=claim_id)


@router.post("/cases/{case_id}/claims/check", name="api_check_claim")
def check_claim(ctx: Services, case_id: int, body: NewClaim) -> ClaimCheck:
    """Validate a claim against a dataset version without storing it."""
    return claims.check_claim(ctx, case_id=case_id, dataset_id=body.dataset_id, spec=body.spec)


@router.post("/cases/{case_id}/claims", name="api_create_claim", status_code=status.HTTP_201_CREATED)
def create_claim(ctx: Services, case_id: int, body: NewClaim) -> ClaimDetail:
    """Store a new claim (version 1)."""
    return claims.create_claim(ctx, case_id=case_id, dataset_id=body.dataset_id, spec=body.spec)


@router.get("/cases/{case_id}/claims/{claim_id}", name="api_get_claim")
def get_claim(ctx: Services, case_id: int, claim_id: int) -> ClaimDetail:
    """A claim version, its other versions, what changed from the previous one, and its refits."""
    return claims.get_claim(ctx, case_id=case_id, claim_id=claim_id)


@router.post(
    "/cases/{case_id}/claims/{claim_id}/versions", name="api_revise_claim", status_code=status.HTTP_201_CREATED
)
def revise_claim(ctx: Services, case_id: int, claim_id: int, body: ClaimVersion) -> ClaimDetail:
    """Add a new version of a claim; earlier versions and their refits stay as they were."""
    return claims.revise_claim(
        ctx,
        case_id=case_id,
        claim_id=claim_id,
        dataset_id=body.dataset_id,
        spec=body.spec,
        change_note=body.change_note,
    )


@router.post("/cases/{case_id}/refits", name="api_start_refit", status_code=status.HTTP_202_ACCEPTED)
def start_refit(ctx: Services, case_id: int, body: NewRefit) -> RefitInfo:
    """Refit a claim version on a dataset version; poll the refit until its state is finished or failed."""
    return refits.start_refit(ctx, case_id=case_id, claim_id=body.claim_id, dataset_id=body.dataset_id)


@router.get("/cases/{case_id}/refits/{refit_id}", name="api_get_refit")
def get_refit(ctx: Services, case_id: int, refit_id: int) -> RefitResults:
    """A refit's state and, once finished, its findings."""
    return refits.get_refit(ctx, case_id=case_id, refit_id=refit_id)


@router.get("/cases/{case_id}/refits/{refit_id}/checklist", name="api_get_checklist")
def get_checklist(ctx: Services, case_id: int, refit_id: int) -> ChecklistView:
    """The checklist of a finished refit with the reviewer's judgements and the verdict."""
    return checklists.get_checklist(ctx, case_id=case_id, refit_id=refit_id)


@router.put("/cases/{case_id}/refits/{refit_id}/judgements/{item_id}", name="api_save_judgement")
def save_judgement(
    ctx: Services, case_id: int, refit_id: int, item_id: str, body: JudgementInput
) -> JudgementSaved:
    """Set the reviewer's standing and note on one checklist item (empty standing and note clear it)."""
    return checklists.save_judgement(
        ctx, case_id=case_id, refit_id=refit_id, item_id=item_id, standing=body.standing, note=body.note
    )


@router.get(
    "/cases/{case_id}/refits/{refit_id}/reports/{format_name}",
    name="api_export_report",
    response_class=Response,
    responses={200: {"description": "The report as a file to download"}},
)
def export_report(ctx: Services, case_id: int, refit_id: int, format_name: str) -> Response:
    """Download the checklist and findings as Markdown, HTML, JSON, text or a reproduction script."""
    report = checklists.export_report(ctx, case_id=case_id, refit_id=refit_id, format_name=format_name)
    return Response(
        report.content,
        media_type=report.media_type,
        headers={"Content-Disposition": f'attachment; filename="{report.file_name}"'},
    )


@router.get("/cases/{case_id}/compare", name="api_compare_refits")
def compare_refits(
    ctx: Services,
    case_id: int,
    before: Annotated[int, Query(description="The earlier refit")],
    after: Annotated[int, Query(description="The later refit")],
) -> Comparison:
    """What changed between two refits of a case (data, claim, packages, estimates, verdict) and why."""
    return comparison.compare_refits(ctx, case_id=case_id, before_id=before, after_id=after)
