"""JSON report: the findings with the keys ``checklist``, ``verdict``, ``estimate_notes`` and ``caution`` added."""

from __future__ import annotations

import json
import math
from collections.abc import Mapping
from typing import Any

from app.review.checklist import Checklist
from app.review.renderers.common import CAUTION, estimate_lines_by_term
from app.review.view import FindingsView


def render_json(findings: Mapping[str, Any], checklist: Checklist, *, data_file_name: str) -> str:
    """Findings plus checklist, verdict and the report's cautions, as strict JSON (no NaN or Infinity).

    ``caution`` holds the sentences every report ends with: a flag is not
    proof of error or misconduct, and the data are confidential.
    ``estimate_notes`` maps an estimator code to the note the other reports
    print under the table when its standard errors do not come from the
    claim's variance estimator (e.g. Heckman's corrected covariance).
    ``data_file_name`` is already in the findings' provenance; it is accepted
    for the common renderer signature.
    """
    notes = {
        line.code: line.note for lines in estimate_lines_by_term(FindingsView(findings)).values() for line in lines if line.note
    }
    document = {**findings, **checklist.to_dict(), "estimate_notes": notes, "caution": list(CAUTION)}
    return json.dumps(_strict(document), indent=2, ensure_ascii=False, allow_nan=False) + "\n"


def _strict(value: Any) -> Any:
    """Non-finite numbers become null, as everywhere in the findings."""
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, Mapping):
        return {str(key): _strict(item) for key, item in value.items()}
    if isinstance(value, (list, tuple)):
        return [_strict(item) for item in value]
    return value
