"""``secondstage check``: every output format, writing to a file, and bad input as one line with exit code 2."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

from app.cli.main import main

CASE = Path(__file__).resolve().parents[2] / "seed_demo" / "cases" / "walking_blood_pressure"
DATA, SPEC = CASE / "data.csv", CASE / "claim.toml"


def run(capsys: pytest.CaptureFixture[str], *arguments: str) -> tuple[int, str, str]:
    code = main(["check", *arguments])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def test_json_output_has_the_documented_keys(capsys: pytest.CaptureFixture[str]) -> None:
    code, out, _ = run(capsys, str(DATA), "--spec", str(SPEC), "--format", "json")
    assert code == 0
    findings = json.loads(out)
    assert findings["n_obs"] == 2394
    assert {"estimates", "diagnostics", "checklist", "verdict", "provenance"} <= set(findings)
    assert {row["estimator"] for row in findings["estimates"]} == {"ols", "2sls", "liml", "fuller1", "fuller4", "gmm"}
    for key in ("first_stage", "sargan", "basmann", "hansen_j", "durbin", "wu_hausman", "control_function"):
        assert key in findings["diagnostics"]
    assert "NaN" not in out and "Infinity" not in out


@pytest.mark.parametrize(("fmt", "marker"), [("text", "VERDICT"), ("markdown", "|"), ("html", "<html"), ("script", "import pandas")])
def test_every_format_prints(capsys: pytest.CaptureFixture[str], fmt: str, marker: str) -> None:
    code, out, _ = run(capsys, str(DATA), "--spec", str(SPEC), "--format", fmt)
    assert code == 0 and marker in out


def test_output_file_is_written_whole(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    target = tmp_path / "review.md"
    code, out, _ = run(capsys, str(DATA), "--spec", str(SPEC), "--format", "markdown", "--output", str(target))
    assert code == 0 and out == ""
    assert "not proof of" in target.read_text()
    assert [p.name for p in tmp_path.iterdir()] == ["review.md"]


def bad_input_cases(tmp_path: Path) -> dict[str, tuple[list[str], str]]:
    empty = tmp_path / "empty.csv"
    empty.write_bytes(b"")
    disguised = tmp_path / "disguised.dta"
    disguised.write_text("a,b\n1,2\n")
    wrong_column = tmp_path / "claim.json"
    wrong_column.write_text(json.dumps({"outcome": "systolic", "endogenous": ["daily_steps_k"], "instruments": ["device_lottery"]}))
    return {
        "missing data file": ([str(tmp_path / "absent.csv"), "--spec", str(SPEC)], "data file not found"),
        "empty file": ([str(empty), "--spec", str(SPEC)], "empty"),
        "content not what the extension says": ([str(disguised), "--spec", str(SPEC)], "does not look like"),
        "unknown column": ([str(DATA), "--spec", str(wrong_column)], "column 'systolic' is not in the data file"),
        "missing output folder": ([str(DATA), "--spec", str(SPEC), "--output", str(tmp_path / "no" / "r.md")], "output folder does not exist"),
    }


@pytest.mark.parametrize(
    "case",
    ["missing data file", "empty file", "content not what the extension says", "unknown column", "missing output folder"],
)
def test_bad_input_is_one_line_and_exit_code_two(tmp_path: Path, capsys: pytest.CaptureFixture[str], case: str) -> None:
    arguments, message = bad_input_cases(tmp_path)[case]
    code, _, err = run(capsys, *arguments)
    assert code == 2
    assert message in err
    assert err.startswith("secondstage: ") and "Traceback" not in err


def test_the_console_script_prints_no_traceback(tmp_path: Path) -> None:
    empty = tmp_path / "empty.csv"
    empty.write_bytes(b"")
    result = subprocess.run(
        [sys.executable, "-m", "app.cli.main", "check", str(empty), "--spec", str(SPEC)],
        capture_output=True,
        text=True,
        check=False,
    )
    assert result.returncode == 2
    assert "Traceback" not in result.stderr and result.stderr.count("\n") == 1
