"""The JSON API under /api/v1: the twin of every page, documented by OpenAPI.

Each route validates its body with a pydantic model, calls one service and
returns the service's view. Errors share one shape (:class:`app.web.errors.ErrorBody`).

Requests are made either with the browser's sign-in cookie (state-changing
ones then need the ``X-CSRF-Token`` header) or with ``Authorization: Bearer
<API token>`` (tokens are created on the account page). Every request acts as
that person: a case they may not see answers 404, an action their role does
not allow 403.
"""

from __future__ import annotations

from datetime import datetime
from typing import Annotated, Any, Literal

from fastapi import APIRouter, Depends, Query, Request, status
from fastapi.responses import Response
from pydantic import BaseModel, ConfigDict, Field

from app.services import (
    access,
    audit,
    cases,
    checklists,
    claims,
    comparison,
    datasets,
    lifecycle,
    refits,
    session_links,
    users,
)
from app.services.context import ServiceContext
from app.services.views import (
    AccessInfo,
    AccountView,
    AuditTrail,
    CaseDetail,
    CaseOverview,
    ChecklistView,
    ClaimCheck,
    ClaimDetail,
    ClaimEditor,
    Comparison,
    DatasetDetail,
    FollowView,
    JudgementSaved,
    RefitInfo,
    RefitResults,
    SessionLinkInfo,
    SessionLinkOpened,
    UserList,
)
from app.web.errors import ErrorBody
from app.web.identity import services, upload_services
from app.web.params import MAX_ROW_ID, QueryRowId, RowId
from app.web.uploads import receive_dataset

ERROR_RESPONSES: dict[int | str, dict[str, Any]] = {
    401: {"model": ErrorBody, "description": "No valid sign-in cookie or API token"},
    403: {"model": ErrorBody, "description": "Your role may not do this, or the form token is missing"},
    404: {"model": ErrorBody, "description": "No such case (or not one you may see), or nothing of that id in it"},
    409: {
        "model": ErrorBody,
        "description": "The refit has not finished (or failed), the case is closed, or someone else changed "
        "the judgement after it was loaded",
    },
    413: {"model": ErrorBody, "description": "The upload is larger than the server accepts"},
    422: {"model": ErrorBody, "description": "Invalid input; `problems` names each field"},
}

router = APIRouter(prefix="/api/v1", responses=ERROR_RESPONSES)
Services = Annotated[ServiceContext, Depends(services)]
UploadServices = Annotated[ServiceContext, Depends(upload_services)]


class Body(BaseModel):
    """Request bodies refuse unknown fields."""

    model_config = ConfigDict(extra="forbid")


class NewCase(Body):
    title: str = Field(description="What the manuscript claims, in a few words")
    reference: str = Field(default="", description="The journal's manuscript reference")
    notes: str = ""


class NewClaim(Body):
    dataset_id: int = Field(ge=1, le=MAX_ROW_ID, description="The dataset version whose columns the claim names")
    spec: dict[str, Any] = Field(description="The claim spec (see app/spec.py): variables by role, never formulas")


class ClaimVersion(NewClaim):
    change_note: str = Field(default="", description="Why the claim changed")


class NewRefit(Body):
    claim_id: int = Field(ge=1, le=MAX_ROW_ID)
    dataset_id: int = Field(ge=1, le=MAX_ROW_ID)


class SessionLinkInput(Body):
    hours: int = Field(default=3, description="How long the link stays valid")
    label: str = Field(default="", description="What the session is, e.g. the journal club's date")


class JudgementInput(Body):
    standing: Literal["sound", "concern", "serious"] | None = Field(
        default=None, description="The reviewer's own standing; null leaves the automatic one"
    )
    note: str = Field(default="", max_length=checklists.MAX_NOTE_LENGTH)
    loaded_at: datetime | None = Field(
        default=None,
        description="The item's `saved_at` when you read it (null: it had no judgement). When given, the save is "
        "refused with 409 if someone saved the item since; when left out, the save overwrites whatever is stored",
    )

    def loaded(self) -> checklists.LoadedVersion | None:
        """The version the client started from, when it named one."""
        return checklists.LoadedVersion(self.loaded_at) if "loaded_at" in self.model_fields_set else None


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
def get_case(ctx: Services, case_id: RowId) -> CaseDetail:
    """A case with its datasets, claims (every version), refits and history."""
    return cases.get_case(ctx, case_id=case_id)


