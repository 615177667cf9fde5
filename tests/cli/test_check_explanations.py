"""``secondstage check`` explains what the web app explains, and refuses an exact fit in one line.

A printed standard error that matches another variance estimator than the
claim's is named in the report (app.review.reproduction.variants_for_claim,
shared with the web worker). An outcome copied as a control is refused with
the engine's message and exit code 2, in every output format.
"""

from __future__ import annotations

import json
import tomllib
from pathlib import Path

import pandas as pd
import pytest

from app.cli.main import main
from app.estimation.refit import refit
from app.spec import parse_claim

CASE = Path(__file__).resolve().parents[2] / "seed_demo" / "cases" / "walking_blood_pressure"
DATA, SPEC = CASE / "data.csv", CASE / "claim.toml"


def run(capsys: pytest.CaptureFixture[str], *arguments: str) -> tuple[int, str, str]:
    code = main(["check", *arguments])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def claim_with(tmp_path: Path, **changes: object) -> Path:
    claim = tomllib.loads(SPEC.read_text())
    claimed = changes.pop("claimed", None)
    claim.update(changes)
    if claimed is not None:
        claim["claimed"] = {**claim["claimed"], **claimed}
    path = tmp_path / "claim.json"
    path.write_text(json.dumps(claim))
    return path


def classical_std_error() -> float:
    claim = tomllib.loads(SPEC.read_text()) | {"covariance": "homoskedastic"}
    findings = refit(pd.read_csv(DATA), parse_claim(claim)).to_dict()
    return next(r["std_error"] for r in findings["estimates"] if (r["estimator"], r["term"]) == ("2sls", "daily_steps_k"))


def test_a_standard_error_from_classical_variances_is_explained(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    printed = f"{classical_std_error():.4f}"
    spec = claim_with(tmp_path, claimed={"std_error": printed})
    code, out, _ = run(capsys, str(DATA), "--spec", str(spec), "--format", "json")
    assert code == 0
    item = next(i for i in json.loads(out)["checklist"] if i["id"] == "reproduction.std_error")
    assert "matches the refit with classical (homoskedastic) standard errors" in item["evidence"]


@pytest.mark.parametrize("fmt", ["text", "json", "markdown", "html", "script"])
def test_an_outcome_copied_as_a_control_is_one_line(tmp_path: Path, capsys: pytest.CaptureFixture[str], fmt: str) -> None:
    data = tmp_path / "copy.csv"
    pd.read_csv(DATA).assign(bp_copy=lambda f: f["systolic_bp"]).to_csv(data, index=False)
    spec = claim_with(tmp_path, controls=["age", "bmi", "female", "bp_copy"])
    code, out, err = run(capsys, str(data), "--spec", str(spec), "--format", fmt)
    assert code == 2 and out == ""
    assert err.startswith("secondstage: 'systolic_bp' is an exact linear function of")
    assert err.count("\n") == 1
