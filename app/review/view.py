"""Safe reading of stored findings.

The checklist reads findings as JSON data (``Findings.to_dict()``), possibly
stored by an older engine that lacked some keys. :class:`FindingsView` is the
only place that knows the layout of that data; every accessor returns None
or an empty value when something is missing, so that a rule can say
"this finding is missing" instead of failing.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from app.review.formatting import count

NAIVE_ESTIMATORS = ("ols", "ols_with_treatment", "pooled_ols", "random_effects")
"""Estimators that treat the focal regressors as uncorrelated with the error."""

INSTRUMENTED_ESTIMATORS = ("2sls", "liml", "fuller1", "fuller4", "gmm", "within_2sls")
"""Estimators that use only the variation the instruments predict."""

DEFAULT_ESTIMATORS_BY_DESIGN = {
    "iv": ("2sls",),
    "mediation": ("2sls",),
    "regression": ("ols",),
    "panel": ("within",),
    "selection": ("heckman_two_step", "control_function"),
}
"""Estimators assumed, first found first, when the claim does not name the one the manuscript reports."""

VARIANCE_WORDS = {
    "homoskedastic": "classical (homoskedastic)",
    "robust": "heteroskedasticity-robust (HC1)",
    "cluster": "cluster-robust",
}


@dataclass(frozen=True)
class Lookup:
    """One diagnostic read from the findings.

    ``state`` is ``missing`` (no such key), ``computed``, ``not_applicable``
    or ``undefined`` (as the engine stored it), or ``malformed`` (present but
    not an object or list).
    """

    key: str
    state: str
    value: Any
    reason: str | None

    @property
    def usable(self) -> bool:
        return self.state == "computed"


class FindingsView:
    """Read-only accessors over a findings dictionary.

    Parameters
    ----------
    findings
        The stored JSON form of a refit (``Findings.to_dict()``).
    variants
        Optional standard errors of the claimed estimator under other variance
        estimators (see :func:`app.review.reproduction.covariance_variants`).
    """

    def __init__(self, findings: Mapping[str, Any], *, variants: Mapping[str, Mapping[str, Any]] | None = None):
        self.findings: Mapping[str, Any] = findings if isinstance(findings, Mapping) else {}
        self.variants: Mapping[str, Mapping[str, Any]] = variants or {}

    # -- the claim ---------------------------------------------------------
    @property
    def claim(self) -> Mapping[str, Any]:
        return _mapping(self.findings.get("claim"))

    @property
    def claimed(self) -> Mapping[str, Any]:
        """The numbers the manuscript reports (printed text), or an empty mapping."""
        return _mapping(self.claim.get("claimed"))

    def claim_names(self, field: str) -> list[str]:
        """A list-of-columns field of the claim (``controls``, ``cluster``...); [] when absent or malformed."""
        value = self.claim.get(field)
        return [str(v) for v in value if isinstance(v, (str, int, float))] if isinstance(value, list) else []

    def claim_name(self, field: str) -> str | None:
        """A single-column field of the claim (``weights``, ``unit``...), or None."""
        value = self.claim.get(field)
        return value if isinstance(value, str) and value else None

    def claim_entries(self, field: str) -> list[Mapping[str, Any]]:
        """A list-of-objects field of the claim (``filters``, ``categorical``); [] when absent or malformed."""
        return _entries(self.claim.get(field))

    def sample_entries(self, field: str) -> list[Mapping[str, Any]]:
        """A list-of-objects field of the sample report (``filters``, ``categorical``)."""
        return _entries(self.sample.get(field))

    @property
    def title(self) -> str:
        title = self.claim.get("title")
        return title if isinstance(title, str) and title.strip() else "Untitled claim"

    @property
    def design(self) -> str:
        design = self.findings.get("design") or self.claim.get("design")
        return design if isinstance(design, str) else "iv"

    @property
    def outcome(self) -> str:
        outcome = self.findings.get("outcome") or self.claim.get("outcome")
        return outcome if isinstance(outcome, str) else "the outcome"

    @property
    def focal_terms(self) -> list[str]:
        focal = self.findings.get("focal")
        if not isinstance(focal, list) or not focal:
            mediator = self.claim_name("mediator")
            focal = self.claim_names("endogenous") or ([mediator] if mediator else [])
        return [str(term) for term in focal] if isinstance(focal, list) else []

    @property
    def focal_term(self) -> str | None:
        """The coefficient the claim is about: the claimed term, else the first focal regressor."""
        term = self.claimed.get("term")
        focal = self.focal_terms
        if isinstance(term, str) and (term in focal or not focal):
            return term
        return focal[0] if focal else None

    @property
    def columns(self) -> Mapping[str, Any]:
        """Column roles of the estimation design (after indicator expansion)."""
        return _mapping(self.sample.get("columns"))

    def design_columns(self, role: str) -> list[str]:
        """Columns of one role in the estimation design (``endogenous``, ``exogenous``...); [] if not recorded."""
        value = self.columns.get(role)
        return [str(v) for v in value] if isinstance(value, list) else []

    @property
    def instruments(self) -> list[str]:
        if isinstance(self.columns.get("instruments"), list):
            return self.design_columns("instruments")
        return self.claim_names("treatment" if self.design == "mediation" else "instruments")

    @property
    def has_instruments(self) -> bool:
        return bool(self.instruments)

    @property
    def claimed_estimator(self) -> str | None:
        """The estimator the manuscript reports: stated, else the design's usual one, else any available."""
        stated = self.claimed.get("estimator")
        if isinstance(stated, str):
            return stated
        defaults = DEFAULT_ESTIMATORS_BY_DESIGN.get(self.design, ())
        if self.design == "iv" and not self.has_instruments:
            defaults = ("ols",)
        for default in defaults:
            if self.row(default) is not None:
                return default
        rows = self.rows_for(self.focal_term)
        return str(rows[0].get("estimator")) if rows else next(iter(defaults), None)

    @property
    def corrected_estimator(self) -> str | None:
        """The design's estimator that allows for the endogeneity it is about (2SLS, within, Heckman...), if fitted."""
        defaults = () if self.design == "iv" and not self.has_instruments else DEFAULT_ESTIMATORS_BY_DESIGN.get(self.design, ())
        fitted = [code for code in defaults if code not in NAIVE_ESTIMATORS and self.row(code) is not None]
        return fitted[0] if fitted else None

    @property
    def claim_uses_instruments(self) -> bool:
        """True when the claimed estimator uses only the variation the instruments predict."""
        return self.claimed_estimator in INSTRUMENTED_ESTIMATORS

    @property
    def claim_is_naive(self) -> bool:
        """True when the claimed estimator treats the focal regressors as exogenous."""
        return self.claimed_estimator in NAIVE_ESTIMATORS

    # -- estimates ---------------------------------------------------------
    @property
    def estimates(self) -> list[Mapping[str, Any]]:
        return _entries(self.findings.get("estimates"))

    def rows_for(self, term: str | None) -> list[Mapping[str, Any]]:
        """Every estimator's row for one coefficient, in stored order."""
        return [row for row in self.estimates if row.get("term") == term] if term else []

    def row(self, estimator: str | None, term: str | None = None) -> Mapping[str, Any] | None:
        """The row of ``estimator`` for ``term`` (default: the focal term), or None."""
        term = term or self.focal_term
        for row in self.rows_for(term):
            if row.get("estimator") == estimator:
                return row
        return None

    def estimator_name(self, code: str | None) -> str:
        """Display name of an estimator code, from the findings' estimator list."""
        for summary in _entries(self.findings.get("estimators")):
            if summary.get("code") == code and summary.get("name"):
                return str(summary["name"])
        return str(code).upper() if code else "the claimed estimator"

    # -- diagnostics -------------------------------------------------------
    @property
    def diagnostics(self) -> Mapping[str, Any]:
        return _mapping(self.findings.get("diagnostics"))

    def lookup(self, key: str) -> Lookup:
        """Read one diagnostic; its state says whether it can be used."""
        if key not in self.diagnostics or self.diagnostics[key] is None:
            return Lookup(key, "missing", None, None)
        value = self.diagnostics[key]
        if isinstance(value, list):
            entries = [entry for entry in value if isinstance(entry, Mapping)]
            if not entries:
                return Lookup(key, "malformed", None, None)
            return Lookup(key, "computed", entries, None)
        if not isinstance(value, Mapping):
            return Lookup(key, "malformed", None, None)
        state = value.get("standing", "computed")
        reason = value.get("reason") if isinstance(value.get("reason"), str) else None
        if state not in ("computed", "not_applicable", "undefined"):
            state = "computed"
        return Lookup(key, state, value, reason)

    def lookup_for(self, key: str, regressor: str | None = None) -> Lookup:
        """Read a diagnostic stored per focal regressor; the entry of ``regressor`` (default: the focal term)."""
        found = self.lookup(key)
        if not isinstance(found.value, list):
            return found
        regressor = regressor or self.focal_term
        entries = [e for e in found.value if e.get("regressor") == regressor] or (
            found.value if len(found.value) == 1 else []
        )
        if not entries:
            return Lookup(key, "missing", None, None)
        entry = entries[0]
        state = entry.get("standing", "computed")
        reason = entry.get("reason") if isinstance(entry.get("reason"), str) else None
        return Lookup(key, state if state in ("computed", "not_applicable", "undefined") else "computed", entry, reason)

    def first_stages(self) -> list[Mapping[str, Any]]:
        """The computed first-stage results, one per focal regressor."""
        found = self.lookup("first_stage")
        if not found.usable:
            return []
        entries = found.value if isinstance(found.value, list) else [found.value]
        return [entry for entry in entries if entry.get("standing", "computed") == "computed"]

    # -- sample and variance -----------------------------------------------
    @property
    def sample(self) -> Mapping[str, Any]:
        return _mapping(self.findings.get("sample"))

    @property
    def n_obs(self) -> int | None:
        value = self.findings.get("n_obs", self.sample.get("n_obs"))
        return int(value) if isinstance(value, (int, float)) and not isinstance(value, bool) else None

    @property
    def covariance(self) -> Mapping[str, Any]:
        return _mapping(self.findings.get("covariance"))

    @property
    def variance_kind(self) -> str | None:
        kind = self.covariance.get("kind") or self.claim.get("covariance")
        return kind if isinstance(kind, str) else None

    @property
    def clusters(self) -> list[tuple[str, int | None]]:
        """``(column, number of clusters)`` per clustering dimension."""
        entries = self.covariance.get("clusters")
        if isinstance(entries, list) and entries:
            return [
                (str(e.get("column")), e.get("count") if isinstance(e.get("count"), int) else None)
                for e in entries
                if isinstance(e, Mapping)
            ]
        return [(column, None) for column in self.claim_names("cluster")]

    @property
    def variance_label(self) -> str:
        """The variance estimator in words, e.g. ``cluster-robust by school (G = 41)``."""
        kind = self.variance_kind
        words = VARIANCE_WORDS.get(kind or "", kind or "unstated variance estimator")
        if kind == "cluster" and self.clusters:
            by = " and ".join(
                f"{column} (G = {count(n)})" if n is not None else column for column, n in self.clusters
            )
            return f"{words} by {by}"
        return words

    @property
    def warnings(self) -> list[str]:
        entries = self.findings.get("warnings")
        return [str(w) for w in entries] if isinstance(entries, list) else []


def _mapping(value: Any) -> Mapping[str, Any]:
    return value if isinstance(value, Mapping) else {}


def _entries(value: Any) -> list[Mapping[str, Any]]:
    """The mappings in a list (an empty list for anything else)."""
    return [entry for entry in value if isinstance(entry, Mapping)] if isinstance(value, list) else []
