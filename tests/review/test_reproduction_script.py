"""The generated reproduction script recomputes the refit's key numbers (to 1e-8).

The script is written, run in a subprocess on a data file, and its
``key = value`` lines are compared with the engine's findings for the same
file; where the script also prints the review's own value beside a number
(the panel tests), that value must be the findings' value exactly. The demo
case comes from seed_demo (built into a temporary folder by its own
generator); the invented cases exercise the sample rules the script must
mirror: text and numeric filters in order (missing values fail them),
listwise deletion, categorical indicators, analytic weights, one- and
two-way fixed effects, one- and two-way clustering, classical errors. The
panel cases add the Mundlak test (clustered by the claim's clusters when they
contain the units, by unit otherwise) and the classical Hausman test; the
demo panel's Hausman difference is not positive definite, so its positive
part is checked too. Reference: linearmodels (IV2SLS, IVLIML, IVGMM,
RandomEffects) and scipy's F and chi-squared tails inside the script; the
engine's agreement with linearmodels is checked in tests/estimation.
"""

from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from app.estimation.refit import refit
from app.review.checklist import build_checklist
from app.review.reports import REPORT_FORMATS
from app.spec import load_claim, parse_claim
from seed_demo.build import write_case
from seed_demo.scenarios import all_scenarios
from tests.design_simulation import PanelDesign, SelectionDesign, panel_sample, selection_sample
from tests.simulation import IvDesign, iv_sample

RELATIVE_TOLERANCE = 1e-8
LINE = re.compile(r"^(?P<key>[^\s=#][^=]*?) = (?P<value>\S+)(?:  \(in the review: (?P<review>\S+)\))?$")
PANEL_TESTS = {"mundlak", "mundlak.p_value", "hausman_fe_re", "hausman_fe_re.df", "hausman_fe_re.p_value"}
KEY = re.compile(r"^(?P<code>[\w]+)\.(?P<field>estimate|std_error)\[(?P<term>.+)\]$")


def run_script(findings: dict, data_file: Path, tmp_path: Path) -> str:
    """Write the reproduction script, run it on ``data_file`` and return what it printed."""
    script = tmp_path / "reproduce.py"
    checklist = build_checklist(findings)
    script.write_text(REPORT_FORMATS["script"].render(findings, checklist, data_file_name=data_file.name), encoding="utf-8")
    completed = subprocess.run(
        [sys.executable, str(script), str(data_file)], capture_output=True, text=True, timeout=120, check=False
    )
    assert completed.returncode == 0, completed.stderr
    return completed.stdout


def key_numbers(output: str) -> dict[str, float]:
    numbers = {}
    for line in output.splitlines():
        match = LINE.match(line)
        if match:
            numbers[match["key"]] = float(match["value"])
    return numbers


def review_numbers(output: str) -> dict[str, float]:
    """The review's values the script prints beside its own, by key."""
    matches = (LINE.match(line) for line in output.splitlines())
    return {match["key"]: float(match["review"]) for match in matches if match and match["review"]}


def engine_number(findings: dict, key: str) -> float | None:
    """The findings' value for one of the script's keys (None if the findings lack it)."""
    if key == "n_obs":
        return findings["n_obs"]
    if match := KEY.match(key):
        for row in findings["estimates"]:
            if row["estimator"] == match["code"] and row["term"] == match["term"]:
                return row[match["field"]]
        return None
    if key.startswith("first_stage_f["):
        term = key[len("first_stage_f[") : -1]
        return next(e["statistic"] for e in findings["diagnostics"]["first_stage"] if e["regressor"] == term)
    name, _, field = key.partition(".")
    return findings["diagnostics"][name][field or "statistic"]


def assert_same_numbers(findings: dict, output: str, *, expected_keys: set[str]) -> None:
    """Every number the script printed is the engine's, and so is every review value printed beside one."""
    numbers = key_numbers(output)
    assert expected_keys <= set(numbers), sorted(set(numbers))
    for key, value in numbers.items():
        reference = engine_number(findings, key)
        assert reference is not None, key
        assert value == pytest.approx(reference, rel=RELATIVE_TOLERANCE, abs=1e-12), key
    for key, value in review_numbers(output).items():
        assert value == engine_number(findings, key), key


