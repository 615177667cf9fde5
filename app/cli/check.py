"""``secondstage check DATA_FILE --spec SPEC``: refit a claim and print the review."""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
from pathlib import Path

from app.data.readers import read_table
from app.errors import SecondStageError
from app.estimation.refit import refit
from app.provenance import file_sha256, refit_provenance
from app.spec import load_claim

FORMATS = ("text", "json", "markdown", "html", "script")


def register(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "check",
        help="refit a claim on its data file and print the findings and checklist",
        description=(
            "Refit the claimed model with OLS, 2SLS, LIML, Fuller and GMM, run the diagnostics and "
            "print the reviewer's checklist. The data never leave this machine."
        ),
    )
    parser.add_argument("data_file", type=Path, metavar="DATA_FILE", help="CSV/TSV, Stata, SPSS, SAS, Excel, Parquet or R file")
    parser.add_argument("--spec", type=Path, required=True, metavar="SPEC", help="claim specification (.toml or .json)")
    parser.add_argument("--format", choices=FORMATS, default="text", help="output format (default: text)")
    parser.add_argument("--output", type=Path, metavar="FILE", help="write to FILE instead of standard output")
    parser.set_defaults(handler=run)


def run(arguments: argparse.Namespace) -> int:
    from app.review.checklist import build_checklist
    from app.review.reports import REPORT_FORMATS
    from app.review.reproduction import variants_for_claim

    data_file: Path = arguments.data_file
    if not data_file.is_file():
        raise SecondStageError(f"data file not found: {data_file}")
    spec = load_claim(arguments.spec)
    frame = read_table(data_file)
    provenance = refit_provenance(dataset_sha256=file_sha256(data_file), spec=spec, data_file_name=data_file.name)
    findings = refit(frame, spec, provenance=provenance).to_dict()
    checklist = build_checklist(findings, variants=variants_for_claim(frame, spec))
    text = REPORT_FORMATS[arguments.format].render(findings, checklist, data_file_name=data_file.name)
    if arguments.output is None:
        sys.stdout.write(text if text.endswith("\n") else text + "\n")
    else:
        write_atomically(arguments.output, text)
    return 0


def write_atomically(path: Path, text: str) -> None:
    """Write ``text`` to ``path`` through a temporary file so no half-written file is left behind."""
    directory = path.resolve().parent
    if not directory.is_dir():
        raise SecondStageError(f"output folder does not exist: {directory}")
    handle = tempfile.NamedTemporaryFile("w", encoding="utf-8", dir=directory, delete=False, suffix=".part")
    try:
        with handle:
            handle.write(text)
            handle.flush()
            os.fsync(handle.fileno())
        os.replace(handle.name, path)
    except BaseException:
        Path(handle.name).unlink(missing_ok=True)
        raise
