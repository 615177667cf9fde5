"""Instruments that make robust weak-instrument statistics unreliable get a named reason, not confident numbers."""

from __future__ import annotations

import numpy as np
import pandas as pd

from app.estimation.refit import refit
from app.spec import parse_claim

KEYS = ("kleibergen_paap_rk_f", "kleibergen_paap_rk_lm", "effective_f", "anderson_rubin", "kleibergen_k", "clr", "tf")


def one_row_instrument(n: int = 300) -> pd.DataFrame:
    """A pure-noise outcome and an instrument that is 1 on a single row (robust variances collapse there)."""
    rng = np.random.default_rng(8)
    zone = np.zeros(n)
    zone[57] = 1.0
    return pd.DataFrame({"y": rng.standard_normal(n), "x": rng.standard_normal(n) + zone, "zone": zone, "w": rng.standard_normal(n)})


def claim(covariance: str, instrument: str = "zone") -> dict[str, object]:
    return {"outcome": "y", "endogenous": ["x"], "instruments": [instrument], "controls": ["w"], "covariance": covariance}


def test_instrument_with_one_nonzero_row_cautions_every_robust_weak_instrument_statistic() -> None:
    """Chesher & Jewitt (1987): with leverage near one the robust variance understates; the numbers stay, with the reason."""
    diagnostics = refit(one_row_instrument(), parse_claim(claim("robust"))).to_dict()["diagnostics"]
    for key in KEYS:
        caution = diagnostics[key]["leverage_caution"]
        assert caution["max_leverage"] > 0.99
        assert "data row 58" in caution["reason"]
        assert diagnostics[key]["standing"] == "computed"


def test_homoskedastic_statistics_and_ordinary_instruments_carry_no_leverage_caution() -> None:
    frame = one_row_instrument().assign(spread_out=np.random.default_rng(2).standard_normal(300))
    homoskedastic = refit(frame, parse_claim(claim("homoskedastic"))).to_dict()["diagnostics"]
    ordinary = refit(frame, parse_claim(claim("robust", "spread_out"))).to_dict()["diagnostics"]
    for key in KEYS:
        assert "leverage_caution" not in homoskedastic[key]
        assert "leverage_caution" not in ordinary[key]


def test_instruments_that_predict_the_focal_regressor_exactly_give_a_named_reason() -> None:
    """x = z1: strength statistics would be 1e36 from rounding; they are undefined with the cause named."""
    rng = np.random.default_rng(4)
    frame = pd.DataFrame({"z1": rng.standard_normal(300), "w": rng.standard_normal(300), "y": rng.standard_normal(300)})
    frame["x"] = frame["z1"]
    claim_exact = {"outcome": "y", "endogenous": ["x"], "instruments": ["z1"], "controls": ["w"], "covariance": "robust"}
    diagnostics = refit(frame, parse_claim(claim_exact)).to_dict()["diagnostics"]
    for key in ("cragg_donald_f", "kleibergen_paap_rk_f", "kleibergen_paap_rk_lm", "effective_f", "kleibergen_k", "clr"):
        assert diagnostics[key]["standing"] == "undefined", key
        assert "predict the focal regressor exactly" in diagnostics[key]["reason"], key
    assert diagnostics["stock_yogo"]["statistic"] is None


def test_nearly_exact_but_genuine_first_stage_is_still_computed() -> None:
    rng = np.random.default_rng(4)
    frame = pd.DataFrame({"z1": rng.standard_normal(300), "w": rng.standard_normal(300), "y": rng.standard_normal(300)})
    frame["x"] = frame["z1"] + 1e-4 * rng.standard_normal(300)
    claim_close = {"outcome": "y", "endogenous": ["x"], "instruments": ["z1"], "controls": ["w"], "covariance": "robust"}
    diagnostics = refit(frame, parse_claim(claim_close)).to_dict()["diagnostics"]
    assert diagnostics["cragg_donald_f"]["standing"] == "computed"
    assert diagnostics["cragg_donald_f"]["statistic"] > 1e6


def test_weak_instrument_results_state_their_reference_distribution() -> None:
    """AR uses F(q, df), K and CLR chi-squared forms: each says so, so differing sets are explained."""
    diagnostics = refit(one_row_instrument().assign(z=np.random.default_rng(1).standard_normal(300)), parse_claim(claim("robust", "z"))).to_dict()["diagnostics"]
    assert diagnostics["anderson_rubin"]["distribution"] == "F"
    assert "F(q, df)" in diagnostics["anderson_rubin"]["distribution_note"]
    assert diagnostics["kleibergen_k"]["distribution"] == "chi2"
    assert "chi-squared(1)" in diagnostics["kleibergen_k"]["distribution_note"]
    assert "conditional on r" in diagnostics["clr"]["distribution_note"]
