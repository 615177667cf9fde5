"""The claim specification: the model as the manuscript states it.

A claim names variables by role in structured fields. Nothing in a claim is
ever evaluated as code: filters are ``{column, op, value}`` triples applied by
:func:`app.data.design.apply_filters`.

The spec is loaded from JSON or TOML (:func:`load_claim`) or built from web
form fields; unknown fields are refused with a message that names them.
"""

from __future__ import annotations

import difflib
import json
import re
import tomllib
from decimal import Decimal, InvalidOperation
from enum import StrEnum
from pathlib import Path
from typing import Annotated, Any, Literal

from pydantic import (
    BaseModel,
    BeforeValidator,
    ConfigDict,
    Field,
    ValidationError,
    field_validator,
    model_validator,
)

from app.errors import SpecError

ESTIMATOR_CODES = ("ols", "2sls", "liml", "fuller1", "fuller4", "gmm")
"""Estimator codes of the IV engine, in the order rows are reported."""

PANEL_ESTIMATOR_CODES = ("pooled_ols", "within", "random_effects", "within_2sls")
SELECTION_ESTIMATOR_CODES = ("heckman_two_step", "control_function")
MEDIATION_ESTIMATOR_CODES = ("ols_with_treatment",)
ALL_ESTIMATOR_CODES = ESTIMATOR_CODES + PANEL_ESTIMATOR_CODES + SELECTION_ESTIMATOR_CODES + MEDIATION_ESTIMATOR_CODES


class FilterOp(StrEnum):
    """Comparison operators allowed in a row filter."""

    EQ = "=="
    NE = "!="
    LT = "<"
    LE = "<="
    GT = ">"
    GE = ">="
    IN = "in"


class CovarianceKind(StrEnum):
    """Variance estimators a claim may state (see :mod:`app.estimation.covariance`)."""

    HOMOSKEDASTIC = "homoskedastic"
    ROBUST = "robust"
    CLUSTER = "cluster"


class Design(StrEnum):
    """The study designs SecondStage can refit."""

    IV = "iv"
    REGRESSION = "regression"
    MEDIATION = "mediation"
    PANEL = "panel"
    SELECTION = "selection"


Scalar = float | int | str | bool


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


class RowFilter(_Strict):
    """Keep the rows where ``column op value`` holds."""

    column: str
    op: FilterOp
    value: Scalar | list[Scalar]

    @model_validator(mode="after")
    def _value_matches_op(self) -> RowFilter:
        if self.op is FilterOp.IN and not isinstance(self.value, list):
            raise ValueError("the 'in' operator needs a list of values")
        if self.op is not FilterOp.IN and isinstance(self.value, list):
            raise ValueError(f"the '{self.op.value}' operator needs a single value, not a list")
        return self

    def describe(self) -> str:
        """Human-readable form, e.g. ``year >= 2010``."""
        return f"{self.column} {self.op.value} {self.value!r}"


class CategoricalControl(_Strict):
    """A control expanded to indicators; ``reference`` is the omitted level."""

    column: str
    reference: Scalar | None = None


def _categorical_from_text(value: Any) -> Any:
    return {"column": value} if isinstance(value, str) else value


_NUMBER_TEXT = re.compile(r"^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$")


def _reported_number(value: Any) -> Any:
    """Keep a reported number as the text the manuscript printed.

    The printed digits matter: a claimed ``0.13`` matches any refit from
    0.1250 to 0.1349, a claimed ``0.130`` only 0.1295 to 0.1305.
    """
    if value is None:
        return None
    if isinstance(value, bool):
        raise ValueError("a reported number cannot be true/false")
    if isinstance(value, (int, float)):
        text = repr(value)
    elif isinstance(value, str):
        text = value.strip().replace("\u2212", "-")
    else:
        raise ValueError("a reported number must be a number or its printed text")
    if not _NUMBER_TEXT.match(text):
        raise ValueError(f"{value!r} is not a number as printed (e.g. 0.13, -1.25, 3e-4)")
    try:
        if not Decimal(text).is_finite():
            raise ValueError(f"{value!r} is not a finite number")
    except InvalidOperation as error:
        raise ValueError(f"{value!r} is not a number") from error
    return text


