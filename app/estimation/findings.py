"""Findings: what a refit produced, as plain frozen data with a JSON form.

Field names are shared everywhere: ``estimate, std_error, statistic,
p_value, ci_low, ci_high, df, distribution, null_hypothesis, standing,
reason, source``. Non-finite numbers never reach JSON: :func:`jsonable`
turns them into ``null`` and the result that holds them carries a reason.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field
from enum import Enum, StrEnum
from typing import Any

import numpy as np

SCHEMA_VERSION = 1


class Standing(StrEnum):
    """Whether a diagnostic could be computed."""

    COMPUTED = "computed"
    NOT_APPLICABLE = "not_applicable"
    UNDEFINED = "undefined"


@dataclass(frozen=True)
class EstimateRow:
    """One coefficient under one estimator."""

    estimator: str
    term: str
    estimate: float
    std_error: float
    statistic: float
    p_value: float
    ci_low: float
    ci_high: float
    df: int | None
    distribution: str


@dataclass(frozen=True)
class EstimatorSummary:
    """Facts about one estimator's fit."""

    code: str
    name: str
    description: str
    n_params: int | None
    df_resid: int | None
    residual_std: float | None
    kappa: float | None = None
    source: str = ""
    available: bool = True
    reason: str | None = None

    @classmethod
    def unavailable(cls, code: str, name: str, description: str, reason: str) -> EstimatorSummary:
        """An estimator that could not be computed on these data, with the reason."""
        return cls(
            code=code,
            name=name,
            description=description,
            n_params=None,
            df_resid=None,
            residual_std=None,
            available=False,
            reason=reason,
        )


@dataclass(frozen=True)
class TestResult:
    """A diagnostic test or statistic.

    ``df`` is a number, a pair ``[df1, df2]`` for F tests, or None.
    ``details`` holds further fields that are merged into the JSON object.
    """

    name: str
    statistic: float | None
    p_value: float | None
    df: float | list[float] | None
    distribution: str | None
    null_hypothesis: str
    source: str
    standing: Standing = Standing.COMPUTED
    reason: str | None = None
    details: dict[str, Any] = field(default_factory=dict)

    @classmethod
    def not_applicable(cls, name: str, reason: str, *, source: str = "", null_hypothesis: str = "") -> TestResult:
        """A test that cannot apply to this claim, with the reason in words."""
        return cls(
            name=name,
            statistic=None,
            p_value=None,
            df=None,
            distribution=None,
            null_hypothesis=null_hypothesis,
            source=source,
            standing=Standing.NOT_APPLICABLE,
            reason=reason,
        )

    @classmethod
    def undefined(cls, name: str, reason: str, *, source: str = "", null_hypothesis: str = "") -> TestResult:
        """A test that applies but cannot be computed on these data (e.g. a singular matrix)."""
        return dataclasses.replace(
            cls.not_applicable(name, reason, source=source, null_hypothesis=null_hypothesis),
            standing=Standing.UNDEFINED,
        )

    def to_dict(self) -> dict[str, Any]:
        data = {
            "name": self.name,
            "statistic": self.statistic,
            "p_value": self.p_value,
            "df": self.df,
            "distribution": self.distribution,
            "null_hypothesis": self.null_hypothesis,
            "standing": self.standing.value,
            "reason": self.reason,
            "source": self.source,
        }
        data.update(self.details)
        return jsonable(data)


@dataclass(frozen=True)
class Findings:
    """Everything a refit produced."""

    n_obs: int
    design: str
    outcome: str
    focal: list[str]
    sample: dict[str, Any]
    covariance: dict[str, Any]
    estimators: list[EstimatorSummary]
    estimates: list[EstimateRow]
    diagnostics: dict[str, Any]
    warnings: list[str]
    claim: dict[str, Any]
    provenance: dict[str, Any]

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form with the schema version first."""
        return jsonable(
            {
                "schema_version": SCHEMA_VERSION,
                "n_obs": self.n_obs,
                "design": self.design,
                "outcome": self.outcome,
                "focal": self.focal,
                "sample": self.sample,
                "covariance": self.covariance,
                "estimators": self.estimators,
                "estimates": self.estimates,
                "diagnostics": self.diagnostics,
                "warnings": self.warnings,
                "claim": self.claim,
                "provenance": self.provenance,
            }
        )

    def rows_for(self, term: str) -> list[EstimateRow]:
        """The rows of one coefficient across estimators."""
        return [row for row in self.estimates if row.term == term]


def jsonable(value: Any) -> Any:
    """Convert results to JSON-safe builtins; NaN and infinities become None."""
    if isinstance(value, TestResult):
        return value.to_dict()
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return {f.name: jsonable(getattr(value, f.name)) for f in dataclasses.fields(value)}
    if isinstance(value, Enum):
        return value.value
    if isinstance(value, dict):
        return {str(k): jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [jsonable(v) for v in value]
    if isinstance(value, np.ndarray):
        return [jsonable(v) for v in value.tolist()]
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        number = float(value)
        return number if math.isfinite(number) else None
    return value
