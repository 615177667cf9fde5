"""Standard IV diagnostics agree with linearmodels' implementations.

Reference library: linearmodels 7.1 ``IV2SLSResults`` (sargan, basmann, durbin,
wu_hausman, wooldridge_regression, first_stage.diagnostics) and ``IVGMMResults.j_stat``,
fitted with ``debiased=True``. Conversions where our convention differs on
purpose are written out beside the check. Tolerance: 1e-6 relative.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from linearmodels.iv import IV2SLS, IVGMM

from app.estimation.refit import refit
from app.spec import parse_claim
from tests.simulation import IvDesign, iv_claim, iv_sample

RTOL = 1e-6
TWO_ENDOGENOUS = IvDesign(n_obs=900, first_stage=(0.7, 0.5, 0.3), n_controls=2, heteroskedastic=True)


@pytest.fixture(scope="module")
def two_focal() -> pd.DataFrame:
    """Two focal regressors: ``focal`` and ``dose`` (a second endogenous regressor driven by z2, z3)."""
    rng = np.random.default_rng(77)
    frame = iv_sample(TWO_ENDOGENOUS, rng)
    frame["dose"] = 0.8 * frame["z3"] - 0.4 * frame["z2"] + 0.5 * frame["focal"] + rng.standard_normal(len(frame))
    frame["outcome"] = frame["outcome"] + 0.25 * frame["dose"]
    return frame


def linearmodels_2sls(frame: pd.DataFrame, endogenous: list[str], covariance: str) -> object:
    exog = frame[["w1", "w2"]].assign(const=1.0)
    return IV2SLS(frame["outcome"], exog, frame[endogenous], frame[["z1", "z2", "z3"]]).fit(cov_type=covariance, debiased=True)


@pytest.mark.parametrize(("ours", "theirs"), [("homoskedastic", "unadjusted"), ("robust", "robust")])
@pytest.mark.parametrize("endogenous", [["focal"], ["focal", "dose"]], ids=["one focal", "two focal"])
def test_overidentification_and_endogeneity_tests(two_focal: pd.DataFrame, ours: str, theirs: str, endogenous: list[str]) -> None:
    claim = iv_claim(TWO_ENDOGENOUS, endogenous=endogenous, covariance=ours)
    diagnostics = refit(two_focal, parse_claim(claim)).to_dict()["diagnostics"]
    reference = linearmodels_2sls(two_focal, endogenous, theirs)
    degree = 3 - len(endogenous)
    for key, expected in [
        ("sargan", reference.sargan),
        ("basmann", reference.basmann),
        ("durbin", reference.durbin()),
        ("wu_hausman", reference.wu_hausman()),
        ("control_function", reference.wooldridge_regression),
    ]:
        assert diagnostics[key]["statistic"] == pytest.approx(expected.stat, rel=RTOL), key
        assert diagnostics[key]["p_value"] == pytest.approx(expected.pval, rel=RTOL, abs=1e-14), key
    assert diagnostics["sargan"]["df"] == degree
    assert diagnostics["wu_hausman"]["df"] == [len(endogenous), reference.wu_hausman().df_denom]


def test_hansen_j_matches_two_step_gmm(two_focal: pd.DataFrame) -> None:
    claim = iv_claim(TWO_ENDOGENOUS, covariance="robust")
    diagnostics = refit(two_focal, parse_claim(claim)).to_dict()["diagnostics"]
    exog = two_focal[["w1", "w2"]].assign(const=1.0)
    reference = IVGMM(two_focal["outcome"], exog, two_focal[["focal"]], two_focal[["z1", "z2", "z3"]]).fit(cov_type="robust", debiased=True)
    assert diagnostics["hansen_j"]["statistic"] == pytest.approx(reference.j_stat.stat, rel=RTOL)
    assert diagnostics["hansen_j"]["p_value"] == pytest.approx(reference.j_stat.pval, rel=RTOL)


@pytest.mark.parametrize(("ours", "theirs"), [("homoskedastic", "unadjusted"), ("robust", "robust")])
def test_first_stage_strength(two_focal: pd.DataFrame, ours: str, theirs: str) -> None:
    """Partial R^2, Shea's partial R^2 and the first-stage test per focal regressor.

    linearmodels reports, for homoskedastic errors, the classical F; for robust
    errors a chi-squared Wald statistic of the excluded coefficients. We report
    that Wald statistic divided by q as a robust F (and keep it as wald_chi2).
    """
    endogenous = ["focal", "dose"]
    first_stages = refit(two_focal, parse_claim(iv_claim(TWO_ENDOGENOUS, endogenous=endogenous, covariance=ours)))
    first_stages = first_stages.to_dict()["diagnostics"]["first_stage"]
    reference = linearmodels_2sls(two_focal, endogenous, theirs).first_stage.diagnostics
    for entry in first_stages:
        expected = reference.loc[entry["regressor"]]
        assert entry["partial_r2"] == pytest.approx(expected["partial.rsquared"], rel=RTOL)
        assert entry["shea_partial_r2"] == pytest.approx(expected["shea.rsquared"], rel=RTOL)
        if ours == "homoskedastic":
            assert entry["statistic"] == pytest.approx(expected["f.stat"], rel=RTOL)
        else:
            assert entry["wald_chi2"] == pytest.approx(expected["f.stat"], rel=RTOL)
            assert entry["statistic"] == pytest.approx(expected["f.stat"] / 3, rel=RTOL)


def test_just_identified_model_marks_overidentification_not_applicable(two_focal: pd.DataFrame) -> None:
    claim = iv_claim(TWO_ENDOGENOUS, instruments=["z1"], covariance="robust")
    diagnostics = refit(two_focal, parse_claim(claim)).to_dict()["diagnostics"]
    for key in ("sargan", "basmann", "hansen_j"):
        assert diagnostics[key]["standing"] == "not_applicable"
        assert "exactly identified" in diagnostics[key]["reason"]
        assert diagnostics[key]["statistic"] is None


def test_plain_regression_marks_every_iv_diagnostic_not_applicable(two_focal: pd.DataFrame) -> None:
    claim = iv_claim(TWO_ENDOGENOUS, instruments=[], design="regression", covariance="robust")
    findings = refit(two_focal, parse_claim(claim)).to_dict()
    assert {row["estimator"] for row in findings["estimates"]} == {"ols"}
    for key in ("first_stage", "sargan", "hansen_j", "durbin", "control_function"):
        assert findings["diagnostics"][key]["standing"] == "not_applicable"
        assert "no instruments" in findings["diagnostics"][key]["reason"]


def test_estimators_that_cannot_be_computed_are_reported_with_a_reason(two_focal: pd.DataFrame) -> None:
    """A second focal regressor equal to the first plus instruments leaves no LIML root; 2SLS still exists."""
    frame = two_focal.assign(dose=two_focal["focal"] + two_focal["z3"] - 0.5 * two_focal["z1"])
    findings = refit(frame, parse_claim(iv_claim(TWO_ENDOGENOUS, endogenous=["focal", "dose"], covariance="robust")))
    summaries = {summary.code: summary for summary in findings.estimators}
    assert {row.estimator for row in findings.estimates} == {"ols", "2sls", "gmm"}
    for code in ("liml", "fuller1", "fuller4"):
        assert summaries[code].available is False
        assert "LIML root is not defined" in summaries[code].reason
