"""Provenance of a refit: what data, what claim, which code computed it."""

from __future__ import annotations

import hashlib
import json
from importlib import metadata
from pathlib import Path
from typing import Any

from app.spec import ClaimSpec

PACKAGES = ("secondstage", "numpy", "scipy", "pandas", "linearmodels", "statsmodels")


def file_sha256(path: Path) -> str:
    """SHA-256 of a file's bytes, read in chunks."""
    digest = hashlib.sha256()
    with path.open("rb") as handle:
        for chunk in iter(lambda: handle.read(1 << 20), b""):
            digest.update(chunk)
    return digest.hexdigest()


def claim_sha256(spec: ClaimSpec) -> str:
    """SHA-256 of the claim's canonical JSON (sorted keys), so equal claims hash equally."""
    canonical = json.dumps(spec.model_dump(mode="json"), sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(canonical.encode("utf-8")).hexdigest()


def package_versions() -> dict[str, str]:
    """Installed versions of the packages that compute the numbers."""
    versions = {}
    for name in PACKAGES:
        try:
            versions[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            versions[name] = "not installed"
    return versions


def refit_provenance(*, dataset_sha256: str, spec: ClaimSpec, data_file_name: str) -> dict[str, Any]:
    """The provenance block stored with every refit's findings."""
    return {
        "dataset_sha256": dataset_sha256,
        "data_file_name": data_file_name,
        "claim_sha256": claim_sha256(spec),
        "package_versions": package_versions(),
        "seed": spec.bootstrap.seed,
    }
