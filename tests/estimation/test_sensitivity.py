"""Cinelli-Hazlett sensitivity to an omitted common cause, against pysensemakr and the paper.

Source data: the Darfur example bundled with pysensemakr 0.0.8 (Cinelli &
Hazlett 2020). pysensemakr 0.0.8 fails under pandas 3 whenever it reads a
partial R^2 from a fitted model (positional Series indexing), which includes
every benchmark bound computed from a model. So the test runs the parts of
pysensemakr that work - ``robustness_value`` from the statsmodels fit, and its
formula functions fed with numbers (``partial_r2``, ``group_partial_r2``,
``ovb_partial_r2_bound``, ``adjusted_estimate``, ``adjusted_se``,
``adjusted_t``) - and computes the benchmark partial R^2 that those need from
statsmodels t and F statistics (t^2/(t^2 + df), F p/(F p + df)), re-deriving
the package's steps. Tolerance: 1e-9 relative.
"""

from __future__ import annotations

import math
import tomllib
from decimal import Decimal
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import sensemakr
import statsmodels.formula.api as smf
from scipy import stats
from sensemakr import bias_functions, sensitivity_bounds, sensitivity_statistics

from app.errors import SpecError
from app.estimation.refit import refit
from app.spec import parse_claim

RTOL = 1e-9
CONTROLS = ["age", "farmer_dar", "herder_dar", "pastvoted", "hhsize_darfur", "female"]
FORMULA = "peacefactor ~ directlyharmed + " + " + ".join(CONTROLS) + " + C(village)"
PUBLISHED = tomllib.loads((Path(__file__).parent / "reference" / "cinelli_hazlett_2020.toml").read_text())


@pytest.fixture(scope="module")
def darfur() -> pd.DataFrame:
    return sensemakr.load_darfur()


def darfur_claim(**fields: object) -> dict:
    claim = {
        "design": "regression",
        "outcome": "peacefactor",
        "endogenous": ["directlyharmed"],
        "controls": CONTROLS,
        "categorical": ["village"],
        "benchmarks": ["female", "village"],
        "covariance": "homoskedastic",
    }
    claim.update(fields)
    return claim


@pytest.fixture(scope="module")
def darfur_findings(darfur: pd.DataFrame) -> dict:
    return refit(darfur, parse_claim(darfur_claim(sensitivity={"q": 0.5}))).to_dict()


@pytest.fixture(scope="module")
def sensitivity(darfur_findings: dict) -> dict:
    return darfur_findings["diagnostics"]["omitted_cause_sensitivity"][0]


@pytest.fixture(scope="module")
def outcome_model(darfur: pd.DataFrame):
    return smf.ols(FORMULA, data=darfur).fit()


@pytest.fixture(scope="module")
def treatment_model(darfur: pd.DataFrame):
    return smf.ols(FORMULA.replace("peacefactor ~ directlyharmed + ", "directlyharmed ~ "), data=darfur).fit()


def test_estimate_and_partial_r2_match_statsmodels_and_pysensemakr(sensitivity: dict, outcome_model) -> None:
    t = outcome_model.tvalues["directlyharmed"]
    dof = int(outcome_model.df_resid)
    assert sensitivity["estimate"] == pytest.approx(outcome_model.params["directlyharmed"], rel=RTOL)
    assert sensitivity["std_error"] == pytest.approx(outcome_model.bse["directlyharmed"], rel=RTOL)
    assert sensitivity["dof"] == dof == 783
    assert sensitivity["partial_r2_outcome"] == pytest.approx(sensitivity_statistics.partial_r2(t_statistic=t, dof=dof), rel=RTOL)


@pytest.mark.parametrize(
    ("key", "q", "alpha"),
    [
        ("robustness_value", 1.0, 1.0),
        ("robustness_value_alpha", 1.0, 0.05),
        ("robustness_value_q", 0.5, 1.0),
        ("robustness_value_q_alpha", 0.5, 0.05),
    ],
)
def test_robustness_values_match_pysensemakr(sensitivity: dict, outcome_model, key: str, q: float, alpha: float) -> None:
    """pysensemakr's robustness_value runs on the statsmodels fit directly (alpha = 1 means no significance)."""
    with np.errstate(divide="ignore"):  # alpha = 1 gives f* = 0 and a harmless 1/0 inside the package
        reference = sensemakr.robustness_value(model=outcome_model, covariates="directlyharmed", q=q, alpha=alpha)
    assert sensitivity[key] == pytest.approx(float(np.asarray(reference)[0]), rel=RTOL)


