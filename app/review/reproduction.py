"""Do the manuscript's printed numbers reproduce?

A printed number stands for every value that rounds to it: ``0.13`` covers
[0.125, 0.135), ``0.130`` only [0.1295, 0.1305), ``1.2e3`` [1150, 1250)
(half a unit of the last printed digit either side). The end nearer zero
counts, because a tie there rounds up under the common half-away-from-zero
rule; the end farther from zero does not, because 0.135 rounds to 0.14 under
that rule and under round-half-to-even alike. For a negative number the
ranges mirror: ``-0.13`` covers (-0.135, -0.125]. The sample size must match
exactly.

When a number does not reproduce, the comparison lists the causes that are
visible in the findings: a different sample (rows with missing values,
filters, singleton groups), a different estimator than the one stated,
units or sign, and — when :func:`covariance_variants` was run — a different
variance estimator (classical instead of robust, clustered or not).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from decimal import Decimal, InvalidOperation
from typing import Any

import pandas as pd

from app.errors import SecondStageError
from app.estimation.refit import refit as refit_claim
from app.review.formatting import as_number, count, decimals, number
from app.review.view import VARIANCE_WORDS, FindingsView
from app.spec import ClaimSpec, parse_claim

RELATIVE_SLACK = 1e-9
"""Share of half a printed unit allowed for floating-point noise at the ends of the range."""


@dataclass(frozen=True)
class PrintedNumber:
    """A number as printed, and the range of values that round to it."""

    text: str
    value: float
    low: float
    high: float
    places: int

    def covers(self, value: float | None) -> bool:
        """True when ``value`` rounds to the printed number (the end farther from zero excluded)."""
        if value is None:
            return False
        slack = (self.high - self.low) / 2 * RELATIVE_SLACK
        if self.value >= 0:
            return self.low - slack <= value < self.high
        return self.low < value <= self.high + slack

    def near(self, value: float | None) -> bool:
        """True when ``value`` rounds to a neighbour of the printed number (one unit off in the last digit)."""
        if value is None:
            return False
        unit = self.high - self.low
        return abs(value - self.value) <= 1.5 * unit * (1 + RELATIVE_SLACK)

    def as_printed(self, value: float) -> str:
        """``value`` rounded to the printed number of decimal places."""
        return f"{value:.{self.places}f}"


def printed_number(text: object) -> PrintedNumber | None:
    """Parse a printed number (``"0.13"``, ``"-1.25"``, ``"3e-4"``); None when it is not one."""
    if isinstance(text, bool) or text is None:
        return None
    cleaned = str(text).strip().replace("\u2212", "-").replace(",", "")
    try:
        value = Decimal(cleaned)
    except InvalidOperation:
        return None
    if not value.is_finite():
        return None
    exponent = int(value.as_tuple().exponent)
    half = Decimal(5).scaleb(exponent - 1)
    return PrintedNumber(
        text=str(text).strip(),
        value=float(value),
        low=float(value - half),
        high=float(value + half),
        places=max(0, -exponent),
    )


@dataclass(frozen=True)
class Comparison:
    """One printed number against the refit.

    ``refit`` is None when the findings hold no matching number; ``causes``
    lists likely reasons for a difference, in words. ``near_miss`` marks a
    refit that rounds to a neighbour of the printed number, one unit off in
    its last digit (a rounding slip or a tiny difference in the sample,
    rather than a different model).
    """

    quantity: str
    claimed: str
    refit: float | None
    matches: bool
    compared: str
    causes: list[str]
    near_miss: bool = False


def compare_estimate(view: FindingsView) -> Comparison | None:
    """The claimed estimate against the refit of the claimed estimator (None when none is printed)."""
    if (pair := _printed_and_refit(view, "estimate")) is None:
        return None
    printed, refit = pair
    estimator, term = view.claimed_estimator, view.focal_term
    compared = f"{view.estimator_name(estimator)} estimate of {term}"
    if printed.covers(refit):
        return Comparison("estimate", printed.text, refit, True, compared, [])
    causes = _sample_causes(view)
    causes += _other_estimators(view, printed, quantity="estimate", exclude=estimator)
    if refit is not None:
        if printed.covers(-refit):
            causes.append("The printed estimate matches the refit with the opposite sign: check how the outcome or the regressor is coded.")
        for factor, words in ((100.0, "in percent (times 100)"), (0.01, "divided by 100")):
            if printed.covers(refit * factor):
                causes.append(f"The printed estimate matches the refit {words}: check the units of the table.")
    return Comparison(
        "estimate", printed.text, refit, False, compared, causes or [_no_visible_cause()], near_miss=printed.near(refit)
    )


def compare_std_error(view: FindingsView) -> Comparison | None:
    """The claimed standard error against the refit's, with the variance estimators that would match."""
    if (pair := _printed_and_refit(view, "std_error")) is None:
        return None
    printed, refit = pair
    estimator, term = view.claimed_estimator, view.focal_term
    compared = f"{view.estimator_name(estimator)} standard error of {term} ({view.variance_label})"
    if printed.covers(refit):
        return Comparison("std_error", printed.text, refit, True, compared, [])
    causes = _variance_causes(view, printed)
    causes += _other_estimators(view, printed, quantity="std_error", exclude=estimator)
    causes += _sample_causes(view)
    if not causes:
        causes.append(
            f"The refit uses {view.variance_label} standard errors; a table with classical, robust or "
            "clustered standard errors, or another small-sample correction, would differ. Ask which the table reports."
        )
    return Comparison("std_error", printed.text, refit, False, compared, causes, near_miss=printed.near(refit))


