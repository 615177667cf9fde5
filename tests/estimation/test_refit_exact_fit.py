"""A claim whose outcome is an exact linear function of its regressors is refused with a named message.

With zero residuals the residual variance is 0/0 and rounding gives it either
sign; the engine must say what is wrong rather than fail (or print standard
errors of 1e-15). A fit that is close but not exact still runs, and its
residual standard deviation is never negative or complex.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from app.errors import DesignError
from app.estimation.refit import refit
from app.spec import parse_claim

ROWS = 400


@pytest.fixture(scope="module")
def shop() -> pd.DataFrame:
    """Invented: weekly sales of shop staff, hours of training, a schedule lottery, tenure, store and week."""
    rng = np.random.default_rng(20240611)
    lottery = rng.integers(0, 2, ROWS).astype(float)
    tenure = rng.gamma(3.0, 2.0, ROWS)
    training = 2.0 * lottery + 0.3 * tenure + rng.normal(size=ROWS)
    sales = 1.5 + 0.4 * training + 0.2 * tenure + rng.normal(size=ROWS)
    return pd.DataFrame(
        {
            "weekly_sales": sales,
            "sales_copy": sales,
            "training_hours": training,
            "schedule_lottery": lottery,
            "tenure_years": tenure,
            "store_id": np.repeat(np.arange(ROWS // 4), 4),
            "week": np.tile(np.arange(4), ROWS // 4),
            "open_shift": (rng.normal(size=ROWS) + lottery > 0).astype(float),
        }
    )


def claim(**fields: object) -> dict:
    base = {
        "design": "iv",
        "outcome": "weekly_sales",
        "endogenous": ["training_hours"],
        "instruments": ["schedule_lottery"],
        "controls": ["tenure_years", "sales_copy"],
        "covariance": "robust",
    }
    return {**base, **fields}


@pytest.mark.parametrize(
    "fields",
    [
        {},
        {"design": "regression", "instruments": []},
        {"design": "mediation", "endogenous": [], "instruments": [], "mediator": "training_hours", "treatment": ["schedule_lottery"]},
        {"design": "panel", "instruments": [], "unit": "store_id", "time": "week"},
        {"design": "selection", "instruments": [], "selected": "open_shift", "selection_covariates": ["schedule_lottery"]},
        {"design": "selection", "endogenous": ["open_shift"], "instruments": ["schedule_lottery"]},
    ],
    ids=["iv", "regression", "mediation", "panel", "selected sample", "chosen treatment"],
)
def test_an_outcome_copied_as_a_control_is_refused_by_name(shop: pd.DataFrame, fields: dict) -> None:
    with pytest.raises(DesignError) as raised:
        refit(shop, parse_claim(claim(**fields)))
    message = str(raised.value)
    assert "'weekly_sales' is an exact linear function of" in message
    assert "sales_copy" in message


def test_an_outcome_equal_to_a_unit_effect_plus_the_regressor_is_refused_in_the_within_model(shop: pd.DataFrame) -> None:
    frame = shop.assign(weekly_sales=shop["training_hours"] + 0.1 * shop["store_id"])
    spec = parse_claim(claim(design="panel", instruments=[], controls=[], unit="store_id", time="week"))
    with pytest.raises(DesignError, match=r"fixed-effects \(within\) model"):
        refit(frame, spec)


def test_three_rows_on_a_line_are_refused() -> None:
    frame = pd.DataFrame({"hours": [1.0, 4.0, 7.0], "lottery": [2.0, 5.0, 9.0], "sales": [3.0, 6.0, 9.0]})
    spec = parse_claim({"outcome": "sales", "endogenous": ["hours"], "instruments": ["lottery"], "covariance": "robust"})
    with pytest.raises(DesignError, match="'sales' is an exact linear function of hours, \\(intercept\\)"):
        refit(frame, spec)


def test_a_close_but_inexact_fit_still_runs_with_a_real_residual_spread(shop: pd.DataFrame) -> None:
    frame = shop.assign(sales_copy=shop["weekly_sales"] + 1e-3 * np.random.default_rng(7).normal(size=ROWS))
    findings = refit(frame, parse_claim(claim(covariance="homoskedastic"))).to_dict()
    for summary in findings["estimators"]:
        assert isinstance(summary["residual_std"], float)
        assert summary["residual_std"] >= 0.0
