"""Constructed findings for rule tests: the JSON form of a refit, built by hand.

:func:`iv_findings` gives a healthy instrumental-variables claim (invented:
weekly sales of shop staff and hours of training, instrumented by a schedule
lottery and the distance to the trainer). Tests change one number at a time
with :func:`with_diagnostic`, :func:`with_claim` and :func:`with_rows` and read
one item. The layout follows ``Findings.to_dict()`` and the engine's
diagnostics; values are invented, not computed.
"""

from __future__ import annotations

import copy
from typing import Any

OUTCOME = "weekly_sales"
FOCAL = "training_hours"
INSTRUMENTS = ["schedule_lottery", "trainer_distance"]


def result(
    statistic: float | None = None,
    p_value: float | None = None,
    *,
    df: Any = None,
    distribution: str | None = None,
    standing: str = "computed",
    reason: str | None = None,
    **details: Any,
) -> dict[str, Any]:
    """One diagnostic in the findings' JSON form."""
    return {
        "name": "constructed",
        "statistic": statistic,
        "p_value": p_value,
        "df": df,
        "distribution": distribution,
        "null_hypothesis": "",
        "standing": standing,
        "reason": reason,
        "source": "constructed for a test",
        **details,
    }


def row(estimator: str, estimate: float, std_error: float, *, term: str = FOCAL, df: int = 496) -> dict[str, Any]:
    """One estimate row with a normal-approximation 95% interval."""
    return {
        "estimator": estimator,
        "term": term,
        "estimate": estimate,
        "std_error": std_error,
        "statistic": estimate / std_error,
        "p_value": 0.001 if abs(estimate / std_error) > 3.3 else 0.2,
        "ci_low": estimate - 1.96 * std_error,
        "ci_high": estimate + 1.96 * std_error,
        "df": df,
        "distribution": "t",
    }


def effective_f(statistic: float, *, c5: float = 37.42, c10: float = 23.11, c20: float = 15.06, c30: float = 12.04) -> dict[str, Any]:
    """An ``effective_f`` result with its critical values by worst-case bias share tau."""
    rows = [{"tau": tau, "critical_value": value} for tau, value in ((0.05, c5), (0.1, c10), (0.2, c20), (0.3, c30))]
    return result(statistic, None, critical_values=rows, shown="simplified")


def iv_findings(**claim_fields: Any) -> dict[str, Any]:
    """A claim that passes every automatic check: strong, agreeing instruments; numbers that reproduce."""
    claim = {
        "title": "Training hours raise weekly sales",
        "design": "iv",
        "outcome": OUTCOME,
        "endogenous": [FOCAL],
        "instruments": list(INSTRUMENTS),
        "controls": ["tenure_years"],
        "categorical": [],
        "intercept": True,
        "fixed_effects": [],
        "cluster": [],
        "weights": None,
        "filters": [],
        "covariance": "robust",
        "claimed": {"estimator": "2sls", "term": FOCAL, "estimate": "0.42", "std_error": "0.081", "n_obs": 500, "first_stage_f": None},
        "pre_treatment": [],
        "direct_effect_bound": None,
        "benchmarks": [],
    }
    claim.update(claim_fields)
    return {
        "schema_version": 1,
        "n_obs": 500,
        "design": claim["design"],
        "outcome": OUTCOME,
        "focal": [FOCAL],
        "sample": {
            "rows_read": 512,
            "filters": [],
            "rows_after_filters": 512,
            "missing_by_column": {"tenure_years": 12},
            "rows_dropped_missing": 12,
            "rows_dropped_zero_weight": 0,
            "singletons_dropped": 0,
            "n_obs": 500,
            "categorical": [],
            "absorbed_columns": [],
            "warnings": [],
            "fixed_effects": None,
            "columns": {
                "outcome": OUTCOME,
                "endogenous": [FOCAL],
                "instruments": list(INSTRUMENTS),
                "exogenous": ["(intercept)", "tenure_years"],
            },
        },
        "covariance": {"kind": "robust", "description": "robust", "small_sample": "n/(n-k) (HC1)", "clusters": []},
        "estimators": [
            {"code": code, "name": name}
            for code, name in (("ols", "OLS"), ("2sls", "2SLS"), ("liml", "LIML"), ("gmm", "Two-step GMM"))
        ],
        "estimates": [
            row("ols", 0.61, 0.04),
            row("2sls", 0.4213, 0.0808),
            row("liml", 0.4198, 0.0815),
            row("gmm", 0.4207, 0.0806),
        ],
        "diagnostics": {
            "first_stage": [
                result(48.2, 1e-19, df=[2, 495], distribution="F", regressor=FOCAL, partial_r2=0.16, shea_partial_r2=0.16,
                       variance="robust", coefficients=[])
            ],
            "reduced_form": result(9.1, 1e-4, df=[2, 495], distribution="F", coefficients=[]),
            "sargan": result(0.31, 0.58, df=1, distribution="chi2"),
            "basmann": result(0.30, 0.58, df=1, distribution="chi2"),
            "hansen_j": result(0.35, 0.55, df=1, distribution="chi2"),
            "control_function": result(7.9, 0.005, df=1, distribution="chi2"),
            "residual_correlation": result(0.21, None, by_regressor=[{"regressor": FOCAL, "correlation": 0.21}]),
            "effective_f": effective_f(48.2),
            "kleibergen_paap_rk_lm": result(61.0, 1e-13, df=2, distribution="chi2"),
            "anderson_rubin": result(14.0, 1e-5, df=[2, 495], distribution="F", confidence_set=[[0.26, 0.59]]),
            "clr": result(30.1, 1e-7, confidence_set=[[0.27, 0.58]]),
        },
        "warnings": [],
        "claim": claim,
        "provenance": {},
    }


def with_diagnostic(findings: dict[str, Any], key: str, value: Any) -> dict[str, Any]:
    """A copy with one diagnostic replaced (``None`` removes it)."""
    changed = copy.deepcopy(findings)
    if value is None:
        changed["diagnostics"].pop(key, None)
    else:
        changed["diagnostics"][key] = value
    return changed


def with_claim(findings: dict[str, Any], **fields: Any) -> dict[str, Any]:
    """A copy whose claim has some fields replaced (``claimed`` entries are merged)."""
    changed = copy.deepcopy(findings)
    claimed = fields.pop("claimed", None)
    changed["claim"].update(fields)
    if claimed is not None:
        changed["claim"]["claimed"] = {**changed["claim"]["claimed"], **claimed}
    if "design" in fields:
        changed["design"] = fields["design"]
    return changed


def with_rows(findings: dict[str, Any], *rows: dict[str, Any]) -> dict[str, Any]:
    """A copy whose estimate rows for the same estimator and term are replaced by ``rows``."""
    changed = copy.deepcopy(findings)
    replaced = {(r["estimator"], r["term"]) for r in rows}
    changed["estimates"] = [r for r in changed["estimates"] if (r["estimator"], r["term"]) not in replaced] + list(rows)
    return changed


def with_covariance(findings: dict[str, Any], kind: str, *, clusters: dict[str, int] | None = None) -> dict[str, Any]:
    """A copy with another variance estimator (and cluster counts)."""
    changed = copy.deepcopy(findings)
    changed["covariance"]["kind"] = kind
    changed["covariance"]["clusters"] = [{"column": c, "count": n} for c, n in (clusters or {}).items()]
    changed["claim"]["covariance"] = kind
    changed["claim"]["cluster"] = list(clusters or {})
    return changed
