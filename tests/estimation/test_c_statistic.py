"""The C statistic (difference-in-Sargan/Hansen) per instrument and per named subset.

References: an independent brute-force GMM computation from the raw arrays
(explicit instrument matrices, moment covariance ``sum_i z_i z_i' e_i^2`` at the
2SLS residuals, efficient GMM with and without the suspects, Hayashi 2000,
sec. 3.6), and linearmodels 7.1's Sargan statistic for the homoskedastic case
(C is then the difference of two Sargan statistics with the full model's
error variance). Tolerance 1e-8 relative.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from linearmodels.iv import IV2SLS

from app.estimation.refit import refit
from app.spec import parse_claim
from tests.simulation import IvDesign, iv_claim, iv_sample

DESIGN = IvDesign(n_obs=800, first_stage=(0.6, 0.5, 0.4), direct=(0.0, 0.0, 0.25), n_controls=2, heteroskedastic=True)


@pytest.fixture(scope="module")
def sample() -> pd.DataFrame:
    return iv_sample(DESIGN, np.random.default_rng(41))


def c_entries(frame: pd.DataFrame, covariance: str, subsets: list[list[str]] | None = None) -> list[dict]:
    claim = iv_claim(DESIGN, covariance=covariance, instrument_subsets=subsets or [])
    return refit(frame, parse_claim(claim)).to_dict()["diagnostics"]["c_statistic"]


def brute_force_c(frame: pd.DataFrame, suspects: list[str], *, homoskedastic: bool) -> float:
    n = len(frame)
    exog = np.column_stack([frame[["w1", "w2"]].to_numpy(), np.ones(n)])
    names = ["z1", "z2", "z3"]
    instruments = np.column_stack([frame[names].to_numpy(), exog])
    regressors = np.column_stack([frame["focal"].to_numpy(), exog])
    y = frame["outcome"].to_numpy()
    fitted = instruments @ np.linalg.lstsq(instruments, regressors, rcond=None)[0]
    residual = y - regressors @ np.linalg.solve(fitted.T @ regressors, fitted.T @ y)
    if homoskedastic:
        moment_covariance = residual @ residual / n * instruments.T @ instruments
    else:
        moment_covariance = (instruments * residual[:, None] ** 2).T @ instruments

    def j_statistic(columns: list[int]) -> float:
        z = instruments[:, columns]
        weight = np.linalg.inv(moment_covariance[np.ix_(columns, columns)])
        zr, zy = z.T @ regressors, z.T @ y
        params = np.linalg.solve(zr.T @ weight @ zr, zr.T @ weight @ zy)
        moment = z.T @ (y - regressors @ params)
        return float(moment @ weight @ moment)

    kept = [j for j in range(instruments.shape[1]) if j >= 3 or names[j] not in suspects]
    return j_statistic(list(range(instruments.shape[1]))) - j_statistic(kept)


@pytest.mark.parametrize("covariance", ["homoskedastic", "robust"])
def test_matches_brute_force_gmm(sample: pd.DataFrame, covariance: str) -> None:
    entries = c_entries(sample, covariance, subsets=[["z2", "z3"]])
    assert [entry["instruments"] for entry in entries] == [["z1"], ["z2"], ["z3"], ["z2", "z3"]]
    for entry in entries:
        expected = brute_force_c(sample, entry["instruments"], homoskedastic=covariance == "homoskedastic")
        assert entry["statistic"] == pytest.approx(expected, rel=1e-8)
        assert entry["df"] == len(entry["instruments"])
        assert entry["statistic"] >= 0


def test_homoskedastic_c_is_a_difference_of_sargan_statistics(sample: pd.DataFrame) -> None:
    entries = c_entries(sample, "homoskedastic")
    exog = sample[["w1", "w2"]].assign(const=1.0)
    full = IV2SLS(sample["outcome"], exog, sample[["focal"]], sample[["z1", "z2", "z3"]]).fit(cov_type="unadjusted")
    for entry in entries:
        assert entry["j_all_instruments"] == pytest.approx(full.sargan.stat, rel=1e-8)


def test_the_invalid_instrument_is_blamed(sample: pd.DataFrame) -> None:
    """z3 has a direct effect on the outcome (DESIGN.direct): its C statistic stands out."""
    entries = {tuple(entry["instruments"]): entry for entry in c_entries(sample, "robust")}
    assert entries[("z3",)]["p_value"] < 0.01
    assert entries[("z3",)]["statistic"] > max(entries[("z1",)]["statistic"], entries[("z2",)]["statistic"])


def test_named_subsets_that_cannot_be_tested_say_why(sample: pd.DataFrame) -> None:
    entries = c_entries(sample, "robust", subsets=[["z1", "z2", "z3"], ["schooling"], ["z1"]])
    assert len(entries) == 5  # the repeated ["z1"] is not listed twice
    everything, unknown = entries[3], entries[4]
    assert everything["standing"] == "not_applicable"
    assert "fewer instruments than focal regressors remain" in everything["reason"]
    assert unknown["standing"] == "not_applicable"
    assert "'schooling' is not one of the claim's instruments" in unknown["reason"]


def test_exactly_identified_claims_cannot_blame_an_instrument() -> None:
    design = IvDesign(n_obs=300, first_stage=(0.5,))
    frame = iv_sample(design, np.random.default_rng(9))
    entries = refit(frame, parse_claim(iv_claim(design, covariance="robust"))).to_dict()["diagnostics"]["c_statistic"]
    assert len(entries) == 1 and entries[0]["standing"] == "not_applicable"
