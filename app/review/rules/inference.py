"""Section ``inference``: is the claim's uncertainty measured in a way that holds here?

* Weak-instrument-robust confidence sets against the usual interval: the
  Anderson-Rubin set when the model is exactly identified (where it is the
  efficient robust test), the conditional likelihood-ratio set when it is
  over-identified (Andrews, Moreira & Stock 2006; the recommendation of
  Andrews, Stock & Sun 2019).
* Few clusters: cluster-robust tests over-reject with fewer than about 50
  clusters (common practice; Cameron & Miller 2015); a wild cluster bootstrap
  then decides (Cameron, Gelbach & Miller 2008).
* Classical standard errors assume equal error variances; robust ones are the
  common default (White 1980).
* Whether and at which level to cluster is a question of the sampling and
  assignment design (Abadie, Athey, Imbens & Wooldridge 2023): for the reviewer.

References
----------
Anderson, T. W. and Rubin, H. (1949). Estimation of the parameters of a single equation in a complete
system of stochastic equations. Annals of Mathematical Statistics 20(1), 46-63.
Andrews, D. W. K., Moreira, M. J. and Stock, J. H. (2006). Optimal two-sided invariant similar tests for
instrumental variables regression. Econometrica 74(3), 715-752.
Andrews, I., Stock, J. H. and Sun, L. (2019). Weak instruments in instrumental variables regression:
theory and practice. Annual Review of Economics 11, 727-753.
Lee, D. S., McCrary, J., Moreira, M. J. and Porter, J. (2022). Valid t-ratio inference for IV.
American Economic Review 112(10), 3260-3290.
Cameron, A. C., Gelbach, J. B. and Miller, D. L. (2008). Bootstrap-based improvements for inference with
clustered errors. Review of Economics and Statistics 90(3), 414-427.
Cameron, A. C. and Miller, D. L. (2015). A practitioner's guide to cluster-robust inference. Journal of
Human Resources 50(2), 317-372.
White, H. (1980). A heteroskedasticity-consistent covariance matrix estimator and a direct test for
heteroskedasticity. Econometrica 48(4), 817-838.
Abadie, A., Athey, S., Imbens, G. W. and Wooldridge, J. M. (2023). When should you adjust standard errors
for clustering? Quarterly Journal of Economics 138(1), 1-35.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

from app.review.formatting import as_number, confidence_set, count, interval, p_value
from app.review.rules.base import (
    COMMON_PRACTICE,
    SIGNIFICANCE,
    Outcome,
    Rule,
    needs_instruments,
    not_applicable,
    significant,
    needs_instrument_diagnostic,
)
from app.review.view import INSTRUMENTED_ESTIMATORS, FindingsView

SECTION = "inference"
TITLE = "Inference"

FEW_CLUSTERS = 50
"""Fewer clusters than this and cluster-robust tests can over-reject (common practice; Cameron & Miller 2015)."""


def set_contains(pieces: Any, value: float) -> bool | None:
    """Whether a confidence set ``[[low, high], ...]`` (None = unbounded end) contains ``value``; None if unreadable."""
    if not isinstance(pieces, Sequence) or isinstance(pieces, str):
        return None
    for piece in pieces:
        if not isinstance(piece, Sequence) or len(piece) != 2:
            return None
        low, high = as_number(piece[0]), as_number(piece[1])
        if (low is None or low <= value) and (high is None or value <= high):
            return True
    return False


def is_unbounded(pieces: Any) -> bool:
    """True when some piece of the set has an unbounded end."""
    if not isinstance(pieces, Sequence) or isinstance(pieces, str):
        return False
    return any(isinstance(p, Sequence) and len(p) == 2 and (p[0] is None or p[1] is None) for p in pieces)


def assess_weak_iv_robust(view: FindingsView) -> Outcome:
    if (skip := needs_instruments(view)) is not None:
        return skip
    over_identified = len(view.instruments) > len(view.focal_terms)
    preferred = "clr" if over_identified else "anderson_rubin"
    found = view.lookup(preferred)
    if not found.usable:
        found = view.lookup("anderson_rubin")
    if (skip := needs_instrument_diagnostic(view, found)) is not None:
        return skip
    name = {"clr": "Conditional likelihood-ratio (CLR)", "anderson_rubin": "Anderson-Rubin"}[found.key]
    estimator = view.claimed_estimator if view.claimed_estimator in INSTRUMENTED_ESTIMATORS else "2sls"
    row = view.row(estimator)
    usual_low, usual_high = (as_number(row.get("ci_low")), as_number(row.get("ci_high"))) if row else (None, None)
    pieces = found.value.get("confidence_set")
    parts = []
    if row:
        parts.append(
            f"Usual 95% interval ({view.estimator_name(estimator)}, {view.variance_label}): {interval(usual_low, usual_high)}."
        )
    parts.append(
        f"{name} 95% set: {confidence_set(pieces)}; test of no effect: {p_value(found.value.get('p_value'))}."
    )
    if isinstance(found.value.get("shape_meaning"), str):
        parts.append(found.value["shape_meaning"])
    parts += _other_robust_sets(view, exclude=found.key)
    evidence = " ".join(parts)
    contains_zero = set_contains(pieces, 0.0)
    if contains_zero is None:
        robust_p = as_number(found.value.get("p_value"))
        if robust_p is None:
            return not_applicable(f"The {name} result has neither a confidence set nor a p-value. " + evidence)
        contains_zero = not significant(robust_p)
    usual_excludes_zero = usual_low is not None and usual_high is not None and (usual_low > 0 or usual_high < 0)
    if usual_excludes_zero and contains_zero:
        return Outcome(
            "serious",
            evidence,
            question=(
                f"The usual interval excludes zero but the weak-instrument-robust {name} set does not. Can the authors "
                "report robust confidence sets and explain why the effect should be read as different from zero?"
            ),
        )
    if isinstance(pieces, Sequence) and not isinstance(pieces, str) and len(pieces) == 0:
        return Outcome(
            "concern",
            evidence + " An empty set means no effect size is compatible with all instruments being valid.",
            question=(
                "The robust confidence set is empty, which suggests that the model itself is misspecified. Which "
                "instrument do the authors trust?"
            ),
        )
    if is_unbounded(pieces):
        return Outcome(
            "concern",
            evidence + " An unbounded set means the data cannot rule out arbitrarily large effects.",
            question="The robust confidence set is unbounded. How informative is the estimate given the instruments' strength?",
        )
    return Outcome("sound", evidence)


def _other_robust_sets(view: FindingsView, *, exclude: str) -> list[str]:
    names = {"anderson_rubin": "Anderson-Rubin", "kleibergen_k": "Kleibergen K", "clr": "CLR", "tf": "tF"}
    parts = []
    for key, name in names.items():
        found = view.lookup(key)
        if key != exclude and found.usable and isinstance(found.value, Mapping):
            parts.append(f"{name} set: {confidence_set(found.value.get('confidence_set'))}.")
    return parts


def assess_few_clusters(view: FindingsView) -> Outcome:
    if view.variance_kind != "cluster":
        return not_applicable("The claim does not cluster its standard errors.")
    counts = [n for _, n in view.clusters if n is not None]
    if not counts:
        return not_applicable("The findings do not record the number of clusters.")
    fewest = min(counts)
    evidence = f"Clusters: {', '.join(f'{c} (G = {count(n)})' for c, n in view.clusters)}."
    if fewest >= FEW_CLUSTERS:
        return Outcome("sound", evidence)
    found = view.lookup("wild_cluster_bootstrap")
    question = (
        f"With {count(fewest)} clusters the cluster-robust tests can reject too often. Can the authors report wild "
        "cluster bootstrap p-values (with restricted residuals) for the claim?"
    )
    if not found.usable:
        return Outcome("concern", evidence + " No wild cluster bootstrap is in the findings.", question=question)
    boot_p, method = _bootstrap_p_value(found.value)
    row = view.row(view.claimed_estimator)
    usual_p = as_number(row.get("p_value")) if row else None
    evidence += (
        f" Wild cluster bootstrap ({count(found.value.get('replications'))} replications, seed "
        f"{found.value.get('seed', 'not recorded')}), {method}: {p_value(boot_p)}; usual test: {p_value(usual_p)}."
    )
    if boot_p is None:
        return Outcome("concern", evidence, question=question)
    if significant(usual_p) and not significant(boot_p):
        return Outcome("serious", evidence, question=question)
    return Outcome("sound", evidence)


def _bootstrap_p_value(data: Mapping[str, Any]) -> tuple[float | None, str]:
    """The bootstrap p-value of the coefficient test when there is one, else of the Anderson-Rubin test."""
    wald = data.get("wald")
    if isinstance(wald, Mapping) and as_number(wald.get("p_value")) is not None:
        return as_number(wald.get("p_value")), "test of no effect on the 2SLS t statistic"
    ar = data.get("anderson_rubin")
    if isinstance(ar, Mapping) and as_number(ar.get("p_value")) is not None:
        return as_number(ar.get("p_value")), "Anderson-Rubin test of no effect"
    return as_number(data.get("p_value")), "test of no effect"


def assess_variance_choice(view: FindingsView) -> Outcome:
    kind = view.variance_kind
    if kind is None:
        return not_applicable("The findings do not record the variance estimator.")
    evidence = f"The claim uses {view.variance_label} standard errors."
    if kind == "homoskedastic":
        return Outcome(
            "concern",
            evidence + " They assume every error has the same variance.",
            question=(
                "The standard errors assume equal error variances. Do the conclusions hold with "
                "heteroskedasticity-robust (or clustered) standard errors?"
            ),
        )
    return Outcome("sound", evidence)


def assess_cluster_level(view: FindingsView) -> Outcome:
    unit = view.claim_name("unit")
    grouping = [*view.claim_names("fixed_effects"), *([unit] if unit else [])]
    evidence = f"The claim uses {view.variance_label} standard errors."
    if grouping:
        evidence += f" Grouping columns named in the claim: {', '.join(map(str, grouping))}."
    return Outcome(
        "reviewer_judgement",
        evidence,
        question=(
            "Were units sampled, or the treatment or instruments assigned, in groups (schools, firms, regions, "
            "sessions)? If so, are the standard errors clustered at that level?"
        ),
    )


RULES = (
    Rule(
        id="inference.weak_iv_robust",
        title="The conclusion survives inference that is valid with weak instruments",
        rule=(
            "If the usual interval excludes zero, the weak-instrument-robust set (Anderson-Rubin when exactly "
            "identified, conditional likelihood-ratio when over-identified) must exclude it too; an unbounded or "
            "empty set is a concern."
        ),
        source="Anderson & Rubin (1949); Andrews, Moreira & Stock (2006); Andrews, Stock & Sun (2019)",
        explanation=(
            "The usual interval around a 2SLS estimate can be far too narrow when instruments are weak. Robust sets "
            "keep their promised coverage whatever the instruments' strength."
        ),
        assess=assess_weak_iv_robust,
    ),
    Rule(
        id="inference.few_clusters",
        title="There are enough clusters for cluster-robust inference",
        rule=(
            f"With fewer than {FEW_CLUSTERS} clusters the usual cluster-robust test is a concern; serious if a wild "
            f"cluster bootstrap p-value is above {SIGNIFICANCE} while the usual one is below."
        ),
        source=f"{COMMON_PRACTICE}; Cameron, Gelbach & Miller (2008); Cameron & Miller (2015)",
        explanation=(
            "Clustered standard errors learn the error pattern from the clusters, so with few clusters they are "
            "themselves uncertain and tests reject too often. A bootstrap over clusters corrects for this."
        ),
        assess=assess_few_clusters,
    ),
    Rule(
        id="inference.variance_choice",
        title="Standard errors allow for unequal error variances",
        rule="Classical standard errors (equal error variances) are a concern; robust or clustered ones are sound.",
        source=f"White (1980); {COMMON_PRACTICE}",
        explanation=(
            "Classical standard errors are right only if every observation is equally noisy. Robust ones drop that "
            "assumption at little cost."
        ),
        assess=assess_variance_choice,
    ),
    Rule(
        id="inference.cluster_level",
        title="Standard errors are clustered at the level of sampling or assignment",
        rule="Judge from the design: cluster where units were sampled or treatment or instruments assigned in groups.",
        source="Abadie, Athey, Imbens & Wooldridge (2023)",
        explanation=(
            "Observations from the same group often share shocks, so they carry less independent information than "
            "their number suggests. Whether to cluster depends on how the data were sampled and treatment assigned."
        ),
        assess=assess_cluster_level,
    ),
)
