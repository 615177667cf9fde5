"""What services return: one view model per page, also the JSON body of its twin.

Pydantic models so that FastAPI documents them in the OpenAPI schema. Findings,
profiles and checklist items are kept as the plain JSON data the engine and the
review package produce (``dict``), never re-typed here.
"""

from __future__ import annotations

from datetime import datetime
from typing import Any

from pydantic import BaseModel, ConfigDict


class View(BaseModel):
    """Base of every view: immutable, unknown fields refused."""

    model_config = ConfigDict(frozen=True, extra="forbid")


class CaseInfo(View):
    """A case's own fields."""

    id: int
    title: str
    reference: str
    notes: str
    created_at: datetime
    last_activity: datetime


class CaseRow(View):
    """One line of the triage overview: the case and its latest finished refit's reading."""

    id: int
    title: str
    reference: str
    last_activity: datetime
    latest_refit_id: int | None
    verdict: str | None
    verdict_label: str | None
    serious_items: int | None
    reproduction: str | None
    running_refits: int


class CaseOverview(View):
    """The triage overview with the filters and order that produced it."""

    cases: list[CaseRow]
    total_cases: int
    query: str
    verdict: str | None
    sort: str
    descending: bool


class DatasetInfo(View):
    """One uploaded file version (without its profile)."""

    id: int
    case_id: int
    version: int
    original_name: str
    file_format: str
    size_bytes: int
    sha256: str
    n_rows: int
    n_columns: int
    uploaded_at: datetime


class DatasetDetail(View):
    """A dataset version with its variable profile (``app.data.profile.DatasetProfile.to_dict()``)."""

    case: CaseInfo
    dataset: DatasetInfo
    profile: dict[str, Any]


class ClaimInfo(View):
    """One claim version; ``spec`` is the validated claim spec as JSON."""

    id: int
    case_id: int
    number: int
    version: int
    title: str
    spec: dict[str, Any]
    spec_sha256: str
    change_note: str
    drafted_on_id: int | None
    created_at: datetime
    is_latest: bool


class FieldChange(View):
    """A field whose value differs between two versions (values as JSON data)."""

    field: str
    before: Any
    after: Any


class RefitInfo(View):
    """A refit's inputs, state and review summary (without findings)."""

    id: int
    case_id: int
    claim_id: int
    claim_number: int
    claim_version: int
    claim_title: str
    dataset_id: int
    dataset_version: int
    data_file_name: str
    state: str
    stage: str
    error: str | None
    created_at: datetime
    started_at: datetime | None
    finished_at: datetime | None
    verdict: str | None
    verdict_label: str | None
    serious_items: int | None
    reproduction: str | None


class ClaimDetail(View):
    """A claim version, its other versions, what changed from the previous one, and its refits."""

    case: CaseInfo
    claim: ClaimInfo
    versions: list[ClaimInfo]
    changes_from_previous: list[FieldChange]
    datasets: list[DatasetInfo]
    refits: list[RefitInfo]


class ClaimThread(View):
    """All versions of one claim, newest last."""

    number: int
    latest: ClaimInfo
    versions: list[ClaimInfo]


class EventInfo(View):
    """One line of a case's history."""

    at: datetime
    kind: str
    message: str


class CaseDetail(View):
    """The case page: datasets, claims, refits, history."""

    case: CaseInfo
    datasets: list[DatasetInfo]
    claims: list[ClaimThread]
    refits: list[RefitInfo]
    events: list[EventInfo]


class ColumnChoice(View):
    """A column offered in the claim form, with what the profile says about it."""

    name: str
    kind: str
    n_missing: int
    n_distinct: int


class ClaimEditor(View):
    """What the claim form needs: the dataset's columns and, when revising, the current version."""

    case: CaseInfo
    datasets: list[DatasetInfo]
    dataset: DatasetInfo
    columns: list[ColumnChoice]
    base: ClaimInfo | None


class ProblemInfo(View):
    """One validation problem; ``field`` names the claim field when known."""

    field: str | None
    message: str


class ClaimCheck(View):
    """Inline validation of a claim before anything is stored or run."""

    valid: bool
    problems: list[ProblemInfo]
    spec: dict[str, Any] | None


class RefitResults(View):
    """A refit with its findings (``Findings.to_dict()``), or None while running or after a failure."""

    case: CaseInfo
    refit: RefitInfo
    findings: dict[str, Any] | None


class ChecklistSection(View):
    """One section of the checklist with its items (``ChecklistItem.to_dict()`` plus ``effective_standing``)."""

    id: str
    name: str
    items: list[dict[str, Any]]


class ReportFormatInfo(View):
    """An export the checklist page offers."""

    name: str
    extension: str
    media_type: str
    description: str


class ChecklistView(View):
    """The checklist page: verdict, sections, the reviewer's judgements, exports."""

    case: CaseInfo
    refit: RefitInfo
    verdict: dict[str, Any]
    sections: list[ChecklistSection]
    judged_items: int
    total_items: int
    report_formats: list[ReportFormatInfo]


class JudgementSaved(View):
    """The item as it now reads, the verdict after the change, and how many items are judged."""

    item: dict[str, Any]
    verdict: dict[str, Any]
    judged_items: int
    total_items: int
    saved_at: datetime


class ExportedReport(View):
    """A rendered report ready to download."""

    file_name: str
    media_type: str
    content: str


class EstimateChange(View):
    """One estimator's focal estimate in both refits."""

    estimator: str
    term: str
    before: float | None
    after: float | None
    difference: float | None
    before_ci: list[float | None] | None
    after_ci: list[float | None] | None


class StandingChange(View):
    """A checklist item whose standing differs between the two refits."""

    id: str
    item: str
    before: str | None
    after: str | None


class Comparison(View):
    """Two refits of one case side by side: what changed and why."""

    case: CaseInfo
    before: RefitInfo
    after: RefitInfo
    data_changed: bool
    rows_before: int | None
    rows_after: int | None
    claim_changes: list[FieldChange]
    package_changes: list[FieldChange]
    estimates: list[EstimateChange]
    verdict_before: dict[str, Any] | None
    verdict_after: dict[str, Any] | None
    standing_changes: list[StandingChange]
    explanation: list[str]
