"""Reading Parquet files with pyarrow."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pandas as pd

from app.data.readers.detection import Detected
from app.data.readers.frames import no_rows
from app.data.readers.limits import ReadLimits, check_size
from app.data.readers.messages import damaged, name_list
from app.errors import DataFileError


def read_parquet(path: Path, detected: Detected, display: str, limits: ReadLimits, **_: Any) -> pd.DataFrame:
    """A Parquet file, with its size checked from the file's metadata before the data is read."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    try:
        handle = pq.ParquetFile(str(path))
        meta = handle.metadata
        check_size(display, meta.num_rows, len(handle.schema_arrow), limits)
        if meta.num_rows == 0:
            raise no_rows(display)
        table = handle.read()
    except DataFileError:
        raise
    except (pa.ArrowException, OSError, ValueError) as error:
        raise damaged(display, "a Parquet file", error) from None
    nested = [
        field.name
        for field in table.schema
        if pa.types.is_nested(field.type) or pa.types.is_binary(field.type) or pa.types.is_large_binary(field.type)
    ]
    if nested:
        raise DataFileError(
            f'"{display}" has columns that do not hold single values (lists, records or raw bytes): '
            f"{name_list(nested)}. Flatten them into one value per cell and save the file again."
        )
    frame = table.to_pandas(date_as_object=False, split_blocks=True)
    if not isinstance(frame.index, pd.RangeIndex) or frame.index.name is not None:
        # pandas wrote its index into the file: a named index is data (an id), an unnamed one is not.
        named = any(level is not None for level in frame.index.names)
        frame = frame.reset_index(drop=not named)
    return frame
