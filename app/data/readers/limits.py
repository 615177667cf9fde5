"""Size limits, and the guards that refuse a decompression bomb before it is inflated."""

from __future__ import annotations

import bz2
import lzma
import zipfile
import zlib
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from app.data.readers.messages import damaged, human_bytes
from app.errors import DataFileError

GiB = 1 << 30
MiB = 1 << 20


@dataclass(frozen=True)
class ReadLimits:
    """Sizes above which a file is refused before (or instead of) being read.

    Parameters
    ----------
    max_bytes
        Size of the file on disk.
    max_rows, max_columns
        Rows (observations) and columns (variables) of the table.
    max_cells
        Rows times columns. Checked from the file's own metadata before
        reading wherever the format records it (Stata, SPSS, SAS, Parquet).
    max_unpacked_bytes
        Total uncompressed size of the parts of an Excel workbook (from the
        ZIP directory, before anything is inflated) and of the decompressed
        stream of a compressed R file.
    max_compression_ratio
        Largest uncompressed/compressed ratio allowed for a large part
        (over ``ratio_floor_bytes`` uncompressed) of an Excel workbook.
        Real sheets compress 5 to 30 times; a decompression bomb, thousands.
    ratio_floor_bytes
        Parts smaller than this are harmless whatever their ratio.
    """

    max_bytes: int = 2 * GiB
    max_rows: int = 50_000_000
    max_columns: int = 5_000
    max_cells: int = 1_000_000_000
    max_unpacked_bytes: int = 2 * GiB
    max_compression_ratio: float = 100.0
    ratio_floor_bytes: int = 16 * MiB


DEFAULT_LIMITS = ReadLimits()


def check_zip_bomb(path: Path, display: str, limits: ReadLimits) -> None:
    """Refuse a workbook whose ZIP directory promises too much data, before anything is inflated."""
    try:
        with zipfile.ZipFile(path) as archive:
            entries = archive.infolist()
    except (zipfile.BadZipFile, OSError) as error:
        raise damaged(display, "an Excel workbook", error) from None
    total = sum(entry.file_size for entry in entries)
    if total > limits.max_unpacked_bytes:
        raise DataFileError(
            f'"{display}" would unpack to {human_bytes(total)}, '
            f"more than the {human_bytes(limits.max_unpacked_bytes)} "
            "allowed for a workbook. It was not opened. Save the data as CSV instead."
        )
    for entry in entries:
        if entry.file_size < limits.ratio_floor_bytes:
            continue
        ratio = entry.file_size / max(entry.compress_size, 1)
        if ratio > limits.max_compression_ratio:
            raise DataFileError(
                f'"{display}" was refused without being opened: its part {entry.filename} is compressed '
                f"{ratio:,.0f} times ({human_bytes(entry.compress_size)} unpacking to "
                f"{human_bytes(entry.file_size)}), far more than real spreadsheet data compresses. "
                "Files built like this (decompression bombs) are used to exhaust a server's memory. "
                "If the workbook is genuine, save the data as CSV and upload that."
            )


def check_stream_bomb(path: Path, compression: str, display: str, limits: ReadLimits, label: str) -> None:
    """Inflate a compressed R file into nothing, counting, and stop as soon as it passes the limit."""
    try:
        total = _inflated_size(path, compression, stop_after=limits.max_unpacked_bytes)
    except (OSError, zlib.error, lzma.LZMAError, EOFError, ValueError) as error:
        raise damaged(display, label, error) from None
    if total > limits.max_unpacked_bytes:
        raise DataFileError(
            f'"{display}" would unpack to more than {human_bytes(limits.max_unpacked_bytes)}, '
            "the limit for one data file, so it was not read."
        )


def _inflated_size(path: Path, compression: str, *, stop_after: int) -> int:
    step = 16 * MiB
    total = 0
    with path.open("rb") as handle:
        if compression == "gzip":
            gunzip = zlib.decompressobj(16 + zlib.MAX_WBITS)
            for chunk in iter(lambda: handle.read(MiB), b""):
                while chunk and not gunzip.eof:
                    total += len(gunzip.decompress(chunk, step))
                    if total > stop_after:
                        return total
                    chunk = gunzip.unconsumed_tail
                if gunzip.eof:
                    break
            return total
        inflater: Any = bz2.BZ2Decompressor() if compression == "bzip2" else lzma.LZMADecompressor()
        for chunk in iter(lambda: handle.read(MiB), b""):
            total += len(inflater.decompress(chunk, max_length=step))
            while not inflater.eof and not inflater.needs_input and total <= stop_after:
                total += len(inflater.decompress(b"", max_length=step))
            if total > stop_after or inflater.eof:
                break
    return total


def check_size(display: str, rows: int, columns: int, limits: ReadLimits) -> None:
    """Refuse a table with more columns, rows or values than the limits allow."""
    if columns > limits.max_columns:
        raise too_many_columns(display, columns, limits)
    if rows > limits.max_rows:
        raise too_many_rows(display, rows, limits)
    if rows * columns > limits.max_cells:
        raise DataFileError(
            f'"{display}" has {rows:,} rows and {columns:,} columns ({rows * columns:,} values), more than the '
            f"{limits.max_cells:,} values this server reads from one file. Keep only the variables you need."
        )


def too_many_columns(display: str, columns: int, limits: ReadLimits) -> DataFileError:
    """The refusal of a table that is too wide."""
    return DataFileError(
        f'"{display}" has {columns:,} columns, more than the {limits.max_columns:,} this server reads. '
        "Keep only the variables you need."
    )


def too_many_rows(display: str, rows: int, limits: ReadLimits) -> DataFileError:
    """The refusal of a table that is too long."""
    return DataFileError(
        f'"{display}" has more than {limits.max_rows:,} rows, the most this server reads from one file.'
    )