def iv_keys(term: str, *, codes=("ols", "2sls", "liml", "fuller1", "fuller4", "gmm"), overid: str | None = "hansen_j") -> set[str]:
    keys = {"n_obs", f"first_stage_f[{term}]"}
    keys |= {f"{code}.{field}[{term}]" for code in codes for field in ("estimate", "std_error")}
    return keys | ({overid, f"{overid}.p_value"} if overid else set())


@pytest.mark.parametrize("scenario", all_scenarios(), ids=lambda s: s.SLUG)
def test_script_reproduces_the_demo_case(scenario, tmp_path):
    case = write_case(scenario, tmp_path)
    spec = load_claim(case.claim_file)
    findings = refit(pd.read_csv(case.data_file), spec).to_dict()
    output = run_script(findings, case.data_file, tmp_path)
    term = spec.focal[0]
    codes = {"iv": ["ols"], "mediation": ["ols", "ols_with_treatment"], "panel": ["pooled_ols", "within", "random_effects"]}
    expected = {"n_obs"} | {f"{code}.{field}[{term}]" for code in codes[spec.design.value] for field in ("estimate", "std_error")}
    if spec.excluded_instruments:
        expected |= {f"2sls.estimate[{term}]", f"liml.std_error[{term}]", f"first_stage_f[{term}]"}
    if spec.design.value == "panel":
        expected |= PANEL_TESTS
        assert set(review_numbers(output)) == PANEL_TESTS
    assert_same_numbers(findings, output, expected_keys=expected)


def invented_frame(seed: int) -> pd.DataFrame:
    """IV data with the columns a realistic replication file has: text categories, groups, weights, gaps."""
    rng = np.random.default_rng(seed)
    design = IvDesign(n_obs=900, first_stage=(0.6, 0.4, 0.3), n_clusters=45, cluster_effect=0.4, heteroskedastic=True)
    frame = iv_sample(design, rng)
    frame["channel"] = rng.choice(["online", "store", "phone"], size=len(frame))
    frame["district"] = rng.choice(["north", "south", "east", "west"], size=len(frame))
    frame["survey_wave"] = rng.integers(2015, 2021, size=len(frame)).astype(float)
    frame.loc[rng.random(len(frame)) < 0.03, "survey_wave"] = np.nan
    frame.loc[rng.random(len(frame)) < 0.02, "w1"] = np.nan
    frame.loc[rng.random(len(frame)) < 0.02, "channel"] = None
    frame["staff_weight"] = rng.uniform(0.5, 2.0, size=len(frame)).round(3)
    frame["outcome"] = frame["outcome"] + frame["district"].map({"north": 0.3, "south": -0.2, "east": 0.1, "west": 0.0})
    return frame


BASE = {
    "outcome": "outcome",
    "endogenous": ["focal"],
    "instruments": ["z1", "z2", "z3"],
    "controls": ["w1", "w2"],
}

CASES = {
    "filters, categories and weights, robust": {
        "filters": [
            {"column": "survey_wave", "op": ">=", "value": 2016},
            {"column": "channel", "op": "!=", "value": "phone"},
        ],
        "categorical": [{"column": "district", "reference": "west"}],
        "weights": "staff_weight",
        "covariance": "robust",
    },
    "membership filter, one-way fixed effects, clustered": {
        "filters": [{"column": "channel", "op": "in", "value": ["online", "store"]}],
        "fixed_effects": ["site"],
        "cluster": ["cluster"],
        "covariance": "cluster",
    },
    "two-way fixed effects and two-way clustering": {
        "fixed_effects": ["site", "region"],
        "cluster": ["cluster", "region"],
        "covariance": "cluster",
    },
    "classical errors": {"categorical": ["district"], "covariance": "homoskedastic"},
}