def _printed_and_refit(view: FindingsView, quantity: str) -> tuple[PrintedNumber, float | None] | None:
    """The printed ``quantity`` of the focal coefficient and the claimed estimator's refit of it (None when not printed)."""
    printed = printed_number(view.claimed.get(quantity))
    if printed is None:
        return None
    row = view.row(view.claimed_estimator, view.focal_term)
    return printed, as_number(row.get(quantity)) if row else None


def compare_n_obs(view: FindingsView) -> Comparison | None:
    """The claimed number of observations against the refit's estimation sample."""
    claimed = view.claimed.get("n_obs")
    if not isinstance(claimed, int) or isinstance(claimed, bool):
        return None
    refit = view.n_obs
    compared = "observations in the estimation sample"
    if refit == claimed:
        return Comparison("n_obs", str(claimed), float(refit), True, compared, [])
    causes = _n_causes(view, claimed)
    return Comparison("n_obs", str(claimed), None if refit is None else float(refit), False, compared, causes)


def compare_first_stage_f(view: FindingsView) -> Comparison | None:
    """The claimed first-stage F against every form of it in the findings (first match wins)."""
    printed = printed_number(view.claimed.get("first_stage_f"))
    if printed is None:
        return None
    candidates = first_stage_f_forms(view)
    compared = "first-stage F"
    for label, value in candidates:
        if printed.covers(value):
            return Comparison("first_stage_f", printed.text, value, True, f"{compared} ({label})", [])
    shown = "; ".join(f"{label}: {decimals(value, printed.places + 1)}" for label, value in candidates)
    causes = [f"No form of the first-stage F in the refit rounds to it ({shown})."] if candidates else []
    causes += _sample_causes(view)
    refit = candidates[0][1] if candidates else None
    label = f"{compared} ({candidates[0][0]})" if candidates else compared
    return Comparison(
        "first_stage_f", printed.text, refit, False, label, causes or [_no_visible_cause()], near_miss=printed.near(refit)
    )


def first_stage_f_forms(view: FindingsView) -> list[tuple[str, float]]:
    """Every first-stage strength statistic in the findings that a manuscript might print as "F"."""
    forms: list[tuple[str, float]] = []
    for entry in view.first_stages():
        value = as_number(entry.get("statistic"))
        if value is not None:
            kind = entry.get("variance") or view.variance_kind
            forms.append((f"{VARIANCE_WORDS.get(str(kind), kind)} F for {entry.get('regressor', view.focal_term)}", value))
    for key, label in (
        ("cragg_donald_f", "Cragg-Donald (classical) F"),
        ("kleibergen_paap_rk_f", "Kleibergen-Paap rk Wald F"),
        ("effective_f", "effective F of Montiel Olea and Pflueger"),
    ):
        found = view.lookup(key)
        value = as_number(found.value.get("statistic")) if found.usable and isinstance(found.value, Mapping) else None
        if value is not None:
            forms.append((label, value))
    return forms


def variants_for_claim(frame: pd.DataFrame, spec: ClaimSpec) -> dict[str, dict[str, Any]] | None:
    """:func:`covariance_variants` when the claim prints a standard error (the only number they explain), else None.

    The web worker and ``secondstage check`` both call this, so a standard
    error that does not reproduce gets the same explanation everywhere.
    """
    if not reports_standard_error(spec):
        return None
    return covariance_variants(frame, spec)


def reports_standard_error(spec: ClaimSpec) -> bool:
    """Whether the claim prints a standard error: the one number that :func:`covariance_variants` explains."""
    return spec.claimed is not None and spec.claimed.std_error is not None