def test_robustness_value_edge_case_where_the_treatment_bound_alone_suffices() -> None:
    """f_q > 1/f*: pysensemakr (and the R package) switch to (f_q^2 - f*^2)/(1 + f_q^2)."""
    from app.estimation.sensitivity import robustness_value

    t, dof = 40.0, 50
    reference = sensemakr.robustness_value(t_statistic=t, dof=dof, q=1.0, alpha=0.05)
    assert robustness_value(t, dof, q=1.0, alpha=0.05) == pytest.approx(float(np.asarray(reference)[0]), rel=RTOL)


def benchmark_r2(outcome_model, treatment_model, columns: list[str]) -> tuple[float, float]:
    """Partial R^2 of a benchmark with the treatment and with the outcome, from statsmodels tests."""
    if len(columns) == 1:
        r2d = sensitivity_statistics.partial_r2(t_statistic=treatment_model.tvalues[columns[0]], dof=treatment_model.df_resid)
        r2y = sensitivity_statistics.partial_r2(t_statistic=outcome_model.tvalues[columns[0]], dof=outcome_model.df_resid)
        return float(r2d), float(r2y)
    values = []
    for model in (treatment_model, outcome_model):
        restriction = np.zeros((len(columns), len(model.params)))
        for row, column in enumerate(columns):
            restriction[row, list(model.params.index).index(column)] = 1.0
        f_statistic = float(np.squeeze(model.f_test(restriction).fvalue))
        values.append(
            float(sensitivity_statistics.group_partial_r2(f_statistic=f_statistic, p=len(columns), dof=model.df_resid))
        )
    return values[0], values[1]


@pytest.mark.parametrize("benchmark", ["female", "village"])
def test_benchmark_bounds_match_pysensemakr_formulas(
    sensitivity: dict, outcome_model, treatment_model, benchmark: str
) -> None:
    columns = [benchmark] if benchmark == "female" else [c for c in outcome_model.params.index if c.startswith("C(village)")]
    r2d, r2y = benchmark_r2(outcome_model, treatment_model, columns)
    ours = [b for b in sensitivity["benchmark_bounds"] if b["benchmark"] == benchmark]
    estimate = float(outcome_model.params["directlyharmed"])
    se, dof = float(outcome_model.bse["directlyharmed"]), int(outcome_model.df_resid)
    assert [b["multiplier"] for b in ours] == [1.0, 2.0, 3.0]
    for bound in ours:
        assert bound["benchmark_partial_r2_focal"] == pytest.approx(r2d, rel=RTOL)
        assert bound["benchmark_partial_r2_outcome"] == pytest.approx(r2y, rel=RTOL)
        try:
            reference = sensitivity_bounds.ovb_partial_r2_bound(r2dxj_x=r2d, r2yxj_dx=r2y, kd=[bound["multiplier"]])
        except SystemExit:  # the package's way of saying the multiplier is impossible
            assert bound["available"] is False
            assert "impossible" in bound["reason"]
            continue
        assert bound["available"] is True
        r2dz, r2yz = float(reference["r2dz_x"][0]), float(reference["r2yz_dx"][0])
        assert bound["r2dz_x"] == pytest.approx(r2dz, rel=RTOL)
        assert bound["r2yz_dx"] == pytest.approx(min(r2yz, 1.0), rel=RTOL)
        adjusted = bias_functions.adjusted_estimate(r2dz, min(r2yz, 1.0), estimate=estimate, se=se, dof=dof)
        adjusted_se = bias_functions.adjusted_se(r2dz, min(r2yz, 1.0), se=se, dof=dof)
        assert bound["adjusted_estimate"] == pytest.approx(float(adjusted), rel=RTOL)
        assert bound["adjusted_std_error"] == pytest.approx(float(adjusted_se), rel=RTOL)
        if adjusted_se == 0:  # an omitted cause explaining all of the outcome's residual variation
            assert bound["r2yz_dx_capped"] is True
            assert bound["adjusted_t"] is None
        else:
            reference_t = bias_functions.adjusted_t(r2dz, min(r2yz, 1.0), estimate=estimate, se=se, dof=dof)
            assert bound["adjusted_t"] == pytest.approx(float(reference_t), rel=RTOL)
        # Interval re-derived with t(df - 1), as in Cinelli & Hazlett (2020); pysensemakr 0.0.8 uses t(df) here.
        critical = stats.t.ppf(0.975, dof - 1)
        assert bound["adjusted_ci_low"] == pytest.approx(float(adjusted - critical * adjusted_se), rel=RTOL)


