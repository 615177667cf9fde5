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
    closed_at: datetime | None


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
    """A dataset version with its variable profile (``app.data.profile.DatasetProfile.to_dict()``).

    In the profile, a variable's ``n_distinct`` is its exact number of
    distinct values, or ``null`` with ``distinct_more_than`` set when there are
    more than that many (the exact count was not taken). Profiles stored before
    ``distinct_more_than`` existed do not have the key; their counts are exact.
    """

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


class PersonInfo(View):
    """Someone who can be given access to a case."""

    user_id: int
    name: str
    full_name: str
    role: str


class AccessInfo(View):
    """A referee or reader given access to a case."""

    user_id: int
    name: str
    full_name: str
    role: str
    granted_at: datetime
    granted_by: str


class SessionLinkInfo(View):
    """A journal-club session link (its key is shown once, when it is opened, and never stored)."""

    id: int
    case_id: int
    refit_id: int
    label: str
    created_by: str
    created_at: datetime
    expires_at: datetime
    revoked_at: datetime | None
    state: str
    """``open``, ``expired`` or ``withdrawn``."""


class CaseDetail(View):
    """The case page: datasets, claims, refits, history; who has access and the session links for those who manage them."""

    case: CaseInfo
    datasets: list[DatasetInfo]
    claims: list[ClaimThread]
    refits: list[RefitInfo]
    events: list[EventInfo]
    access: list[AccessInfo]
    """Filled only for those who may manage the case (referees do not learn who else reviews it)."""
    candidates: list[PersonInfo]
    """Referees and readers who could be given access (for those who may manage the case)."""
    links: list[SessionLinkInfo]
    """Session links of the case: all of them for those who manage it, a referee's own for a referee."""


class ColumnChoice(View):
    """A column offered in the claim form, with what the profile says about it.

    ``n_distinct`` is exact, or ``None`` when the profile says only that there
    are more than ``distinct_more_than`` distinct values.
    """

    name: str
    kind: str
    n_missing: int
    n_distinct: int | None
    distinct_more_than: int | None = None


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
    change_note_before: str
    """Why the earlier refit's claim version was made, as recorded with it (empty for a first version)."""
    change_note_after: str
    """Why the later refit's claim version was made, as recorded with it (empty for a first version)."""
    package_changes: list[FieldChange]
    estimates: list[EstimateChange]
    verdict_before: dict[str, Any] | None
    verdict_after: dict[str, Any] | None
    standing_changes: list[StandingChange]
    explanation: list[str]


class SessionLinkOpened(View):
    """A new session link; its ``key`` (the secret part of its address, ``/follow/{key}``) is shown only this once."""

    link: SessionLinkInfo
    key: str


class FollowedLink(View):
    """What a session link says about itself to those who follow it (not who opened it)."""

    label: str
    expires_at: datetime


class FollowView(View):
    """What a session link shows: one refit's results and checklist, read-only, without data or exports."""

    case_title: str
    case_reference: str
    link: FollowedLink
    refit: RefitInfo
    findings: dict[str, Any]
    verdict: dict[str, Any]
    sections: list[ChecklistSection]
    judged_items: int
    total_items: int


class UserInfo(View):
    """An account (never its password hash)."""

    id: int
    name: str
    full_name: str
    role: str
    created_at: datetime
    password_changed_at: datetime
    open_sessions: int
    active_tokens: int


class RoleInfo(View):
    """A role with what it may do."""

    code: str
    label: str
    description: str


class UserList(View):
    """Every account of the server, and the roles one can have."""

    users: list[UserInfo]
    roles: list[RoleInfo]


class TokenInfo(View):
    """An API token (never its secret): its label, the first characters to recognise it, its state."""

    id: int
    label: str
    hint: str
    created_at: datetime
    expires_at: datetime | None
    last_used_at: datetime | None
    revoked_at: datetime | None
    state: str
    """``active``, ``expired`` or ``revoked``."""


class TokenCreated(View):
    """A new API token; ``secret`` is shown only this once."""

    token: TokenInfo
    secret: str


class AccountView(View):
    """The signed-in person's own account and API tokens."""

    user: UserInfo
    role_description: str
    tokens: list[TokenInfo]


class AuditEntryInfo(View):
    """One line of the audit trail: who, when, from where, what."""

    id: int
    at: datetime
    actor: str
    actor_kind: str
    address: str
    action: str
    case_id: int | None
    subject: str
    detail: str


class AuditTrail(View):
    """A case's audit trail (``case`` set) or the server's (every entry), newest first."""

    case: CaseInfo | None
    entries: list[AuditEntryInfo]
    total_entries: int
    limit: int


class DeletionReport(View):
    """What deleting a case removed, checked afterwards."""

    case_id: int
    rows_removed: dict[str, int]
    files_erased: int
    files_kept_for_other_cases: int
    verified: bool
    """True once nothing of the case was found left in any table or in the file store."""


class PurgeReport(View):
    """Closed cases past the retention period: deleted, or (dry run) to be deleted."""

    retention_days: int | None
    dry_run: bool
    cases: list[CaseInfo]
    deletions: list[DeletionReport]


class BackupReport(View):
    """A backup folder written by ``secondstage backup``."""

    folder: str
    schema_revision: str | None
    cases: int
    files: int
    total_bytes: int


class RestoreReport(View):
    """A data directory brought back by ``secondstage restore``."""

    data_dir: str
    schema_revision: str | None
    cases: int
    files: int
    moved_aside: str | None
    """Where the data directory's previous contents went (``--replace``), to be deleted once all is well."""