ReportedNumber = Annotated[str | None, BeforeValidator(_reported_number)]


class ClaimedNumbers(_Strict):
    """What the manuscript reports for the focal coefficient.

    Numbers are kept as printed text (see :func:`_reported_number`).
    """

    estimator: Literal[ALL_ESTIMATOR_CODES] | None = None  # type: ignore[valid-type]
    term: str | None = None
    estimate: ReportedNumber = None
    std_error: ReportedNumber = None
    n_obs: int | None = Field(default=None, ge=1)
    first_stage_f: ReportedNumber = None


class SensitivityOptions(_Strict):
    """Settings for the omitted-cause sensitivity analyses.

    Defaults follow Cinelli & Hazlett (2020) (q = 1, alpha = 0.05, k = 1, 2, 3)
    and Oster (2019) (delta = 1, R_max = min(1, 1.3 R-tilde squared)).
    """

    q: float = Field(default=1.0, gt=0)
    alpha: float = Field(default=0.05, gt=0, lt=1)
    multipliers: list[float] = Field(default_factory=lambda: [1.0, 2.0, 3.0])
    delta: float = 1.0
    r2_max_factor: float = Field(default=1.3, gt=1)
    r2_max: float | None = Field(default=None, gt=0, le=1)


class BootstrapOptions(_Strict):
    """Wild cluster bootstrap settings (used when clusters are few)."""

    replications: int = Field(default=9999, ge=99, le=99999)
    seed: int = 20240611