def matches_printed(value: float, printed: str) -> bool:
    exponent = Decimal(printed).as_tuple().exponent
    return abs(Decimal(repr(value)) - Decimal(printed)) <= Decimal(1).scaleb(exponent) / 2


def test_published_darfur_values(sensitivity: dict) -> None:
    """Cinelli & Hazlett (2020), values quoted from memory (reference/cinelli_hazlett_2020.toml)."""
    female = next(b for b in sensitivity["benchmark_bounds"] if b["benchmark"] == "female" and b["multiplier"] == 1.0)
    observed = {
        "estimate": sensitivity["estimate"],
        "std_error": sensitivity["std_error"],
        "t_statistic": sensitivity["t_statistic"],
        "partial_r2_outcome": sensitivity["partial_r2_outcome"],
        "robustness_value": sensitivity["robustness_value"],
        "robustness_value_alpha": sensitivity["robustness_value_alpha"],
        "female_1x_r2dz_x": female["r2dz_x"],
        "female_1x_r2yz_dx": female["r2yz_dx"],
        "female_1x_adjusted_estimate": female["adjusted_estimate"],
    }
    for key, printed in PUBLISHED.items():
        assert matches_printed(observed[key], printed), (key, observed[key], printed)


def test_contour_grid_gives_the_adjusted_estimate_over_both_partial_r2(sensitivity: dict) -> None:
    contour = sensitivity["contour"]
    grid = np.array(contour["adjusted_estimate"])
    axis = np.array(contour["r2dz_x"])
    assert grid.shape == (axis.size, axis.size)
    assert np.allclose(grid[0, :], sensitivity["estimate"])
    i, j = 7, 11
    expected = bias_functions.adjusted_estimate(axis[i], axis[j], estimate=sensitivity["estimate"], se=sensitivity["std_error"], dof=sensitivity["dof"])
    assert grid[i, j] == pytest.approx(float(expected), rel=RTOL)
    assert np.all(np.diff(grid[1:, 1:], axis=0) < 0), "stronger confounding moves the estimate further down"
    assert contour["critical_t"] == pytest.approx(stats.t.ppf(0.975, sensitivity["dof"] - 1))


def test_sensitivity_uses_the_classical_standard_error_whatever_the_claim_says(darfur: pd.DataFrame, sensitivity: dict) -> None:
    robust = refit(darfur, parse_claim(darfur_claim(covariance="robust", sensitivity={"q": 0.5}))).to_dict()
    other = robust["diagnostics"]["omitted_cause_sensitivity"][0]
    assert other["robustness_value"] == pytest.approx(sensitivity["robustness_value"], rel=1e-12)
    assert "classical" in other["standard_error_kind"]


def test_every_design_with_an_ols_fit_carries_both_sensitivity_keys(darfur_findings: dict) -> None:
    diagnostics = darfur_findings["diagnostics"]
    assert diagnostics["omitted_cause_sensitivity"][0]["standing"] == "computed"
    assert diagnostics["proportional_selection"][0]["standing"] == "computed"
    assert math.isfinite(diagnostics["omitted_cause_sensitivity"][0]["statistic"])


def test_benchmark_that_is_not_a_control_is_refused() -> None:
    with pytest.raises(SpecError, match="benchmark 'wealth' is not a control"):
        parse_claim(darfur_claim(benchmarks=["wealth"]))
