"""Section ``relevance``: do the instruments move the focal regressor strongly enough?

Weak instruments bias 2SLS toward OLS and make its usual interval far too
narrow. Rules, from the most to the least specific to the claim's errors:

* effective F against the Montiel Olea-Pflueger critical value (any
  variance estimator, one focal regressor);
* with several focal regressors, the Cragg-Donald or Kleibergen-Paap F
  against the Stock-Yogo critical value, and the Sanderson-Windmeijer F per
  regressor;
* the Kleibergen-Paap rank test that the model is identified at all;
* the first-stage F against 10, the rule of thumb of Staiger & Stock (1997)
  (common practice).

References
----------
Staiger, D. and Stock, J. H. (1997). Instrumental variables regression with weak instruments.
Econometrica 65(3), 557-586.
Stock, J. H. and Yogo, M. (2005). Testing for weak instruments in linear IV regression. In Andrews
and Stock (eds.), Identification and Inference for Econometric Models. Cambridge University Press.
Montiel Olea, J. L. and Pflueger, C. (2013). A robust test for weak instruments. Journal of
Business & Economic Statistics 31(3), 358-369.
Kleibergen, F. and Paap, R. (2006). Generalized reduced rank tests using the singular value
decomposition. Journal of Econometrics 133(1), 97-126.
Sanderson, E. and Windmeijer, F. (2016). A weak instrument F-test in linear IV models with multiple
endogenous variables. Journal of Econometrics 190(2), 212-221.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from app.review.formatting import as_number, number, p_value, statistic
from app.review.rules.base import (
    SIGNIFICANCE,
    Outcome,
    Rule,
    needs_instrument_diagnostic,
    needs_instruments,
    not_applicable,
    significant,
    worst,
)
from app.review.view import FindingsView

SECTION = "relevance"
TITLE = "Instrument strength"

RULE_OF_THUMB_F = 10.0
"""Staiger & Stock (1997): a first-stage F below 10 signals weak instruments (common practice)."""

EFFECTIVE_F_TAU = 0.10
"""Montiel Olea & Pflueger (2013): worst-case bias of at most 10% of the OLS benchmark (their recommended tau)."""

EFFECTIVE_F_TAU_SEVERE = 0.30
"""Below the tau = 30% critical value even a 30% worst-case bias cannot be ruled out."""

STOCK_YOGO_MAX_SIZE = 0.10
"""Stock & Yogo (2005): the nominal 5% Wald test of 2SLS may reject at most 10% of the time."""


def assess_first_stage_f(view: FindingsView) -> Outcome:
    found = view.lookup("first_stage")
    if (skip := needs_instrument_diagnostic(view, found)) is not None:
        return skip
    entries = view.first_stages()
    if not entries:
        return not_applicable("No first-stage F could be computed on these data.")
    parts, weak = [], []
    for entry in entries:
        value = as_number(entry.get("statistic"))
        regressor = entry.get("regressor", view.focal_term)
        parts.append(
            f"{regressor}: {statistic(value, distribution=entry.get('distribution'), df=entry.get('df'))} "
            f"({view.variance_label}), partial R-squared {number(entry.get('partial_r2'))}, "
            f"Shea partial R-squared {number(entry.get('shea_partial_r2'))}."
        )
        if value is not None and value < RULE_OF_THUMB_F:
            weak.append(str(regressor))
    if view.variance_kind not in (None, "homoskedastic"):
        parts.append("With robust or clustered errors this is a Wald F; the threshold of 10 was derived for the classical F.")
    evidence = " ".join(parts)
    if weak:
        return Outcome(
            "serious",
            evidence,
            question=(
                f"The first-stage F for {', '.join(weak)} is below {RULE_OF_THUMB_F:g}, so the instruments look weak. "
                "Can the authors report weak-instrument-robust confidence sets (e.g. Anderson-Rubin) for the claim?"
            ),
        )
    return Outcome("sound", evidence)


def critical_value(entry: Mapping[str, Any], tau: float) -> float | None:
    """The simplified (conservative) critical value for worst-case bias share ``tau`` in an ``effective_f`` result.

    Montiel Olea & Pflueger (2013) give a simplified critical value (x = 1/tau)
    and a generalized one (x = B/tau with the estimated bias bound B). The
    generalized one can be far lower, e.g. with two instruments, where the
    2SLS bias is small even when inference is badly distorted; the rule uses
    the conservative simplified value and the evidence shows both.
    """
    row = _critical_row(entry, tau)
    if row is None:
        return None
    return as_number(row.get("simplified", row.get("critical_value")))


def _critical_row(entry: Mapping[str, Any], tau: float) -> Mapping[str, Any] | None:
    rows = entry.get("critical_values")
    for row in rows if isinstance(rows, list) else []:
        if isinstance(row, Mapping) and _same_share(row.get("tau"), tau):
            return row
    return None


def _same_share(value: object, share: float) -> bool:
    number_ = as_number(value)
    return number_ is not None and abs(number_ - share) < 1e-9


def assess_effective_f(view: FindingsView) -> Outcome:
    found = view.lookup("effective_f")
    if (skip := needs_instrument_diagnostic(view, found)) is not None:
        return skip
    entry = found.value
    value = as_number(entry.get("statistic"))
    target, severe = critical_value(entry, EFFECTIVE_F_TAU), critical_value(entry, EFFECTIVE_F_TAU_SEVERE)
    if value is None or target is None:
        return not_applicable("The effective F or its critical value for tau = 10% is missing from the findings.")
    evidence = (
        f"Effective F = {number(value)} ({view.variance_label}); critical value for a worst-case bias of "
        f"{EFFECTIVE_F_TAU:.0%} at the 5% level: {number(target)}"
    )
    evidence += f", for {EFFECTIVE_F_TAU_SEVERE:.0%}: {number(severe)} (simplified, conservative values)."
    generalized = as_number((_critical_row(entry, EFFECTIVE_F_TAU) or {}).get("generalized"))
    if generalized is not None:
        evidence += f" The generalized critical value for 10%, using the estimated bias bound, is {number(generalized)}."
    if value >= target:
        return Outcome("sound", evidence)
    standing = "serious" if severe is None or value < severe else "concern"
    return Outcome(
        standing,
        evidence,
        question=(
            f"The effective F ({number(value)}) is below the critical value {number(target)} for a 10% worst-case "
            "bias. How do the authors ensure that weak instruments do not drive the estimate and its interval?"
        ),
    )


def assess_joint_strength(view: FindingsView) -> Outcome:
    if (skip := needs_instruments(view)) is not None:
        return skip
    if len(view.focal_terms) < 2:
        return not_applicable("One focal regressor: the effective F and the first-stage F cover its strength.")
    kind = "cragg_donald_f" if view.variance_kind == "homoskedastic" else "kleibergen_paap_rk_f"
    found = view.lookup(kind)
    if (skip := needs_instrument_diagnostic(view, found)) is not None:
        return skip
    value = as_number(found.value.get("statistic"))
    target = _stock_yogo_size_value(view)
    label = "Cragg-Donald F" if kind == "cragg_donald_f" else f"Kleibergen-Paap rk Wald F ({view.variance_label})"
    parts = [f"{label} = {number(value)}."]
    if target is None:
        parts.append("Stock-Yogo critical value: not tabulated for these numbers of regressors and instruments.")
    else:
        parts.append(f"Stock-Yogo critical value for a 10% maximal size of the 5% Wald test: {number(target)}.")
    if kind != "cragg_donald_f":
        parts.append("The Stock-Yogo values assume homoskedastic errors.")
    standings = ["sound"]
    if value is not None and target is not None and value < target:
        standings.append("serious")
    weakest = _weakest_conditional(view)
    if weakest is not None:
        regressor, conditional = weakest
        parts.append(f"Weakest Sanderson-Windmeijer conditional F: {number(conditional)} for {regressor}.")
        if conditional < RULE_OF_THUMB_F:
            standings.append("serious")
    standing = worst(standings)
    return Outcome(
        standing,
        " ".join(parts),
        question=(
            "With several focal regressors the instruments must separately move each one. Can the authors show "
            "conditional first-stage statistics for each regressor and weak-instrument-robust inference?"
        ),
    )


def _stock_yogo_size_value(view: FindingsView) -> float | None:
    """The Stock-Yogo critical value for a 10% maximal size of the 2SLS Wald test, when tabulated."""
    found = view.lookup("stock_yogo")
    if not found.usable:
        return None
    for criterion in found.value.get("criteria") or []:
        if isinstance(criterion, Mapping) and criterion.get("criterion") == "tsls_size" and criterion.get("tabulated"):
            for cell in criterion.get("critical_values") or []:
                if isinstance(cell, Mapping) and _same_share(cell.get("threshold"), STOCK_YOGO_MAX_SIZE):
                    return as_number(cell.get("critical_value"))
    return None


def _weakest_conditional(view: FindingsView) -> tuple[str, float] | None:
    found = view.lookup("sanderson_windmeijer_f")
    if not found.usable:
        return None
    entries = found.value if isinstance(found.value, list) else found.value.get("by_regressor")
    values = [
        (str(entry.get("regressor")), as_number(entry.get("statistic")))
        for entry in entries or []
        if isinstance(entry, Mapping)
    ]
    values = [(name, value) for name, value in values if value is not None]
    return min(values, key=lambda pair: pair[1]) if values else None


def assess_identification(view: FindingsView) -> Outcome:
    found = view.lookup("kleibergen_paap_rk_lm")
    if (skip := needs_instrument_diagnostic(view, found)) is not None:
        return skip
    test = found.value
    p = as_number(test.get("p_value"))
    evidence = (
        f"Kleibergen-Paap rk LM test of under-identification ({view.variance_label}): "
        f"{statistic(test.get('statistic'), distribution=test.get('distribution'), df=test.get('df'))}, {p_value(p)}."
    )
    if significant(p):
        return Outcome("sound", evidence)
    return Outcome(
        "serious",
        evidence,
        question=(
            "The rank test cannot reject that the instruments fail to identify the effect at all. What variation "
            "in the instruments do the authors rely on?"
        ),
    )


RULES = (
    Rule(
        id="relevance.effective_f",
        title="The instruments are strong enough for a reliable 2SLS estimate",
        rule=(
            "The effective F must reach the simplified critical value for a worst-case bias of 10% (5% test); below "
            "the 30% critical value the item is serious, in between a concern."
        ),
        source="Montiel Olea & Pflueger (2013)",
        explanation=(
            "If the instruments barely move the regressor, the instrumented estimate drifts back toward the naive "
            "one and its interval becomes too narrow. The effective F measures that strength and stays valid with "
            "robust or clustered errors."
        ),
        assess=assess_effective_f,
    ),
    Rule(
        id="relevance.first_stage_f",
        title="The first-stage F is at least 10",
        rule=f"First-stage F of the excluded instruments below {RULE_OF_THUMB_F:g} means weak instruments.",
        source="Staiger & Stock (1997); common practice",
        explanation=(
            "The first stage regresses the focal regressor on the instruments and controls; its F says whether the "
            "instruments add real information. Ten is a widely used, rough cut-off."
        ),
        assess=assess_first_stage_f,
    ),
    Rule(
        id="relevance.joint_strength",
        title="Each focal regressor has its own strong instruments",
        rule=(
            "With several focal regressors the Cragg-Donald (classical) or Kleibergen-Paap (robust) F must reach the "
            "Stock-Yogo 10% maximal-size critical value, and each Sanderson-Windmeijer conditional F must reach 10."
        ),
        source="Stock & Yogo (2005); Kleibergen & Paap (2006); Sanderson & Windmeijer (2016)",
        explanation=(
            "Two regressors need instruments that move them in different ways; strong instruments for one do not "
            "help the other. These statistics check strength for the set and for each regressor."
        ),
        assess=assess_joint_strength,
    ),
    Rule(
        id="relevance.identification",
        title="The instruments identify the effect at all",
        rule=f"The Kleibergen-Paap rank test must reject under-identification (p below {SIGNIFICANCE}).",
        source="Kleibergen & Paap (2006)",
        explanation=(
            "This asks whether the instruments carry any usable information about the focal regressors. If the "
            "test cannot reject, the effect may not be identified by these instruments."
        ),
        assess=assess_identification,
    ),
)