class ClaimSpec(_Strict):
    """The model as the authors state it.

    Attributes
    ----------
    outcome
        Dependent variable.
    endogenous
        Focal regressors the claim is about (treated as endogenous when
        instruments are given).
    instruments
        Excluded instruments; empty for a plain regression.
    controls, categorical
        Included exogenous regressors; categorical ones are expanded to
        indicators with a stated reference level.
    fixed_effects, cluster
        Up to two columns each: absorbed effects and cluster identifiers.
    weights
        Analytic weights (rows weighted by w, i.e. scaled by sqrt(w)).
    filters
        Structured row filters, applied before listwise deletion.
    covariance
        The variance estimator the manuscript says it used.
    claimed
        The numbers the manuscript reports.
    """

    title: str | None = Field(default=None, max_length=300)
    design: Design = Design.IV
    outcome: str
    endogenous: list[str] = Field(default_factory=list)
    instruments: list[str] = Field(default_factory=list)
    controls: list[str] = Field(default_factory=list)
    categorical: list[Annotated[CategoricalControl, BeforeValidator(_categorical_from_text)]] = Field(
        default_factory=list
    )
    intercept: bool = True
    fixed_effects: list[str] = Field(default_factory=list, max_length=2)
    cluster: list[str] = Field(default_factory=list, max_length=2)
    weights: str | None = None
    filters: list[RowFilter] = Field(default_factory=list)
    covariance: CovarianceKind = CovarianceKind.ROBUST
    claimed: ClaimedNumbers | None = None

    # instrument validity (issue: instruments)
    pre_treatment: list[str] = Field(default_factory=list)
    instrument_subsets: list[list[str]] = Field(default_factory=list)
    direct_effect_bound: float | None = Field(default=None, ge=0)
    bootstrap: BootstrapOptions = Field(default_factory=BootstrapOptions)

    # design-specific roles
    unit: str | None = None
    time: str | None = None
    selected: str | None = None
    selection_covariates: list[str] = Field(default_factory=list)
    treatment: list[str] = Field(default_factory=list)
    mediator: str | None = None
    benchmarks: list[str] = Field(default_factory=list)
    sensitivity: SensitivityOptions = Field(default_factory=SensitivityOptions)

    @field_validator("fixed_effects", "cluster")
    @classmethod
    def _at_most_two(cls, value: list[str]) -> list[str]:
        if len(set(value)) != len(value):
            raise ValueError("the same column is named twice")
        return value

    @model_validator(mode="after")
    def _roles_are_consistent(self) -> ClaimSpec:
        if self.covariance is CovarianceKind.CLUSTER and not self.cluster:
            raise ValueError("covariance 'cluster' needs one or two 'cluster' columns")
        if self.cluster and self.covariance is not CovarianceKind.CLUSTER:
            raise ValueError(
                f"'cluster' columns are given but covariance is '{self.covariance.value}'; "
                "set covariance to 'cluster' or remove the cluster columns"
            )
        if self.design is Design.MEDIATION:
            _check_mediation_roles(self)
        elif not self.endogenous:
            raise ValueError("name at least one focal regressor in 'endogenous'")
        if self.design is Design.PANEL and not self.unit:
            raise ValueError("the panel design needs a 'unit' identifier column")
        if self.design is Design.SELECTION and not (self.selected or self.instruments):
            raise ValueError(
                "the selection design needs a 'selected' indicator column (for a sample that people "
                "select into), or 'instruments' that move a binary focal treatment people choose"
            )
        _check_design_fields(self)
        if self.design in (Design.IV, Design.PANEL) and self.instruments:
            if len(self.instruments) < len(self.endogenous):
                raise ValueError(
                    f"{len(self.instruments)} instrument(s) for {len(self.endogenous)} focal "
                    "regressor(s): an IV model needs at least as many instruments as "
                    "endogenous regressors"
                )
        _check_no_role_overlap(self)
        return self

    @property
    def focal(self) -> list[str]:
        """The regressors whose coefficients the claim is about."""
        if self.design is Design.MEDIATION and self.mediator:
            return [self.mediator]
        return list(self.endogenous)

    @property
    def excluded_instruments(self) -> list[str]:
        """Excluded instruments, with the randomized arms in a mediation design."""
        if self.design is Design.MEDIATION:
            return list(self.treatment)
        return list(self.instruments)

    def used_columns(self) -> list[str]:
        """Every column the claim reads, in a stable order without repeats."""
        names: list[str] = [self.outcome, *self.focal, *self.excluded_instruments, *self.controls]
        names += [c.column for c in self.categorical]
        names += [*self.fixed_effects, *self.cluster]
        names += [self.weights] if self.weights else []
        names += [n for n in (self.unit, self.time, self.selected) if n]
        names += [*self.selection_covariates, *self.pre_treatment, *self.benchmarks]
        return list(dict.fromkeys(names))


def _check_mediation_roles(spec: ClaimSpec) -> None:
    if not spec.treatment:
        raise ValueError(
            "the mediation design needs the randomized 'treatment' column(s): the mediator's "
            "effect is identified only through the randomized assignment"
        )
    if not spec.mediator:
        raise ValueError("the mediation design needs the measured 'mediator' column")
    if spec.instruments or spec.endogenous:
        raise ValueError(
            "in the mediation design name the roles 'treatment' and 'mediator' instead of "
            "'instruments' and 'endogenous'"
        )


DESIGN_FIELDS: dict[str, tuple[Design, ...]] = {
    "unit": (Design.PANEL,),
    "time": (Design.PANEL,),
    "selected": (Design.SELECTION,),
    "selection_covariates": (Design.SELECTION,),
    "treatment": (Design.MEDIATION,),
    "mediator": (Design.MEDIATION,),
}
"""Fields that only some designs read; naming them in another design is refused."""


