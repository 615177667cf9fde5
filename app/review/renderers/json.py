"""JSON report: the findings with the keys ``checklist``, ``verdict`` and ``caution`` added."""

from __future__ import annotations

import json
import math
from collections.abc import Mapping
from typing import Any

from app.review.checklist import Checklist
from app.review.renderers.common import CAUTION


def render_json(findings: Mapping[str, Any], checklist: Checklist, *, data_file_name: str) -> str:
    """Findings plus checklist, verdict and the report's cautions, as strict JSON (no NaN or Infinity).

    ``caution`` holds the sentences every report ends with: a flag is not
    proof of error or misconduct, and the data are confidential.
    ``data_file_name`` is already in the findings' provenance; it is accepted
    for the common renderer signature.
    """
    document = {**findings, **checklist.to_dict(), "caution": list(CAUTION)}
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
