"""Reading Excel workbooks (.xlsx) with openpyxl, cell by cell, after the ZIP directory was checked."""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from app.data.readers.detection import Detected
from app.data.readers.frames import check_names, header_text, no_rows
from app.data.readers.limits import ReadLimits, check_zip_bomb, too_many_columns, too_many_rows
from app.data.readers.messages import damaged, name_list
from app.errors import DataFileError


def read_excel(
    path: Path, detected: Detected, display: str, limits: ReadLimits, *, sheet: str | int | None = None, **_: Any
) -> pd.DataFrame:
    """One sheet of an Excel workbook (the first unless ``sheet`` names another)."""
    import openpyxl

    check_zip_bomb(path, display, limits)
    with path.open("rb") as handle:  # a file object: openpyxl would insist on an .xlsx path name
        try:
            book = openpyxl.load_workbook(handle, read_only=True, data_only=True)
        except Exception as error:  # noqa: BLE001 - openpyxl raises many types for bad files
            raise damaged(display, "an Excel workbook", error) from None
        return _read_sheet(book, display, limits, sheet)


def _read_sheet(book: Any, display: str, limits: ReadLimits, sheet: str | int | None) -> pd.DataFrame:
    try:
        names = book.sheetnames
        if sheet is None:
            worksheet = book.worksheets[0] if book.worksheets else None
            if worksheet is None:
                raise DataFileError(f'"{display}" has no worksheet with data.')
        elif isinstance(sheet, int):
            if not 0 <= sheet < len(book.worksheets):
                raise DataFileError(
                    f'"{display}" has {len(names)} sheet(s) ({name_list(names)}); '
                    f"there is no sheet number {sheet + 1}."
                )
            worksheet = book.worksheets[sheet]
        else:
            if sheet not in names:
                raise DataFileError(f'"{display}" has no sheet named "{sheet}"; its sheets are {name_list(names)}.')
            worksheet = book[sheet]
        try:
            rows = worksheet.iter_rows(values_only=True)
            frame = _sheet_frame(rows, display, worksheet.title, limits)
        except DataFileError:
            raise
        except Exception as error:  # noqa: BLE001
            raise damaged(display, "an Excel workbook", error) from None
    finally:
        book.close()
    return frame


_EXCEL_ERRORS = frozenset(
    {"#N/A", "#DIV/0!", "#VALUE!", "#REF!", "#NAME?", "#NUM!", "#NULL!", "#GETTING_DATA", "#SPILL!", "#CALC!"}
)
_TEXT_MISSING = frozenset({"", ".", "NA", "N/A", "n/a", "NaN", "nan", "NULL", "null", "#NA"})


def _sheet_frame(rows: Iterator[tuple[Any, ...]], display: str, title: str, limits: ReadLimits) -> pd.DataFrame:
    header: tuple[Any, ...] | None = None
    data: list[tuple[Any, ...]] = []
    for row in rows:
        if header is None:
            if all(_blank_cell(value) for value in row):
                continue
            header = row
            if len(header) > limits.max_columns:
                header = _trim_trailing_blanks(header)
                if len(header) > limits.max_columns:
                    raise too_many_columns(display, len(header), limits)
            continue
        data.append(row)
        if len(data) > limits.max_rows:
            raise too_many_rows(display, len(data), limits)
    if header is None:
        raise DataFileError(f'"{display}": the sheet "{title}" is empty.')
    while data and all(_blank_cell(value) for value in data[-1]):
        data.pop()
    width = max([len(_trim_trailing_blanks(header))] + [len(_trim_trailing_blanks(row)) for row in data])
    if not data:
        raise no_rows(display, f'the sheet "{title}"')
    columns: dict[str, pd.Series] = {}
    names = [header_text(header[position] if position < len(header) else None) for position in range(width)]
    check_names(names, display)
    for position, name in enumerate(names):
        values = [row[position] if position < len(row) else None for row in data]
        columns[name] = _excel_column(values)
    return pd.DataFrame(columns)


def _blank_cell(value: Any) -> bool:
    return value is None or (isinstance(value, str) and value.strip() == "")


def _trim_trailing_blanks(row: tuple[Any, ...]) -> tuple[Any, ...]:
    end = len(row)
    while end and _blank_cell(row[end - 1]):
        end -= 1
    return row[:end]


def _excel_column(values: list[Any]) -> pd.Series:
    import datetime as dt

    cleaned: list[Any] = []
    kinds: set[str] = set()
    for value in values:
        if isinstance(value, str):
            stripped = value.strip()
            if stripped in _EXCEL_ERRORS or stripped in _TEXT_MISSING:
                value = None
        if value is None:
            cleaned.append(None)
            continue
        if isinstance(value, bool):
            kinds.add("bool")
        elif isinstance(value, (int, float)):
            kinds.add("number")
        elif isinstance(value, (dt.datetime, dt.date)):
            kinds.add("datetime")
        else:
            kinds.add("text")
        cleaned.append(value)
    if not kinds:
        return pd.Series([np.nan] * len(values), dtype="float64")
    if kinds == {"number"}:
        return pd.to_numeric(pd.Series(cleaned, dtype=object))
    if kinds == {"bool"}:
        if any(value is None for value in cleaned):
            return pd.Series([np.nan if value is None else float(value) for value in cleaned], dtype="float64")
        return pd.Series(cleaned, dtype=bool)
    if kinds == {"datetime"}:
        return pd.to_datetime(pd.Series(cleaned, dtype=object))
    return pd.Series([None if value is None else _cell_text(value) for value in cleaned], dtype="str")


def _cell_text(value: Any) -> str:
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    return str(value)