def _check_design_fields(spec: ClaimSpec) -> None:
    """Refuse fields the design does not use, and settings the panel and selection designs do not support."""
    for field_name, designs in DESIGN_FIELDS.items():
        if getattr(spec, field_name) and spec.design not in designs:
            users = " or ".join(f"'{d.value}'" for d in designs)
            raise ValueError(f"'{field_name}' is used only by the {users} design, not by '{spec.design.value}'")
    if spec.design in (Design.PANEL, Design.SELECTION):
        if spec.fixed_effects:
            hint = (
                "the unit effects come from 'unit'; add time effects as a categorical control on the time column"
                if spec.design is Design.PANEL
                else "add the groups as a categorical control"
            )
            raise ValueError(f"the {spec.design.value} design does not absorb 'fixed_effects': {hint}")
        if spec.weights:
            raise ValueError(f"the {spec.design.value} design does not support analytic 'weights'")
    controls = set(spec.controls) | {c.column for c in spec.categorical}
    for benchmark in spec.benchmarks:
        if benchmark not in controls:
            raise ValueError(
                f"benchmark '{benchmark}' is not a control: the omitted cause is compared with a measured "
                "control of the claim, so name it in 'controls' or 'categorical' too"
            )


def _check_no_role_overlap(spec: ClaimSpec) -> None:
    roles: dict[str, list[str]] = {
        "outcome": [spec.outcome],
        "focal regressor": spec.focal,
        "instrument": spec.excluded_instruments,
        "control": spec.controls + [c.column for c in spec.categorical],
        "unit identifier": [spec.unit] if spec.unit else [],
        "selection indicator": [spec.selected] if spec.selected else [],
    }
    if spec.time and spec.time in [spec.outcome, *spec.focal, *spec.excluded_instruments, *spec.controls, spec.unit]:
        raise ValueError(
            f"column '{spec.time}' is the time identifier and has another role; time effects are added as "
            "a categorical control on it"
        )
    seen: dict[str, str] = {}
    for role, columns in roles.items():
        for column in columns:
            if column in seen and seen[column] != role:
                raise ValueError(f"column '{column}' is both {seen[column]} and {role}")
            if column in seen:
                raise ValueError(f"column '{column}' is named twice as {role}")
            seen[column] = role


def parse_claim(data: dict[str, Any]) -> ClaimSpec:
    """Validate a claim given as a mapping; raise :class:`SpecError` with readable messages."""
    if not isinstance(data, dict):
        raise SpecError("a claim spec must be a mapping of field names to values")
    try:
        return ClaimSpec.model_validate(data)
    except ValidationError as error:
        raise SpecError(format_validation_error(error)) from None


def load_claim(path: Path) -> ClaimSpec:
    """Read a claim spec from a ``.json`` or ``.toml`` file."""
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise SpecError(f"claim spec file not found: {path}") from None
    except UnicodeDecodeError:
        raise SpecError(f"claim spec {path.name} is not UTF-8 text") from None
    try:
        if path.suffix.lower() == ".toml":
            data = tomllib.loads(text)
        else:
            data = json.loads(text)
    except (tomllib.TOMLDecodeError, json.JSONDecodeError) as error:
        kind = "TOML" if path.suffix.lower() == ".toml" else "JSON"
        raise SpecError(f"claim spec {path.name} is not valid {kind}: {error}") from None
    return parse_claim(data)


def format_validation_error(error: ValidationError) -> str:
    """Turn pydantic's errors into one line per problem, naming the field."""
    lines = []
    for item in error.errors():
        location = ".".join(str(part) for part in item["loc"])
        if item["type"] == "extra_forbidden":
            field = str(item["loc"][-1])
            known = _known_fields(item["loc"][:-1])
            hint = difflib.get_close_matches(field, known, n=1)
            suggestion = f" (did you mean '{hint[0]}'?)" if hint else ""
            lines.append(f"unknown field '{location}'{suggestion}")
        elif item["type"] == "missing":
            lines.append(f"missing field '{location}'")
        else:
            message = item["msg"].removeprefix("Value error, ")
            lines.append(f"{location}: {message}" if location else message)
    return "claim spec: " + "; ".join(lines)


def _known_fields(parent: tuple[Any, ...]) -> list[str]:
    nested = {
        "claimed": ClaimedNumbers,
        "sensitivity": SensitivityOptions,
        "bootstrap": BootstrapOptions,
        "filters": RowFilter,
        "categorical": CategoricalControl,
    }
    names = [part for part in parent if isinstance(part, str)]
    model = nested.get(names[-1], ClaimSpec) if names else ClaimSpec
    return list(model.model_fields)
