"""Fixed effects nested within the clusters are left out of k in the cluster small-sample factor.

Convention: Cameron & Miller (2015), sec. III.B. Reference library:
linearmodels 7.1 IV2SLS with ``debiased=True``, which counts every regressor
it is given in k; the within-transformed fit (no effect columns) and the fit
with indicator columns converted by ``sqrt((n - k_all) / (n - k_slopes))``
both give the not-counted convention.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from linearmodels.iv import IV2SLS

from app.data.design import build_design
from app.estimation.covariance import variance_estimator
from app.estimation.kclass import kclass
from app.estimation.moments import Layout, Moments
from app.spec import parse_claim


@pytest.fixture(scope="module")
def firms() -> pd.DataFrame:
    rng = np.random.default_rng(3)
    n_firms, years = 400, 3
    firm = np.repeat(np.arange(n_firms), years)
    level = rng.standard_normal(n_firms)[firm]
    instrument = rng.standard_normal(firm.size)
    errors = rng.multivariate_normal([0, 0], [[1, 0.5], [0.5, 1]], firm.size)
    focal = 0.5 * instrument + level + errors[:, 1]
    control = rng.standard_normal(firm.size)
    outcome = 0.3 * focal + level + 0.2 * control + errors[:, 0] + rng.standard_normal(n_firms)[firm]
    return pd.DataFrame({"outcome": outcome, "focal": focal, "instrument": instrument, "control": control, "firm": firm, "region": firm % 7, "year": np.tile(np.arange(years), n_firms)})


def tsls_std_error(frame: pd.DataFrame, *, cluster: str) -> tuple[float, str]:
    """Our 2SLS standard error of the focal regressor and the small-sample text, with firm effects absorbed."""
    spec = parse_claim({"outcome": "outcome", "endogenous": ["focal"], "instruments": ["instrument"], "controls": ["control"], "fixed_effects": ["firm"], "covariance": "cluster", "cluster": [cluster]})
    design = build_design(frame, spec)
    layout = Layout(n_endog=1, n_instr=1, n_exog=len(design.exogenous))
    moments = Moments(gram=design.gram, n_obs=design.n_obs, layout=layout, absorbed_dof=design.absorbed_dof, nested_dof=design.nested_dof)
    variance = variance_estimator(spec.covariance, moments, design.data, design.clusters)
    fit = kclass(moments, kappa=1.0, code="2sls", terms=["focal", "control"])
    return float(np.sqrt(variance.covariance(fit)[0, 0])), variance.small_sample


def test_firm_effects_nested_in_firm_clusters_are_not_counted(firms: pd.DataFrame) -> None:
    ours, small_sample = tsls_std_error(firms, cluster="firm")
    within = firms.groupby("firm")[["outcome", "focal", "instrument", "control"]].transform(lambda column: column - column.mean())
    reference = IV2SLS(within["outcome"], within[["control"]], within[["focal"]], within[["instrument"]]).fit(cov_type="clustered", clusters=firms["firm"], debiased=True)
    assert ours == pytest.approx(reference.std_errors["focal"], rel=1e-6)
    indicators = pd.get_dummies(firms["firm"], prefix="firm", dtype=float)
    dummies = IV2SLS(firms["outcome"], pd.concat([firms[["control"]], indicators], axis=1), firms[["focal"]], firms[["instrument"]]).fit(cov_type="clustered", clusters=firms["firm"], debiased=True)
    n, counted, slopes = len(firms), 2 + indicators.shape[1], 2
    assert ours == pytest.approx(dummies.std_errors["focal"] * np.sqrt((n - counted) / (n - slopes)), rel=1e-6)
    assert "leaves out the 400 absorbed fixed effects nested within the clusters" in small_sample


def test_effects_not_nested_in_the_clusters_are_still_counted(firms: pd.DataFrame) -> None:
    """Clustering by region (firms are nested in regions, but not the other way) vs clustering by year: only the former nests."""
    ours, small_sample = tsls_std_error(firms, cluster="year")
    indicators = pd.get_dummies(firms["firm"], prefix="firm", dtype=float)
    dummies = IV2SLS(firms["outcome"], pd.concat([firms[["control"]], indicators], axis=1), firms[["focal"]], firms[["instrument"]]).fit(cov_type="clustered", clusters=firms["year"], debiased=True)
    assert ours == pytest.approx(dummies.std_errors["focal"], rel=1e-6)
    assert "nested" not in small_sample
    nested_in_region, _ = tsls_std_error(firms, cluster="region")
    region_dummies = IV2SLS(firms["outcome"], pd.concat([firms[["control"]], indicators], axis=1), firms[["focal"]], firms[["instrument"]]).fit(cov_type="clustered", clusters=firms["region"], debiased=True)
    assert nested_in_region < region_dummies.std_errors["focal"]
