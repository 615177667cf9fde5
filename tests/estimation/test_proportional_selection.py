"""Oster's (2019) bias-adjusted estimate: the exact cubic, its roots, and the approximation.

Independent checks (no external library implements Oster's estimator in Python):

* a sample built so that proportional selection holds exactly (one observed
  control W1, an unobserved W2 orthogonal to it): with delta and R_max taken
  from the full regression that includes W2, beta* must equal that
  regression's coefficient - an algebraic identity of least squares, not of
  our formula;
* the defining moment equations of Oster's model solved numerically
  (scipy.optimize.fsolve from many starting points, no cubic involved): every
  solution is one of the reported roots;
* the approximate formula agrees with the exact solution where it should (one
  observed control, R_max close to the controlled R^2).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import optimize

from app.estimation.proportional_selection import OsterSystem
from app.estimation.refit import refit
from app.spec import parse_claim

N_ROWS = 4_000


def exact_sample(rng: np.random.Generator) -> tuple[pd.DataFrame, float, float, float]:
    """Data with an unobserved cause orthogonal to the observed one; returns data, beta_long, delta, R2_long."""
    w1 = rng.standard_normal(N_ROWS)
    w2 = rng.standard_normal(N_ROWS)
    basis = np.column_stack([np.ones(N_ROWS), w1])
    w2 -= basis @ np.linalg.lstsq(basis, w2, rcond=None)[0]
    x = 0.5 * w1 + 0.7 * w2 + rng.standard_normal(N_ROWS)
    y = 0.3 * x + 1.0 * w1 + 0.8 * w2 + rng.standard_normal(N_ROWS)
    full = np.column_stack([np.ones(N_ROWS), x, w1, w2])
    coefficients = np.linalg.lstsq(full, y, rcond=None)[0]
    residual = y - full @ coefficients
    r2_long = 1.0 - residual @ residual / np.sum((y - y.mean()) ** 2)
    observed_index = coefficients[2] * (w1 - w1.mean())
    hidden_index = coefficients[3] * (w2 - w2.mean())
    centred_x = x - x.mean()
    delta = (hidden_index @ centred_x / (hidden_index @ hidden_index)) / (observed_index @ centred_x / (observed_index @ observed_index))
    return pd.DataFrame({"outcome": y, "exposure": x, "observed": w1}), float(coefficients[1]), float(delta), float(r2_long)


def oster(frame: pd.DataFrame, **sensitivity: float) -> dict:
    claim = {
        "design": "regression",
        "outcome": "outcome",
        "endogenous": ["exposure"],
        "controls": ["observed"],
        "sensitivity": sensitivity,
    }
    return refit(frame, parse_claim(claim)).to_dict()["diagnostics"]["proportional_selection"][0]


@pytest.fixture(scope="module")
def exact() -> tuple[pd.DataFrame, float, float, float]:
    return exact_sample(np.random.default_rng(7))


def test_beta_star_recovers_the_full_regression_when_proportional_selection_holds(exact) -> None:
    frame, beta_long, delta, r2_long = exact
    result = oster(frame, delta=delta, r2_max=r2_long)
    assert result["beta_star"] == pytest.approx(beta_long, rel=1e-9)
    chosen = next(r for r in result["roots"] if r["estimate"] == result["beta_star"])
    assert chosen["admissible"] is True
    assert len(result["roots"]) == 3, "delta != 1 gives a cubic with three real roots here"


def test_delta_for_zero_makes_zero_a_root(exact) -> None:
    frame, _, _, r2_long = exact
    first = oster(frame, r2_max=r2_long)
    again = oster(frame, delta=first["delta_for_zero"], r2_max=r2_long)
    assert min(abs(r["estimate"]) for r in again["roots"]) < 1e-9


def moment_equations(unknowns: np.ndarray, system: OsterSystem, delta: float, var_y: float) -> np.ndarray:
    """Oster's model written as moments: beta, Cov(X,W1)=a, Var(W1)=s1, Cov(X,W2)=b, Var(W2)=s2."""
    beta, a, s1, b, s2 = unknowns
    sx, tx = system.var_x, system.residual_var_x
    return np.array(
        [
            system.short_estimate - beta - (a + b) / sx,
            system.controlled_estimate - beta - b / tx,
            b * s1 - delta * a * s2,
            var_y * (system.r2_controlled - system.r2_short) - (s1 - (a + b) ** 2 / sx + b * b / tx),
            var_y * (system.r2_max - system.r2_controlled) - (s2 - b * b / tx),
        ]
    )