def covariance_variants(frame: pd.DataFrame, spec: ClaimSpec) -> dict[str, dict[str, Any]]:
    """The claimed estimator's focal estimate and standard error under other variance estimators.

    Refits the claim with classical and robust standard errors and with
    one-way clustering on each cluster, fixed-effect or unit column the claim
    names, skipping the claim's own choice and any variant that cannot be
    estimated. The result is what :class:`FindingsView` takes as ``variants``,
    so that a standard error that does not reproduce can be traced to the
    variance estimator the manuscript really used.
    """
    base = spec.model_dump(mode="json")
    own = (spec.covariance.value, tuple(spec.cluster))
    options: list[tuple[str, list[str]]] = [("homoskedastic", []), ("robust", [])]
    grouping = [*spec.cluster, *spec.fixed_effects, *([spec.unit] if spec.unit else [])]
    options += [("cluster", [column]) for column in dict.fromkeys(grouping)]
    variants: dict[str, dict[str, Any]] = {}
    for kind, cluster in options:
        if (kind, tuple(cluster)) == own:
            continue
        label = VARIANCE_WORDS[kind] + (f" by {cluster[0]}" if cluster else "")
        try:
            findings = refit_claim(frame, parse_claim({**base, "covariance": kind, "cluster": cluster})).to_dict()
        except SecondStageError:
            continue
        view = FindingsView(findings)
        row = view.row(view.claimed_estimator)
        if row is None:
            continue
        variants[label] = {
            "estimate": row.get("estimate"),
            "std_error": row.get("std_error"),
            "n_obs": findings.get("n_obs"),
        }
    return variants


def _variance_causes(view: FindingsView, printed: PrintedNumber) -> list[str]:
    causes = []
    for label, variant in view.variants.items():
        value = as_number(variant.get("std_error")) if isinstance(variant, Mapping) else None
        if printed.covers(value):
            causes.append(
                f"The printed standard error matches the refit with {label} standard errors "
                f"({decimals(value, printed.places + 1)}), while the claim states {view.variance_label}."
            )
    if view.variants and not causes:
        shown = "; ".join(
            f"{label}: {number(variant.get('std_error'))}"
            for label, variant in view.variants.items()
            if isinstance(variant, Mapping)
        )
        causes.append(f"No other variance estimator tried reproduces it either ({shown}).")
    return causes


def _other_estimators(view: FindingsView, printed: PrintedNumber, *, quantity: str, exclude: str | None) -> list[str]:
    causes = []
    for row in view.rows_for(view.focal_term):
        code = row.get("estimator")
        value = as_number(row.get(quantity))
        if code != exclude and printed.covers(value):
            noun = "estimate" if quantity == "estimate" else "standard error"
            causes.append(
                f"The printed {noun} matches the refit's {view.estimator_name(code)} {noun} "
                f"({decimals(value, printed.places + 1)}): the table may report another estimator than the claim states."
            )
    return causes


def _sample_causes(view: FindingsView) -> list[str]:
    claimed = view.claimed.get("n_obs")
    if isinstance(claimed, int) and view.n_obs is not None and claimed != view.n_obs:
        return [
            f"The samples differ ({count(claimed)} observations printed, {count(view.n_obs)} in the refit); "
            "see the sample-size item."
        ]
    return []


def _n_causes(view: FindingsView, claimed: int) -> list[str]:
    """Explain a sample-size difference from the refit's own accounting of dropped rows."""
    sample = view.sample
    refit = view.n_obs or 0
    missing = sample.get("missing_by_column") if isinstance(sample.get("missing_by_column"), Mapping) else {}
    causes = []
    if sample.get("rows_after_filters") == claimed and sample.get("rows_dropped_missing"):
        detail = ", ".join(f"{column}: {count(n)}" for column, n in missing.items())
        causes.append(
            "The printed n equals the rows before deleting rows with missing values "
            f"({detail}): the manuscript may have filled in missing values or left a variable out."
        )
    for column, dropped in missing.items():
        if isinstance(dropped, int) and refit + dropped == claimed and len(missing) > 1:
            causes.append(
                f"The printed n equals the refit's n plus the {count(dropped)} rows missing in '{column}': "
                f"the manuscript may not have used '{column}', or filled in its missing values."
            )
    if view.sample_entries("filters") and sample.get("rows_read") == claimed:
        causes.append("The printed n equals every row in the file: the claim's sample filters may not have been applied.")
    singletons = sample.get("singletons_dropped")
    if isinstance(singletons, int) and singletons and refit + singletons == claimed:
        causes.append(
            f"The printed n includes the {count(singletons)} singleton groups of the fixed effects, which the refit "
            "drops because they carry no information (software differs on this)."
        )
    if not causes:
        difference = claimed - refit
        more_or_fewer = "more" if difference > 0 else "fewer"
        causes.append(
            f"The manuscript reports {count(abs(difference))} {more_or_fewer} observations than the refit; no single "
            "filter or missing-value count explains the difference. Ask for the exact sample definition."
        )
    return causes


def _no_visible_cause() -> str:
    return "No likely cause is visible in the findings; ask the authors for the code that produced the table."
