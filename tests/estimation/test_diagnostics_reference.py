"""Standard IV diagnostics agree with linearmodels' implementations.

Reference library: linearmodels 7.1 ``IV2SLSResults`` (sargan, basmann, durbin,
wu_hausman, wooldridge_regression, first_stage.diagnostics) and ``IVGMMResults.j_stat``,
fitted with ``debiased=True``. Conversions where our convention differs on
purpose are written out beside the check. Tolerance: 1e-6 relative.

Covariances: homoskedastic, robust (HC1) and one-way cluster. Sargan, Basmann,
Durbin and Wu-Hausman assume homoskedastic errors whatever the claim's
covariance (linearmodels computes them the same for every ``cov_type``); the
control-function test, the first-stage Wald test and Hansen J use the claim's.
Data: seeded simulated samples (tests/simulation.py) and, for Hansen J, open
textbook data (MROZ and CARD, tests/estimation/wooldridge_claims.py).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from linearmodels.iv import IV2SLS, IVGMM
from scipy import stats

from app.estimation.refit import refit
from app.spec import parse_claim
from tests.estimation.wooldridge_claims import OVERIDENTIFIED, OpenDataClaim
from tests.simulation import IvDesign, iv_claim, iv_sample

RTOL = 1e-6
TWO_ENDOGENOUS = IvDesign(n_obs=900, first_stage=(0.7, 0.5, 0.3), n_controls=2, heteroskedastic=True)
N_CLUSTERS = 45
COVARIANCES = [("homoskedastic", "unadjusted"), ("robust", "robust"), ("cluster", "clustered")]


@pytest.fixture(scope="module")
def two_focal() -> pd.DataFrame:
    """Two focal regressors: ``focal`` and ``dose`` (a second endogenous regressor driven by z2, z3)."""
    rng = np.random.default_rng(77)
    frame = iv_sample(TWO_ENDOGENOUS, rng)
    frame["dose"] = 0.8 * frame["z3"] - 0.4 * frame["z2"] + 0.5 * frame["focal"] + rng.standard_normal(len(frame))
    frame["outcome"] = frame["outcome"] + 0.25 * frame["dose"]
    return frame


@pytest.fixture(scope="module")
def two_focal_clustered(two_focal: pd.DataFrame) -> pd.DataFrame:
    """The same rows in 45 clusters of 20 that share a shock to the outcome (so clustering changes the errors)."""
    rng = np.random.default_rng(78)
    cluster = np.repeat(np.arange(N_CLUSTERS), len(two_focal) // N_CLUSTERS)
    shock = rng.standard_normal(N_CLUSTERS)
    return two_focal.assign(cluster=cluster, outcome=two_focal["outcome"] + 0.6 * shock[cluster])


def sample_for(request: pytest.FixtureRequest, covariance: str) -> pd.DataFrame:
    """The clustered sample for a cluster claim, the plain one otherwise."""
    return request.getfixturevalue("two_focal_clustered" if covariance == "cluster" else "two_focal")


def claim_for(covariance: str, **fields: object) -> dict[str, object]:
    return iv_claim(TWO_ENDOGENOUS, covariance=covariance, cluster=["cluster"] if covariance == "cluster" else [], **fields)


def linearmodels_2sls(frame: pd.DataFrame, endogenous: list[str], covariance: str) -> object:
    exog = frame[["w1", "w2"]].assign(const=1.0)
    options: dict[str, object] = {"cov_type": covariance, "debiased": True}
    if covariance == "clustered":
        options["clusters"] = frame["cluster"]
    return IV2SLS(frame["outcome"], exog, frame[endogenous], frame[["z1", "z2", "z3"]]).fit(**options)


@pytest.mark.parametrize(("ours", "theirs"), COVARIANCES)
@pytest.mark.parametrize("endogenous", [["focal"], ["focal", "dose"]], ids=["one focal", "two focal"])
def test_overidentification_and_endogeneity_tests(request: pytest.FixtureRequest, ours: str, theirs: str, endogenous: list[str]) -> None:
    """linearmodels: sargan, basmann, durbin(), wu_hausman() and wooldridge_regression (the claim's covariance)."""
    frame = sample_for(request, ours)
    diagnostics = refit(frame, parse_claim(claim_for(ours, endogenous=endogenous))).to_dict()["diagnostics"]
    reference = linearmodels_2sls(frame, endogenous, theirs)
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


def linearmodels_gmm(
    frame: pd.DataFrame,
    covariance: str,
    *,
    cluster: str = "cluster",
    outcome: str = "outcome",
    controls: tuple[str, ...] = ("w1", "w2"),
    endogenous: tuple[str, ...] = ("focal",),
    instruments: tuple[str, ...] = ("z1", "z2", "z3"),
) -> object:
    """linearmodels' two-step IVGMM, weight matrix of the claim's covariance kind (default roles: the simulated sample's).

    The weight keeps linearmodels' default ``debiased=False``: SecondStage puts
    no small-sample factor into the GMM weight, so J = n g' W^-1 g is compared
    as printed, with no conversion.
    """
    weight: dict[str, object] = {"weight_type": covariance}
    options: dict[str, object] = {"cov_type": covariance, "debiased": True}
    if covariance == "clustered":
        weight["clusters"] = options["clusters"] = frame[cluster]
    exog = frame[list(controls)].assign(const=1.0)
    model = IVGMM(frame[outcome], exog, frame[list(endogenous)], frame[list(instruments)], **weight)
    return model.fit(**options)


@pytest.mark.parametrize(("ours", "theirs"), COVARIANCES[1:])
def test_hansen_j_matches_two_step_gmm(request: pytest.FixtureRequest, ours: str, theirs: str) -> None:
    """Hansen (1982) J against linearmodels' IVGMMResults.j_stat: chi2(q - p), here q - p = 2."""
    frame = sample_for(request, ours)
    diagnostics = refit(frame, parse_claim(claim_for(ours))).to_dict()["diagnostics"]
    reference = linearmodels_gmm(frame, theirs)
    assert diagnostics["hansen_j"]["standing"] == "computed"
    assert diagnostics["hansen_j"]["statistic"] == pytest.approx(reference.j_stat.stat, rel=RTOL)
    assert diagnostics["hansen_j"]["p_value"] == pytest.approx(reference.j_stat.pval, rel=RTOL)
    assert diagnostics["hansen_j"]["df"] == reference.j_stat.df == 2


def test_hansen_j_not_applicable_under_homoskedastic_errors(two_focal: pd.DataFrame) -> None:
    """README, JSON section: hansen_j is "not applicable under homoskedastic errors (it then equals Sargan)".

    The reason's claim is checked too: linearmodels' two-step GMM with a
    homoskedastic weight gives a J equal to the Sargan statistic we report.
    """
    diagnostics = refit(two_focal, parse_claim(claim_for("homoskedastic"))).to_dict()["diagnostics"]
    hansen = diagnostics["hansen_j"]
    assert hansen["standing"] == "not_applicable"
    assert hansen["statistic"] is None and hansen["p_value"] is None
    assert "homoskedastic" in hansen["reason"] and "Sargan" in hansen["reason"]
    assert diagnostics["sargan"]["standing"] == "computed"
    assert diagnostics["sargan"]["statistic"] == pytest.approx(linearmodels_gmm(two_focal, "unadjusted").j_stat.stat, rel=RTOL)


@pytest.fixture(scope="module", params=OVERIDENTIFIED, ids=lambda claim: claim.name)
def open_claim(request: pytest.FixtureRequest) -> tuple[OpenDataClaim, pd.DataFrame]:
    claim = request.param
    return claim, claim.sample()


def open_roles(claim: OpenDataClaim) -> dict[str, object]:
    """The claim's roles as linearmodels_gmm's keywords."""
    return {"outcome": claim.outcome, "controls": claim.controls, "endogenous": claim.endogenous, "instruments": claim.instruments}


@pytest.mark.parametrize(("ours", "theirs"), COVARIANCES[1:])
def test_hansen_j_on_open_data_matches_two_step_gmm(open_claim: tuple[OpenDataClaim, pd.DataFrame], ours: str, theirs: str) -> None:
    """MROZ (both parents' education) and CARD (nearc4 and nearc2), q - p = 1: J against linearmodels' IVGMM j_stat."""
    claim, sample = open_claim
    diagnostics = refit(claim.frame(), parse_claim(claim.spec(ours))).to_dict()["diagnostics"]
    reference = linearmodels_gmm(sample, theirs, cluster=claim.cluster, **open_roles(claim))
    assert diagnostics["hansen_j"]["statistic"] == pytest.approx(reference.j_stat.stat, rel=RTOL)
    assert diagnostics["hansen_j"]["p_value"] == pytest.approx(reference.j_stat.pval, rel=RTOL)
    assert diagnostics["hansen_j"]["df"] == 1


def test_hansen_j_on_open_data_not_applicable_under_homoskedastic_errors(open_claim: tuple[OpenDataClaim, pd.DataFrame]) -> None:
    """README's documented behaviour on real data; the Sargan statistic equals linearmodels' homoskedastic-weight J."""
    claim, sample = open_claim
    diagnostics = refit(claim.frame(), parse_claim(claim.spec("homoskedastic"))).to_dict()["diagnostics"]
    assert diagnostics["hansen_j"]["standing"] == "not_applicable"
    reference = linearmodels_gmm(sample, "unadjusted", **open_roles(claim))
    assert diagnostics["sargan"]["statistic"] == pytest.approx(reference.j_stat.stat, rel=RTOL)


@pytest.mark.parametrize(("ours", "theirs"), COVARIANCES)
def test_first_stage_strength(request: pytest.FixtureRequest, ours: str, theirs: str) -> None:
    """Partial R^2, Shea's partial R^2 and the first-stage test per focal regressor.

    linearmodels reports, for homoskedastic errors, the classical F; for robust
    and clustered errors a chi-squared Wald statistic of the excluded
    coefficients. We report that Wald statistic divided by q as a robust F (and
    keep it as wald_chi2); clustered, it is referred to F(q, G-1).
    """
    endogenous = ["focal", "dose"]
    frame = sample_for(request, ours)
    first_stages = refit(frame, parse_claim(claim_for(ours, endogenous=endogenous)))
    first_stages = first_stages.to_dict()["diagnostics"]["first_stage"]
    reference = linearmodels_2sls(frame, endogenous, theirs).first_stage.diagnostics
    for entry in first_stages:
        expected = reference.loc[entry["regressor"]]
        assert entry["partial_r2"] == pytest.approx(expected["partial.rsquared"], rel=RTOL)
        assert entry["shea_partial_r2"] == pytest.approx(expected["shea.rsquared"], rel=RTOL)
        if ours == "homoskedastic":
            assert entry["statistic"] == pytest.approx(expected["f.stat"], rel=RTOL)
        else:
            assert entry["wald_chi2"] == pytest.approx(expected["f.stat"], rel=RTOL)
            assert entry["statistic"] == pytest.approx(expected["f.stat"] / 3, rel=RTOL)
        if ours == "cluster":
            assert entry["df"] == [3, N_CLUSTERS - 1]
            assert entry["p_value"] == pytest.approx(stats.f.sf(expected["f.stat"] / 3, 3, N_CLUSTERS - 1), rel=RTOL, abs=1e-14)


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
