"""Montiel Olea & Pflueger's effective F and its critical values.

Checks: the effective F equals the classical first-stage F with homoskedastic
errors; with one instrument K_eff = 1 and the critical value at tau = 10% is
23.109 (reference/weak_instrument_published_values.toml); the generalized
critical value never exceeds the simplified one; the bias bound B equals
|K - 2| / K under homoskedasticity (Nagar's 2SLS bias (K - 2) sigma_uv / mu^2
against the benchmark sqrt(sigma_u^2 / sigma_v^2), derived from the formulas in
app/estimation/effective_f.py), and matches a brute-force search over
directions psi and values b for a heteroskedastic sample.
"""

from __future__ import annotations

import tomllib
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from app.data.design import build_design
from app.estimation.covariance import variance_estimator
from app.estimation.effective_f import effective_f, nagar_bias_bound
from app.estimation.reduced_form_system import ReducedFormSystem, reduced_form_system
from app.estimation.refit import design_moments, refit
from app.spec import parse_claim
from tests.simulation import IvDesign, iv_claim, iv_sample

PUBLISHED = tomllib.loads((Path(__file__).parent / "reference" / "weak_instrument_published_values.toml").read_text())["effective_f"]
HETEROSKEDASTIC = IvDesign(n_obs=800, first_stage=(0.35, 0.2, 0.1, 0.05), n_controls=2, heteroskedastic=True, endogeneity=0.7)


def system_for(frame: pd.DataFrame, claim: dict) -> ReducedFormSystem:
    spec = parse_claim(claim)
    design = build_design(frame, spec)
    moments = design_moments(design)
    return reduced_form_system(moments, variance_estimator(spec.covariance, moments, design.data, design.clusters))


@pytest.fixture(scope="module")
def sample() -> pd.DataFrame:
    return iv_sample(HETEROSKEDASTIC, np.random.default_rng(23))


def test_equals_the_first_stage_f_with_homoskedastic_errors(sample: pd.DataFrame) -> None:
    diagnostics = refit(sample, parse_claim(iv_claim(HETEROSKEDASTIC, covariance="homoskedastic"))).to_dict()["diagnostics"]
    assert diagnostics["effective_f"]["statistic"] == pytest.approx(diagnostics["first_stage"][0]["statistic"], rel=1e-10)


@pytest.mark.parametrize("covariance", ["homoskedastic", "robust"])
@pytest.mark.parametrize("published", PUBLISHED["one_instrument"], ids=lambda p: f"tau={p['tau']}")
def test_one_instrument_critical_value(sample: pd.DataFrame, covariance: str, published: dict) -> None:
    design = IvDesign(n_obs=800, first_stage=(0.2,), heteroskedastic=True)
    frame = iv_sample(design, np.random.default_rng(3))
    result = effective_f(system_for(frame, iv_claim(design, covariance=covariance)))
    row = next(r for r in result.details["critical_values"] if r["tau"] == published["tau"])
    assert row["simplified_k_eff"] == pytest.approx(1.0, rel=1e-12)
    assert row["generalized_k_eff"] == pytest.approx(1.0, rel=1e-12)
    assert row["simplified"] == pytest.approx(published["critical_value"], abs=published["tolerance_abs"])
    assert row["critical_value"] == pytest.approx(published["critical_value"], abs=published["tolerance_abs"])


@pytest.mark.parametrize("covariance", ["homoskedastic", "robust"])
def test_generalized_never_exceeds_simplified(sample: pd.DataFrame, covariance: str) -> None:
    result = effective_f(system_for(sample, iv_claim(HETEROSKEDASTIC, covariance=covariance)))
    assert result.details["shown"] == "generalized"
    assert 0.0 <= result.details["bias_bound"] <= 1.0
    for row in result.details["critical_values"]:
        assert row["generalized"] <= row["simplified"] + 1e-12
    simplified = [row["simplified"] for row in result.details["critical_values"]]
    assert simplified == sorted(simplified, reverse=True)  # a looser tolerance tau needs a smaller F


@pytest.mark.parametrize("n_instruments", [2, 3, 5])
def test_bias_bound_under_homoskedasticity_is_k_minus_two_over_k(n_instruments: int) -> None:
    omega = np.array([[1.3, 0.55], [0.55, 0.8]])
    w1, w12, w2 = (omega[a, b] * np.eye(n_instruments) for a, b in ((0, 0), (0, 1), (1, 1)))
    assert nagar_bias_bound(w1, w12, w2) == pytest.approx(abs(n_instruments - 2) / n_instruments, abs=1e-9)


def test_bias_bound_matches_brute_force_search(sample: pd.DataFrame) -> None:
    system = system_for(sample, iv_claim(HETEROSKEDASTIC, covariance="robust"))
    root = np.linalg.cholesky(system.instrument_gram).T
    w1, w12, w2 = (root @ system.covariance[a, b] @ root.T for a, b in ((0, 0), (0, 1), (1, 1)))
    w1, w2 = (w1 + w1.T) / 2, (w2 + w2.T) / 2
    rng = np.random.default_rng(0)
    directions = rng.standard_normal((4000, w2.shape[0]))
    directions /= np.linalg.norm(directions, axis=1, keepdims=True)
    best = 0.0
    for b in np.concatenate([np.linspace(-60, 60, 2401), [1e6, -1e6]]):
        s12 = w12 - b * w2
        s1 = w1 - b * (w12 + w12.T) + b * b * w2
        numerator = np.abs(np.trace(s12) - 2 * np.einsum("ni,ij,nj->n", directions, s12, directions)).max()
        best = max(best, numerator / np.sqrt(np.trace(s1) * np.trace(w2)))
    bound = nagar_bias_bound(w1, w12, w2)
    assert best <= bound + 1e-12
    assert bound == pytest.approx(best, rel=2e-3)


def test_needs_one_focal_regressor(sample: pd.DataFrame) -> None:
    frame = sample.assign(dose=sample["z4"] + sample["focal"] + np.random.default_rng(1).standard_normal(len(sample)))
    result = effective_f(system_for(frame, iv_claim(HETEROSKEDASTIC, endogenous=["focal", "dose"], covariance="robust")))
    assert result.standing.value == "not_applicable"
    assert "one focal regressor" in result.reason