@router.delete("/cases/{case_id}", name="api_delete_case", status_code=status.HTTP_204_NO_CONTENT)
def delete_case(ctx: Services, case_id: RowId) -> Response:
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
async def upload_dataset(request: Request, ctx: UploadServices, case_id: RowId) -> DatasetDetail:
    """Upload a replication file (CSV/TSV, Stata, SPSS, SAS, Excel, Parquet) as the next data version."""
    return await receive_dataset(request, ctx, case_id=case_id)


@router.get("/cases/{case_id}/datasets/{dataset_id}", name="api_get_dataset")
def get_dataset(ctx: Services, case_id: RowId, dataset_id: RowId) -> DatasetDetail:
    """A dataset version with its variable profile."""
    return datasets.get_dataset(ctx, case_id=case_id, dataset_id=dataset_id)


@router.get("/cases/{case_id}/claims/editor", name="api_claim_editor")
def claim_editor(
    ctx: Services, case_id: RowId, dataset_id: QueryRowId | None = None, claim_id: QueryRowId | None = None
) -> ClaimEditor:
    """What the claim form offers: the dataset's columns and, when revising, the version being edited."""
    return claims.claim_editor(ctx, case_id=case_id, dataset_id=dataset_id, claim_id=claim_id)


@router.post("/cases/{case_id}/claims/check", name="api_check_claim")
def check_claim(ctx: Services, case_id: RowId, body: NewClaim) -> ClaimCheck:
    """Validate a claim against a dataset version without storing it."""
    return claims.check_claim(ctx, case_id=case_id, dataset_id=body.dataset_id, spec=body.spec)


@router.post("/cases/{case_id}/claims", name="api_create_claim", status_code=status.HTTP_201_CREATED)
def create_claim(ctx: Services, case_id: RowId, body: NewClaim) -> ClaimDetail:
    """Store a new claim (version 1)."""
    return claims.create_claim(ctx, case_id=case_id, dataset_id=body.dataset_id, spec=body.spec)


@router.get("/cases/{case_id}/claims/{claim_id}", name="api_get_claim")
def get_claim(ctx: Services, case_id: RowId, claim_id: RowId) -> ClaimDetail:
    """A claim version, its other versions, what changed from the previous one, and its refits."""
    return claims.get_claim(ctx, case_id=case_id, claim_id=claim_id)


@router.post(
    "/cases/{case_id}/claims/{claim_id}/versions", name="api_revise_claim", status_code=status.HTTP_201_CREATED
)
def revise_claim(ctx: Services, case_id: RowId, claim_id: RowId, body: ClaimVersion) -> ClaimDetail:
    """Add a new version of a claim; earlier versions and their refits stay as they were."""
    return claims.revise_claim(
        ctx,
        case_id=case_id,
        claim_id=claim_id,
        dataset_id=body.dataset_id,
        spec=body.spec,
        change_note=body.change_note,
    )


@router.post(
    "/cases/{case_id}/refits",
    name="api_start_refit",
    status_code=status.HTTP_201_CREATED,
    responses={
        201: {"description": "The refit is over (state finished or failed) and comes back complete"},
        202: {"model": RefitInfo, "description": "The refit goes on in the background: poll it at `Location`"},
    },
)
def start_refit(ctx: Services, request: Request, response: Response, case_id: RowId, body: NewRefit) -> RefitInfo:
    """Refit a claim version on a dataset version.

    A refit that is over within the server's short wait answers 201 with its
    state; a longer one answers 202 and goes on in the background: poll its
    `Location` until the state is finished or failed.
    """
    refit = refits.start_refit(ctx, case_id=case_id, claim_id=body.claim_id, dataset_id=body.dataset_id)
    response.headers["Location"] = str(request.url_for("api_get_refit", case_id=str(case_id), refit_id=str(refit.id)).path)
    if refit.state not in refits.OVER:
        response.status_code = status.HTTP_202_ACCEPTED
    return refit


@router.get("/cases/{case_id}/refits/{refit_id}", name="api_get_refit")
def get_refit(ctx: Services, case_id: RowId, refit_id: RowId) -> RefitResults:
    """A refit's state and, once finished, its findings."""
    return refits.get_refit(ctx, case_id=case_id, refit_id=refit_id)


@router.get("/cases/{case_id}/refits/{refit_id}/checklist", name="api_get_checklist")
def get_checklist(ctx: Services, case_id: RowId, refit_id: RowId) -> ChecklistView:
    """The checklist of a finished refit with the reviewer's judgements and the verdict."""
    return checklists.get_checklist(ctx, case_id=case_id, refit_id=refit_id)