@pytest.mark.parametrize("case", list(CASES), ids=list(CASES))
def test_script_mirrors_the_engine_on_invented_data(case, tmp_path):
    data_file = tmp_path / "shop_survey.csv"
    invented_frame(seed=77).to_csv(data_file, index=False)
    fields = CASES[case]
    spec = parse_claim({**BASE, **fields})
    findings = refit(pd.read_csv(data_file), spec).to_dict()
    output = run_script(findings, data_file, tmp_path)
    two_way = len(fields.get("cluster", [])) == 2
    codes = ("ols", "2sls", "liml", "fuller1", "fuller4") + (() if two_way else ("gmm",))
    overid = None if two_way else ("sargan" if fields["covariance"] == "homoskedastic" else "hansen_j")
    assert_same_numbers(findings, output, expected_keys=iv_keys("focal", codes=codes, overid=overid))


def test_script_turns_claim_text_into_literals_only(tmp_path):
    """Column names and filter values are written with repr(): quotes and newlines cannot become code."""
    hostile_value = "store'); print('injected"
    frame = invented_frame(seed=5).rename(columns={"w2": "w2\"); print('injected'); (\"", "channel": "chan\nnel"})
    frame.loc[frame.index[::2], "chan\nnel"] = hostile_value
    data_file = tmp_path / "odd names.csv"
    frame.to_csv(data_file, index=False)
    spec = parse_claim(
        {**BASE, "controls": ["w1", "w2\"); print('injected'); (\""], "covariance": "robust",
         "filters": [{"column": "chan\nnel", "op": "==", "value": hostile_value}]}
    )
    findings = refit(pd.read_csv(data_file), spec).to_dict()
    output = run_script(findings, data_file, tmp_path)
    assert "injected" not in output.replace(hostile_value, "")
    assert key_numbers(output)["n_obs"] == findings["n_obs"] < 450


OTHER_DESIGNS = {
    "selection: OLS on the selected rows": (
        lambda rng: selection_sample(SelectionDesign(), rng),
        {"design": "selection", "outcome": "outcome", "endogenous": ["regressor"], "selected": "selected",
         "selection_covariates": ["regressor", "excluded"], "covariance": "robust", "claimed": {"estimator": "ols"}},
        ["ols"],
    ),
    "panel with classical errors": (
        lambda rng: panel_sample(PanelDesign(), rng),
        {"design": "panel", "unit": "firm", "time": "period", "outcome": "outcome", "endogenous": ["focal"],
         "controls": ["control", "steady"], "covariance": "homoskedastic"},
        ["pooled_ols", "within", "random_effects"],
    ),
    "panel with robust errors": (
        lambda rng: panel_sample(PanelDesign(), rng),
        {"design": "panel", "unit": "firm", "time": "period", "outcome": "outcome", "endogenous": ["focal"],
         "controls": ["control", "steady"], "covariance": "robust"},
        ["pooled_ols", "within", "random_effects"],
    ),
}


@pytest.mark.parametrize("case", list(OTHER_DESIGNS), ids=list(OTHER_DESIGNS))
def test_script_for_the_other_designs(case, tmp_path):
    generate, claim, codes = OTHER_DESIGNS[case]
    data_file = tmp_path / "design.csv"
    generate(np.random.default_rng(31)).to_csv(data_file, index=False)
    findings = refit(pd.read_csv(data_file), parse_claim(claim)).to_dict()
    output = run_script(findings, data_file, tmp_path)
    term = claim["endogenous"][0]
    expected = {"n_obs"} | {f"{code}.{field}[{term}]" for code in codes for field in ("estimate", "std_error")}
    if claim["design"] == "panel":
        expected |= PANEL_TESTS
    assert_same_numbers(findings, output, expected_keys=expected)


def test_script_leaves_out_a_panel_test_the_review_could_not_compute(tmp_path):
    """No Mundlak line when the findings hold no Mundlak statistic; the Hausman test is still recomputed."""
    generate, claim, _ = OTHER_DESIGNS["panel with classical errors"]
    data_file = tmp_path / "design.csv"
    generate(np.random.default_rng(31)).to_csv(data_file, index=False)
    findings = refit(pd.read_csv(data_file), parse_claim(claim)).to_dict()
    findings["diagnostics"]["mundlak"] = {"standing": "not_applicable", "reason": "no regressor varies within units"}
    output = run_script(findings, data_file, tmp_path)
    assert not {"mundlak", "mundlak.p_value"} & set(key_numbers(output))
    assert {"hausman_fe_re", "hausman_fe_re.df", "hausman_fe_re.p_value"} <= set(review_numbers(output))
