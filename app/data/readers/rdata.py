"""Reading R data files (.rds and .RData) with pyreadr."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pandas as pd

from app.data.readers.detection import Detected
from app.data.readers.formats import FORMAT_LABELS
from app.data.readers.limits import ReadLimits, check_stream_bomb
from app.data.readers.messages import damaged, name_list
from app.errors import DataFileError


def read_r(
    path: Path, detected: Detected, display: str, limits: ReadLimits, *, r_object: str | None = None, **_: Any
) -> pd.DataFrame:
    """The one data frame of an R file (a workspace may hold several: ``r_object`` chooses)."""
    import pyreadr

    label = FORMAT_LABELS[detected.format]
    if detected.compression is not None:
        check_stream_bomb(path, detected.compression, display, limits, label)
    try:
        if detected.format == "rds":
            result = pyreadr.read_r(str(path))
        else:
            listed = [entry.get("object_name") for entry in pyreadr.list_objects(str(path))]
            listed = [name for name in listed if name is not None]
            if r_object is None and len(listed) > 1:
                raise DataFileError(
                    f'"{display}" holds {len(listed)} objects ({name_list(listed)}). '
                    "Choose which data frame to read."
                )
            if r_object is not None and r_object not in listed:
                raise DataFileError(
                    f'"{display}" has no object named "{r_object}"; it holds {name_list(listed) or "no data frame"}.'
                )
            result = pyreadr.read_r(str(path), use_objects=[r_object] if r_object else None)
    except DataFileError:
        raise
    except Exception as error:  # noqa: BLE001 - pyreadr raises several types for bad files
        raise damaged(display, label, error) from None
    frames = [(key, value) for key, value in result.items() if isinstance(value, pd.DataFrame)]
    if not frames:
        raise DataFileError(
            f'"{display}" holds no data frame that can be read (lists, models and other R objects are not tables). '
            "In R, save the data frame itself with saveRDS() or write.csv()."
        )
    if len(frames) > 1:
        raise DataFileError(
            f'"{display}" holds {len(frames)} data frames ({name_list([str(key) for key, _ in frames])}). '
            "Choose which one to read."
        )
    frame = frames[0][1]
    index = frame.index
    if not isinstance(index, pd.RangeIndex):
        trivial = index.astype(str).tolist() == [str(position + 1) for position in range(len(index))]
        if trivial:
            frame = frame.reset_index(drop=True)
        else:
            name = "rownames" if "rownames" not in frame.columns else "_rownames"
            frame = frame.reset_index(names=name)
    return frame
