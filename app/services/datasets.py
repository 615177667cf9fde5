"""Datasets: receiving an upload, checking and profiling it, storing it once, reading it back.

An upload is written to a temporary file while it is hashed, read as a table
and profiled *before* anything is kept: a file that cannot be read leaves no
file and no row behind. Only then is it moved to its SHA-256 name and recorded
as the case's next dataset version. A text table is parsed while it arrives
(:class:`~app.data.readers.ReadWhileReceiving`), so that reading it costs
little more than receiving it.
"""

from __future__ import annotations

import re
import unicodedata
from pathlib import Path, PurePosixPath, PureWindowsPath
from typing import Any

import pandas as pd
from sqlalchemy import func, select

from app.auth.roles import Action
from app.data.profile import profile_frame
from app.data.readers import ReadLimits, ReadWhileReceiving, read_table
from app.errors import DataFileError
from app.services.context import ServiceContext
from app.services.errors import FileRefused, FileTooLarge
from app.services.records import case_info, dataset_info, load_case, load_dataset, record_event
from app.services.views import DatasetDetail
from app.settings import Settings
from app.store.files import FileExceedsLimit, Readable
from app.store.models import Dataset

MAX_NAME_LENGTH = 255
_UNSAFE_NAME_CHARACTERS = re.compile(r"[\x00-\x1f\x7f]")


def upload_dataset(ctx: ServiceContext, *, case_id: int, source: Readable, file_name: str) -> DatasetDetail:
    """Store an uploaded replication file as the case's next dataset version.

    Parameters
    ----------
    source
        The file's bytes, read in chunks.
    file_name
        The name the reviewer's computer gave the file; used to recognise its
        format and shown on pages, never used as a path.

    Raises
    ------
    FileRefused
        The file is empty or larger than the configured limit.
    DataFileError
        The reader cannot read the file as a table (wrong type, unknown
        encoding, duplicated or blank column names...); its message says why.
    """
    name = clean_file_name(file_name)
    with ctx.reading() as session:
        load_case(session, case_id, actor=ctx.actor, action=Action.EDIT)
    limit = ctx.settings.max_upload_bytes
    try:
        with (
            ReadWhileReceiving(source, name=name, limits=read_limits(ctx.settings)) as reading,
            ctx.files.receive(reading, limit=limit, suffix=_suffix(name)) as incoming,
        ):
            if incoming.size_bytes == 0:
                raise FileRefused(f"{name} is empty: choose the replication data file itself")
            frame, file_format = reading.table(incoming.path)
            profile = profile_frame(frame)
            with ctx.files_lock:
                already_stored = ctx.files.contains(incoming.sha256)
                ctx.files.keep(incoming)
                try:
                    dataset_id = _record_dataset(
                        ctx,
                        case_id=case_id,
                        name=name,
                        sha256=incoming.sha256,
                        size_bytes=incoming.size_bytes,
                        file_format=file_format,
                        profile=profile.to_dict(),
                    )
                except BaseException:
                    if not already_stored:
                        ctx.files.delete(incoming.sha256)
                    raise
    except FileExceedsLimit:
        raise FileTooLarge(
            f"{name} is larger than this server accepts ({format_bytes(limit)}); "
            "ask the administrator to raise the upload limit, or upload a compressed format such as Parquet"
        ) from None
    return get_dataset(ctx, case_id=case_id, dataset_id=dataset_id)


def _record_dataset(
    ctx: ServiceContext,
    *,
    case_id: int,
    name: str,
    sha256: str,
    size_bytes: int,
    file_format: str,
    profile: dict[str, Any],
) -> int:
    with ctx.transaction() as session:
        case = load_case(session, case_id, actor=ctx.actor, action=Action.EDIT)
        version = (session.scalar(select(func.max(Dataset.version)).where(Dataset.case_id == case_id)) or 0) + 1
        dataset = Dataset(
            case_id=case_id,
            version=version,
            sha256=sha256,
            original_name=name,
            file_format=file_format,
            size_bytes=size_bytes,
            n_rows=profile["n_rows"],
            n_columns=profile["n_columns"],
            profile=profile,
        )
        session.add(dataset)
        session.flush()
        record_event(
            session,
            case,
            kind="dataset_uploaded",
            message=f"Data version {version} uploaded: {name} ({_count(profile['n_rows'], 'row')}, {_count(profile['n_columns'], 'column')})",
            actor=ctx.actor,
            audit_detail=f"Data version {version} uploaded: {name}, SHA-256 {sha256}",
        )
        return dataset.id


def get_dataset(ctx: ServiceContext, *, case_id: int, dataset_id: int) -> DatasetDetail:
    """A dataset version with its profile."""
    with ctx.reading() as session:
        dataset = load_dataset(session, case_id, dataset_id, actor=ctx.actor)
        return DatasetDetail(case=case_info(dataset.case), dataset=dataset_info(dataset), profile=dataset.profile)


def load_frame(ctx: ServiceContext, dataset: Dataset) -> pd.DataFrame:
    """Read a stored dataset version back as a table."""
    path = ctx.files.path_for(dataset.sha256)
    if not path.is_file():
        raise DataFileError(f"the stored file of data version {dataset.version} ({dataset.original_name}) is missing")
    return read_table(path, name=dataset.original_name, limits=read_limits(ctx.settings))


def read_limits(settings: Settings) -> ReadLimits:
    """The reader's limits from the server settings (sizes, and the decompression-bomb guards)."""
    return ReadLimits(
        max_bytes=settings.max_upload_bytes,
        max_rows=settings.max_rows,
        max_columns=settings.max_columns,
        max_cells=settings.max_cells,
        max_unpacked_bytes=settings.max_unpacked_bytes,
        max_compression_ratio=settings.max_compression_ratio,
    )


def clean_file_name(file_name: str) -> str:
    """The last path component, without control characters, at most 255 characters."""
    base = PureWindowsPath(PurePosixPath(file_name or "").name).name
    base = _UNSAFE_NAME_CHARACTERS.sub("", unicodedata.normalize("NFC", base)).strip()
    if not base:
        raise FileRefused("the upload has no file name; choose a file to upload")
    if len(base) > MAX_NAME_LENGTH:
        stem, suffix = Path(base).stem, Path(base).suffix[:20]
        base = stem[: MAX_NAME_LENGTH - len(suffix)] + suffix
    return base


def format_bytes(size: int) -> str:
    """A byte count in words, e.g. ``512 MB``."""
    units = ("bytes", "KB", "MB", "GB", "TB")
    value = float(size)
    unit = 0
    while value >= 1024 and unit < len(units) - 1:
        value /= 1024
        unit += 1
    if unit == 0:
        return f"{size} bytes"
    return f"{value:.1f} {units[unit]}" if value < 10 else f"{value:.0f} {units[unit]}"


def _count(n: int, noun: str) -> str:
    """``1 row``, ``2 rows``."""
    return f"{n:,} {noun}{'' if n == 1 else 's'}"


def _suffix(name: str) -> str:
    suffixes = Path(name).suffixes[-2:]
    return "".join(suffixes).lower()[:20] if all(len(s) <= 10 for s in suffixes) else ""