@pytest.mark.parametrize("delta", [1.0, 0.6, 2.0])
def test_every_numeric_solution_of_the_moment_equations_is_a_reported_root(exact, delta: float) -> None:
    frame, *_ = exact
    result = oster(frame, delta=delta)
    y, x, w = frame["outcome"].to_numpy(), frame["exposure"].to_numpy(), frame["observed"].to_numpy()
    var_y, var_x = np.var(y), np.var(x)
    residual_x = x - np.polyval(np.polyfit(w, x, 1), w)
    system = OsterSystem(
        short_estimate=result["uncontrolled_estimate"],
        controlled_estimate=result["controlled_estimate"],
        var_y=var_y,
        var_x=var_x,
        residual_var_x=np.var(residual_x),
        r2_short=result["uncontrolled_r2"],
        r2_controlled=result["controlled_r2"],
        r2_max=result["r2_max"],
    )
    roots = [r["estimate"] for r in result["roots"]]
    found = set()
    rng = np.random.default_rng(11)
    for _ in range(200):
        start = np.array([rng.normal(0, 3), rng.normal(0, 2), rng.uniform(0.1, 5), rng.normal(0, 2), rng.uniform(0.1, 5)])
        solution, info, status, _ = optimize.fsolve(moment_equations, start, args=(system, delta, var_y), full_output=True, xtol=1e-13)
        if status == 1 and np.max(np.abs(info["fvec"])) < 1e-9:
            assert min(abs(solution[0] - r) for r in roots) < 1e-6, (solution, roots)
            found.add(round(float(solution[0]), 6))
    assert found, "the root finder found no solution at all"
    assert any(abs(result["beta_star"] - f) < 1e-5 for f in found)


def test_approximation_agrees_with_the_exact_solution_for_a_small_step_to_r_max(exact) -> None:
    """One observed control and R_max barely above the controlled R^2: both formulas agree to first order."""
    frame, *_ = exact
    controlled = oster(frame)["controlled_r2"]
    result = oster(frame, r2_max=controlled + 1e-4)
    exact_bias = result["controlled_estimate"] - result["beta_star"]
    approximate_bias = result["controlled_estimate"] - result["beta_star_approximate"]
    assert approximate_bias == pytest.approx(exact_bias, rel=1e-3)
    assert result["warnings"] == []


def test_sign_disagreement_between_approximation_and_exact_solution_is_flagged() -> None:
    """Two controls, one driving the exposure and one the outcome, and a large R_max: the formulas part ways."""
    rng = np.random.default_rng(5)
    driver = rng.standard_normal(N_ROWS)
    other = rng.standard_normal(N_ROWS) + 0.3 * driver
    exposure = 2.0 * driver + rng.standard_normal(N_ROWS)
    outcome = 0.3 * exposure + 1.0 * other + 3.0 * rng.standard_normal(N_ROWS)
    frame = pd.DataFrame({"outcome": outcome, "exposure": exposure, "driver": driver, "other": other})
    claim = {
        "design": "regression",
        "outcome": "outcome",
        "endogenous": ["exposure"],
        "controls": ["driver", "other"],
        "sensitivity": {"r2_max": 0.95},
    }
    result = refit(frame, parse_claim(claim)).to_dict()["diagnostics"]["proportional_selection"][0]
    assert result["beta_star"] > 0 > result["beta_star_approximate"]
    assert any("disagree in sign" in w for w in result["warnings"])


def test_default_r_max_is_one_point_three_times_the_controlled_r2(exact) -> None:
    frame, *_ = exact
    result = oster(frame)
    assert result["r2_max"] == pytest.approx(min(1.0, 1.3 * result["controlled_r2"]))
    assert "common practice" in result["r2_max_rule"]


def test_not_applicable_without_controls_or_with_r_max_below_the_controlled_r2(exact) -> None:
    frame, *_ = exact
    claim = {"design": "regression", "outcome": "outcome", "endogenous": ["exposure"]}
    no_controls = refit(frame, parse_claim(claim)).to_dict()["diagnostics"]["proportional_selection"][0]
    assert no_controls["standing"] == "not_applicable"
    assert "no controls" in no_controls["reason"]
    low = oster(frame, r2_max=0.01)
    assert low["standing"] == "not_applicable"
    assert "must exceed" in low["reason"]
