"""Stock & Yogo (2005) critical values for weak-instrument tests, looked up from the published tables.

The table ships with the package (``app/estimation/tables/stock_yogo_critical_values.csv``,
source notes beside it). For the claim's numbers of focal regressors and
excluded instruments the lookup returns, for each of three criteria, the
critical values of the Cragg-Donald F at the 5% level:

* ``tsls_relative_bias``: the bias of 2SLS is at most b (5, 10, 20, 30%) of
  the bias of OLS;
* ``tsls_size``: a nominal 5% Wald test based on 2SLS rejects at most r
  (10, 15, 20, 25%) of the time;
* ``liml_size``: the same for LIML.

Cells outside the published range are reported as not tabulated; nothing is
extrapolated. The tables assume homoskedastic errors; with robust or
clustered errors the comparison is informal and the effective F of Montiel
Olea & Pflueger (2013) is the better guide.

References
----------
Stock, J. H. and Yogo, M. (2005). Testing for weak instruments in linear IV
regression. In Andrews and Stock (eds.), Identification and Inference for
Econometric Models, Cambridge University Press, 80-108, Tables 5.1-5.4.
"""

from __future__ import annotations

import csv
from functools import lru_cache
from importlib import resources
from typing import Any

from app.estimation.findings import TestResult

TABLE_FILE = "stock_yogo_critical_values.csv"
SOURCE = "Stock & Yogo (2005), Tables 5.1-5.4 (shipped in app/estimation/tables)"
CRITERIA = {
    "tsls_relative_bias": "largest bias of 2SLS relative to OLS (threshold b)",
    "tsls_size": "largest rejection rate of a nominal 5% 2SLS Wald test (threshold r)",
    "liml_size": "largest rejection rate of a nominal 5% LIML Wald test (threshold r)",
}
NAME = "Stock-Yogo critical values"
HOMOSKEDASTIC_NOTE = (
    "Stock and Yogo derive these values for homoskedastic errors; with robust or clustered errors the comparison "
    "is informal, so read the effective F with its own critical values"
)


@lru_cache(maxsize=1)
def stock_yogo_table() -> dict[tuple[str, int, int], list[tuple[float, float]]]:
    """``(criterion, n_endog, n_instruments) -> [(threshold, critical value), ...]`` from the shipped CSV."""
    text = resources.files("app.estimation").joinpath("tables", TABLE_FILE).read_text(encoding="utf-8")
    table: dict[tuple[str, int, int], list[tuple[float, float]]] = {}
    for row in csv.DictReader(text.splitlines()):
        key = (row["table"], int(row["n_endog"]), int(row["K2_instruments"]))
        table.setdefault(key, []).append((float(row["threshold"]), float(row["critical_value"])))
    return {key: sorted(values) for key, values in table.items()}


def tabulated_range(criterion: str) -> str:
    """The published range of one criterion, in words."""
    keys = [key for key in stock_yogo_table() if key[0] == criterion]
    parts = []
    for n_endog in sorted({key[1] for key in keys}):
        counts = sorted(key[2] for key in keys if key[1] == n_endog)
        parts.append(f"{n_endog} focal regressor(s) with {counts[0]}-{counts[-1]} instruments")
    return "; ".join(parts)


def stock_yogo(*, n_endog: int, n_instruments: int, statistic: float | None, covariance_kind: str) -> TestResult:
    """The looked-up rows and how the Cragg-Donald F compares with each critical value."""
    table = stock_yogo_table()
    criteria: list[dict[str, Any]] = []
    for criterion, meaning in CRITERIA.items():
        cells = table.get((criterion, n_endog, n_instruments))
        if cells is None:
            criteria.append(
                {
                    "criterion": criterion,
                    "meaning": meaning,
                    "tabulated": False,
                    "reason": f"not tabulated: Stock and Yogo cover {tabulated_range(criterion)}",
                }
            )
            continue
        criteria.append(
            {
                "criterion": criterion,
                "meaning": meaning,
                "tabulated": True,
                "critical_values": [
                    {
                        "threshold": threshold,
                        "critical_value": value,
                        "exceeds": None if statistic is None else statistic > value,
                    }
                    for threshold, value in cells
                ],
            }
        )
    if not any(entry["tabulated"] for entry in criteria):
        return TestResult.not_applicable(
            NAME,
            f"not tabulated: Stock and Yogo (2005) give no critical values for {n_endog} focal regressor(s) "
            f"and {n_instruments} excluded instrument(s)",
            source=SOURCE,
        )
    notes = [HOMOSKEDASTIC_NOTE] if covariance_kind != "homoskedastic" else []
    return TestResult(
        name=NAME,
        statistic=statistic,
        p_value=None,
        df=None,
        distribution=None,
        null_hypothesis="the instruments are weak in the sense of each criterion",
        source=SOURCE,
        details={
            "compared_statistic": "cragg_donald_f",
            "n_endog": n_endog,
            "n_instruments": n_instruments,
            "significance": 0.05,
            "criteria": criteria,
            "assumption": "homoskedastic errors",
            "notes": notes,
        },
    )
