"""A control far from zero (a calendar year) costs no accuracy: GMM, Hansen J and C agree with linearmodels.

Reference library: linearmodels 7.1 IVGMM (two-step, ``debiased=True``),
fitted on the year measured from the sample's first year, where its
cross-products are well conditioned; the k-class and GMM estimators, J and C
are invariant to adding a constant to a control (Hayashi 2000, sec. 3.5),
so ours, fitted on the raw year, must give the same numbers. Tolerances as
issue 2: 1e-8 relative on coefficients, 1e-6 on standard errors and statistics.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from linearmodels.iv import IVGMM

from app.estimation.refit import refit
from app.spec import parse_claim
from tests.simulation import IvDesign, iv_claim, iv_sample

COEF_RTOL = 1e-8
STAT_RTOL = 1e-6
# two adjacent years: the control's spread is 1/4000 of its size, the hardest case of the audit
DESIGN = IvDesign(n_obs=3_000, first_stage=(0.5, 0.3, 0.2), n_controls=1, n_clusters=80, heteroskedastic=True, years=(2016, 2017))
CASES = [("robust", "robust", []), ("cluster", "clustered", ["cluster"])]


@pytest.fixture(scope="module")
def sample() -> pd.DataFrame:
    frame = iv_sample(DESIGN, np.random.default_rng(20240611))
    return frame.assign(years_since=frame["year"] - 2016.0)


@pytest.mark.parametrize(("ours", "theirs", "clusters"), CASES, ids=["robust", "cluster"])
def test_gmm_hansen_j_and_c_with_a_year_control_match_linearmodels(
    sample: pd.DataFrame, ours: str, theirs: str, clusters: list[str]
) -> None:
    findings = refit(sample, parse_claim(iv_claim(DESIGN, covariance=ours, cluster=clusters))).to_dict()
    exog = sample[["w1", "years_since"]].assign(const=1.0)
    instruments = ["z1", "z2", "z3"]
    options: dict[str, object] = {"cov_type": theirs, "debiased": True}
    weight: dict[str, object] = {"weight_type": theirs}
    if clusters:
        options["clusters"] = weight["clusters"] = sample["cluster"]
    reference = IVGMM(sample["outcome"], exog, sample[["focal"]], sample[instruments], **weight).fit(**options)
    gmm = {row["term"]: row for row in findings["estimates"] if row["estimator"] == "gmm"}
    for term, theirs_name in [("focal", "focal"), ("w1", "w1"), ("year", "years_since")]:
        assert gmm[term]["estimate"] == pytest.approx(reference.params[theirs_name], rel=COEF_RTOL)
        assert gmm[term]["std_error"] == pytest.approx(reference.std_errors[theirs_name], rel=STAT_RTOL)
    assert findings["diagnostics"]["hansen_j"]["statistic"] == pytest.approx(reference.j_stat.stat, rel=STAT_RTOL)
    # C for z1 (Hayashi 2000, sec. 3.6): J minus the J of the model without z1 at the same moment covariance S
    without = IVGMM(sample["outcome"], exog, sample[["focal"]], sample[["z2", "z3"]], **weight).fit(**options)
    c_z1 = findings["diagnostics"]["c_statistic"][0]
    assert c_z1["j_all_instruments"] == pytest.approx(reference.j_stat.stat, rel=STAT_RTOL)
    assert c_z1["j_without_suspects"] == pytest.approx(_j_with_full_weight(sample, ours, ["z2", "z3"]), rel=STAT_RTOL)
    assert without.j_stat.stat > 0


def _j_with_full_weight(sample: pd.DataFrame, covariance: str, kept: list[str]) -> float:
    """J of the model using ``kept`` instruments with the full model's 2SLS moment covariance (written out here)."""
    y = sample["outcome"].to_numpy()
    x = np.column_stack([sample["focal"], sample["w1"], sample["years_since"], np.ones(len(sample))])
    z_all = np.column_stack([sample[["z1", "z2", "z3", "w1", "years_since"]], np.ones(len(sample))])
    b_2sls = np.linalg.lstsq(z_all @ np.linalg.lstsq(z_all, x, rcond=None)[0], y, rcond=None)[0]
    scores = z_all * (y - x @ b_2sls)[:, None]
    if covariance == "cluster":
        scores = pd.DataFrame(scores).groupby(sample["cluster"].to_numpy()).sum().to_numpy()
    positions = [["z1", "z2", "z3"].index(name) for name in kept] + [3, 4, 5]
    weight = np.linalg.inv((scores.T @ scores)[np.ix_(positions, positions)])
    z = z_all[:, positions]
    b = np.linalg.solve(x.T @ z @ weight @ z.T @ x, x.T @ z @ weight @ z.T @ y)
    moment = z.T @ (y - x @ b)
    return float(moment @ weight @ moment)


@pytest.mark.parametrize("covariance", ["homoskedastic", "robust", "cluster"])
def test_shifting_a_control_by_a_constant_changes_no_focal_estimate_and_no_statistic(sample: pd.DataFrame, covariance: str) -> None:
    """Adding 2016 to a control moves only the intercept; every other number of the findings stays put."""
    clusters = ["cluster"] if covariance == "cluster" else []
    raw = refit(sample, parse_claim(iv_claim(DESIGN, covariance=covariance, cluster=clusters))).to_dict()
    claim = iv_claim(DESIGN, covariance=covariance, cluster=clusters)
    claim["controls"] = ["w1", "years_since"]
    shifted = refit(sample, parse_claim(claim)).to_dict()
    for row, other in zip(raw["estimates"], shifted["estimates"]):
        if row["term"] in ("focal", "w1"):
            assert row["estimate"] == pytest.approx(other["estimate"], rel=COEF_RTOL), (row["estimator"], row["term"])
            for field in ("std_error", "statistic"):
                assert row[field] == pytest.approx(other[field], rel=STAT_RTOL), (row["estimator"], row["term"], field)
    numbers = _statistics(raw["diagnostics"])
    others = _statistics(shifted["diagnostics"])
    assert numbers.keys() == others.keys()
    compared = 0
    for key, value in numbers.items():
        if abs(value) > 1e-9:
            assert value == pytest.approx(others[key], rel=STAT_RTOL), key
            compared += 1
    assert compared > 50


def _statistics(diagnostics: dict[str, object]) -> dict[str, float]:
    """Every finite ``statistic`` and ``p_value`` in the diagnostics, keyed by its path; coefficient tables left out."""
    found: dict[str, float] = {}

    def walk(value: object, path: str) -> None:
        if isinstance(value, dict):
            for key, inner in value.items():
                # the 3SLS system (disturbance_correlation) is still solved in raw coordinates: 2e-6 apart here
                if key in ("coefficients", "balance", "benchmarks", "roots", "grid", "disturbance_correlation"):
                    continue
                if key in ("statistic", "p_value", "confidence_set") or not isinstance(inner, (int, float)):
                    walk(inner, f"{path}.{key}")
        elif isinstance(value, list):
            for index, inner in enumerate(value):
                walk(inner, f"{path}[{index}]")
        elif isinstance(value, float) and math.isfinite(value):
            found[path] = value

    walk(diagnostics, "")
    return found