@router.put("/cases/{case_id}/refits/{refit_id}/judgements/{item_id}", name="api_save_judgement")
def save_judgement(
    ctx: Services, case_id: RowId, refit_id: RowId, item_id: str, body: JudgementInput
) -> JudgementSaved:
    """Set the reviewer's standing and note on one checklist item (empty standing and note clear it).

    Send the item's `saved_at` as `loaded_at` so that a save never silently replaces someone else's newer one.
    """
    return checklists.save_judgement(
        ctx,
        case_id=case_id,
        refit_id=refit_id,
        item_id=item_id,
        standing=body.standing,
        note=body.note,
        loaded=body.loaded(),
    )


@router.get(
    "/cases/{case_id}/refits/{refit_id}/reports/{format_name}",
    name="api_export_report",
    response_class=Response,
    responses={200: {"description": "The report as a file to download"}},
)
def export_report(ctx: Services, case_id: RowId, refit_id: RowId, format_name: str) -> Response:
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
    case_id: RowId,
    before: Annotated[int, Query(ge=1, le=MAX_ROW_ID, description="The earlier refit")],
    after: Annotated[int, Query(ge=1, le=MAX_ROW_ID, description="The later refit")],
) -> Comparison:
    """What changed between two refits of a case (data, claim, packages, estimates, verdict) and why."""
    return comparison.compare_refits(ctx, case_id=case_id, before_id=before, after_id=after)


@router.post("/cases/{case_id}/close", name="api_close_case")
def close_case(ctx: Services, case_id: RowId) -> CaseDetail:
    """Close a finished review: the case becomes read-only, and the retention period starts."""
    return lifecycle.close_case(ctx, case_id=case_id)


@router.post("/cases/{case_id}/reopen", name="api_reopen_case")
def reopen_case(ctx: Services, case_id: RowId) -> CaseDetail:
    """Reopen a closed case so that it can change again."""
    return lifecycle.reopen_case(ctx, case_id=case_id)


@router.put("/cases/{case_id}/access/{user_id}", name="api_grant_access")
def grant_access(ctx: Services, case_id: RowId, user_id: RowId) -> AccessInfo:
    """Give a referee or reader access to a case."""
    return access.grant_access(ctx, case_id=case_id, user_id=user_id)


@router.delete("/cases/{case_id}/access/{user_id}", name="api_withdraw_access", status_code=status.HTTP_204_NO_CONTENT)
def withdraw_access(ctx: Services, case_id: RowId, user_id: RowId) -> Response:
    """Withdraw someone's access to a case."""
    access.withdraw_access(ctx, case_id=case_id, user_id=user_id)
    return Response(status_code=status.HTTP_204_NO_CONTENT)


@router.get("/cases/{case_id}/audit", name="api_case_audit")
def case_audit(ctx: Services, case_id: RowId, limit: int = audit.DEFAULT_LIMIT) -> AuditTrail:
    """The case's audit trail, newest first: who did what, when, from where."""
    return audit.case_trail(ctx, case_id=case_id, limit=limit)


@router.post(
    "/cases/{case_id}/refits/{refit_id}/links",
    name="api_open_session_link",
    status_code=status.HTTP_201_CREATED,
)
def open_session_link(ctx: Services, case_id: RowId, refit_id: RowId, body: SessionLinkInput) -> SessionLinkOpened:
    """Open a read-only journal-club link to a finished refit; it opens at /follow/{key} (the key is shown only now)."""
    return session_links.open_link(ctx, case_id=case_id, refit_id=refit_id, hours=body.hours, label=body.label)


@router.delete("/cases/{case_id}/links/{link_id}", name="api_withdraw_session_link")
def withdraw_session_link(ctx: Services, case_id: RowId, link_id: RowId) -> SessionLinkInfo:
    """Withdraw a session link at once."""
    return session_links.withdraw_link(ctx, case_id=case_id, link_id=link_id)


@router.get("/follow/{key}", name="api_follow")
def follow(request: Request, key: str) -> FollowView:
    """What a session link shows (no sign-in: the key is the permission): results, checklist, verdict."""
    return session_links.follow(request.app.state.services, key=key)


@router.get("/me", name="api_me")
def me(ctx: Services) -> AccountView:
    """Your account, role and API tokens."""
    return users.account(ctx)


@router.get("/people", name="api_list_people")
def list_people(ctx: Services) -> UserList:
    """Every account of the server (stewards only)."""
    return users.list_users(ctx)


@router.get("/audit", name="api_server_audit")
def server_audit(ctx: Services, limit: int = audit.DEFAULT_LIMIT) -> AuditTrail:
    """The server's audit trail, newest first: sign-ins and failures, accounts, deletions, every case (stewards only)."""
    return audit.server_trail(ctx, limit=limit)
