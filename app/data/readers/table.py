"""The one entry point: refuse an oversized file, detect the format, read it with that format's reader, finish."""

from __future__ import annotations

import warnings
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path

import pandas as pd

from app.data.readers.columnar import read_parquet
from app.data.readers.detection import detect, display_name, file_size
from app.data.readers.frames import finish_frame
from app.data.readers.limits import DEFAULT_LIMITS, ReadLimits
from app.data.readers.messages import human_bytes
from app.data.readers.rdata import read_r
from app.data.readers.spreadsheet import read_excel
from app.data.readers.statistical import read_sas, read_spss, read_stata
from app.data.readers.text import read_text
from app.errors import DataFileError

READERS: dict[str, Callable[..., pd.DataFrame]] = {
    "csv": read_text,
    "tsv": read_text,
    "stata": read_stata,
    "spss": read_spss,
    "sas": read_sas,
    "excel": read_excel,
    "parquet": read_parquet,
    "rds": read_r,
    "rdata": read_r,
}
"""The reader of each format; each takes the path, what detection found, the name shown, the limits and options."""


def read_table(
    path: Path,
    *,
    name: str | None = None,
    limits: ReadLimits | None = None,
    sheet: str | int | None = None,
    r_object: str | None = None,
) -> pd.DataFrame:
    """Read a data file of any supported format into a DataFrame.

    Parameters
    ----------
    path
        The file on disk.
    name
        The original file name, used for the extension cross-check and in messages.
    limits
        Size limits; :class:`ReadLimits` defaults when ``None``.
    sheet
        Excel only: the sheet to read, by name or by 0-based position. The
        first sheet when ``None``.
    r_object
        R workspace files (.RData) only: the data frame to read when the file
        holds several.

    Returns
    -------
    pandas.DataFrame
        See the module docstring for what the frame is guaranteed to look like.

    Raises
    ------
    DataFileError
        For every problem with the file, with a message that names it.
    """
    path = Path(path)
    limits = limits or DEFAULT_LIMITS
    display = display_name(path, name)
    size = file_size(path, display)
    if size > limits.max_bytes:
        raise DataFileError(
            f'"{display}" is {human_bytes(size)}, more than the {human_bytes(limits.max_bytes)} '
            "that this server accepts for one data file."
        )
    detected = detect(path, display)
    reader = READERS[detected.format]
    with quiet():
        frame = reader(path, detected, display, limits, sheet=sheet, r_object=r_object)
    return finish_frame(frame, display, limits)


@contextmanager
def quiet() -> Iterator[None]:
    """Silence library warnings (they would reach the web app's logs or fail a ``-W error`` run)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        yield
