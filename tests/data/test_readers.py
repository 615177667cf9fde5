"""Tests for app.data.readers: every format round-trips, every bad file is refused by name."""

from __future__ import annotations

import bz2
import codecs
import gzip
import lzma
import os
import sysconfig
import zipfile
from collections.abc import Callable
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pyreadr
import pyreadstat
import pytest

from app.data.profile import profile_frame
from app.data.readers import FORMATS, ReadLimits, detect_format, read_table
from app.errors import DataFileError, SecondStageError

MiB = 1 << 20

SameTable = Callable[[pd.DataFrame, pd.DataFrame], None]


def refused(path: Path, *, name: str | None = None, **options: object) -> str:
    """The message of the DataFileError that reading ``path`` raises."""
    with pytest.raises(DataFileError) as caught:
        read_table(path, name=name, **options)
    message = str(caught.value)
    assert message and "Traceback" not in message
    return message


# ---------------------------------------------------------------------------
# round trips: written by each format's own library, read back by read_table


def write_csv(frame: pd.DataFrame, path: Path) -> None:
    frame.to_csv(path, index=False)


def write_tsv(frame: pd.DataFrame, path: Path) -> None:
    frame.to_csv(path, index=False, sep="\t")


def write_semicolon(frame: pd.DataFrame, path: Path) -> None:
    frame.to_csv(path, index=False, sep=";", decimal=",")


def write_stata(frame: pd.DataFrame, path: Path) -> None:
    pyreadstat.write_dta(frame, str(path))


def write_pandas_stata(frame: pd.DataFrame, path: Path) -> None:
    frame.assign(city=frame["city"].fillna("")).to_stata(path, write_index=False, version=118)


def write_spss(frame: pd.DataFrame, path: Path) -> None:
    pyreadstat.write_sav(frame, str(path))


def write_zsav(frame: pd.DataFrame, path: Path) -> None:
    pyreadstat.write_sav(frame, str(path), compress=True)


def write_excel(frame: pd.DataFrame, path: Path) -> None:
    frame.to_excel(path, index=False, sheet_name="survey", engine="openpyxl")


def write_parquet(frame: pd.DataFrame, path: Path) -> None:
    pq.write_table(pa.Table.from_pandas(frame, preserve_index=False), path)


def write_rds(frame: pd.DataFrame, path: Path) -> None:
    pyreadr.write_rds(str(path), frame)


def write_rds_gzip(frame: pd.DataFrame, path: Path) -> None:
    pyreadr.write_rds(str(path), frame, compress="gzip")


def write_rdata(frame: pd.DataFrame, path: Path) -> None:
    pyreadr.write_rdata(str(path), frame, df_name="survey", compress="gzip")


ROUND_TRIPS = [
    ("survey.csv", "csv", write_csv, True),
    ("survey.tsv", "tsv", write_tsv, True),
    ("survey_eu.csv", "csv", write_semicolon, True),
    ("survey.dta", "stata", write_stata, True),
    ("survey_pandas.dta", "stata", write_pandas_stata, True),
    ("survey.sav", "spss", write_spss, True),
    ("survey.zsav", "spss", write_zsav, True),
    ("survey.xlsx", "excel", write_excel, True),
    ("survey.parquet", "parquet", write_parquet, True),
    # pyreadr writes dates as text, so the R files are compared without them.
    ("survey.rds", "rds", write_rds, False),
    ("survey_gz.rds", "rds", write_rds_gzip, False),
    ("survey.RData", "rdata", write_rdata, False),
]


@pytest.mark.parametrize(("file_name", "fmt", "write", "with_dates"), ROUND_TRIPS, ids=[r[0] for r in ROUND_TRIPS])
def test_round_trip(
    tmp_path: Path, survey: pd.DataFrame, same_table: SameTable, file_name: str, fmt: str, write, with_dates: bool
) -> None:
    expected = survey if with_dates else survey.drop(columns="interview")
    path = tmp_path / file_name
    write(expected, path)

    assert detect_format(path) == fmt
    frame = read_table(path)

    same_table(frame, expected)
    assert frame["city"].dtype == "str"
    assert pd.api.types.is_float_dtype(frame["wage"].dtype)
    assert pd.api.types.is_numeric_dtype(frame["id"].dtype)


@pytest.mark.parametrize(("file_name", "fmt", "write", "with_dates"), ROUND_TRIPS, ids=[r[0] for r in ROUND_TRIPS])
def test_stored_under_hash_uses_the_given_name(
    tmp_path: Path, survey: pd.DataFrame, same_table: SameTable, file_name: str, fmt: str, write, with_dates: bool
) -> None:
    expected = survey if with_dates else survey.drop(columns="interview")
    written = tmp_path / file_name
    write(expected, written)
    stored = tmp_path / "0f3a9c"  # uploads live under their SHA-256, with no extension
    written.rename(stored)

    assert detect_format(stored) == fmt  # content alone decides
    assert detect_format(stored, name=file_name) == fmt
    same_table(read_table(stored, name=file_name), expected)


def test_detect_format_names_are_the_documented_ones() -> None:
    assert set(FORMATS) == {"csv", "tsv", "stata", "spss", "sas", "excel", "parquet", "rds", "rdata"}


def test_stata_int64_reads_back_as_float64(tmp_path: Path) -> None:
    path = tmp_path / "ints.dta"
    pyreadstat.write_dta(pd.DataFrame({"count": np.array([1, 2, 3], dtype=np.int64)}), str(path))
    frame = read_table(path)
    assert frame["count"].dtype == np.float64
    assert frame["count"].tolist() == [1.0, 2.0, 3.0]


@pytest.mark.parametrize("suffix", [".dta", ".sav"])
def test_value_labels_are_not_applied(tmp_path: Path, suffix: str) -> None:
    frame = pd.DataFrame({"treated": [0.0, 1.0, 1.0], "region": [1.0, 2.0, 3.0]})
    labels = {"treated": {0: "control", 1: "treatment"}, "region": {1: "north", 2: "south", 3: "east"}}
    path = tmp_path / f"labelled{suffix}"
    writer = pyreadstat.write_dta if suffix == ".dta" else pyreadstat.write_sav
    writer(frame, str(path), variable_value_labels=labels)

    read = read_table(path)
    assert read["treated"].tolist() == [0.0, 1.0, 1.0]
    assert read["region"].tolist() == [1.0, 2.0, 3.0]
    assert pd.api.types.is_numeric_dtype(read["region"].dtype)


def test_stata_empty_strings_are_missing(tmp_path: Path) -> None:
    path = tmp_path / "strings.dta"
    pyreadstat.write_dta(pd.DataFrame({"name": ["a", "", "c"], "x": [1.0, 2.0, 3.0]}), str(path))
    assert read_table(path)["name"].isna().tolist() == [False, True, False]


# ---------------------------------------------------------------------------
# text specifics


def test_semicolon_file_with_decimal_commas(tmp_path: Path) -> None:
    path = tmp_path / "eu.csv"
    path.write_text("region;income;share\nNord;1234,5;0,25\nSüd;987,25;0,5\n", encoding="utf-8")
    frame = read_table(path)
    assert detect_format(path) == "csv"
    assert frame["income"].tolist() == [1234.5, 987.25]
    assert frame["share"].tolist() == [0.25, 0.5]


def test_tab_delimited_text_named_csv_is_accepted(tmp_path: Path) -> None:
    path = tmp_path / "export.csv"
    path.write_text("a\tb, with comma\n1\tx, y\n2\tz\n", encoding="utf-8")
    assert detect_format(path) == "tsv"
    frame = read_table(path)
    assert list(frame.columns) == ["a", "b, with comma"]
    assert frame["b, with comma"].tolist() == ["x, y", "z"]


def test_single_column_text(tmp_path: Path) -> None:
    path = tmp_path / "one.csv"
    path.write_text("income\n10\n20\n", encoding="utf-8")
    assert read_table(path)["income"].tolist() == [10, 20]


def test_missing_value_spellings(tmp_path: Path) -> None:
    path = tmp_path / "missing.csv"
    path.write_text("x,label\n1,a\n.,\nNA,c\n4,NA\n", encoding="utf-8")
    frame = read_table(path)
    assert frame["x"].isna().tolist() == [False, True, True, False]
    assert frame["label"].isna().tolist() == [False, True, False, True]


def test_quoted_newline_beyond_the_sniffed_sample(tmp_path: Path) -> None:
    rows = "".join(f"{i},plain\n" for i in range(120_000))
    path = tmp_path / "notes.csv"
    path.write_text("id,note\n" + rows + '120000,"two\nlines"\n120001,last\n', encoding="utf-8")
    frame = read_table(path)
    assert len(frame) == 120_002
    assert frame["note"].iloc[-2] == "two\nlines"


def test_trailing_delimiter_column_is_dropped(tmp_path: Path) -> None:
    path = tmp_path / "trailing.csv"
    path.write_text("a,b,\n1,2,\n3,4,\n", encoding="utf-8")
    frame = read_table(path)
    assert list(frame.columns) == ["a", "b"]


def test_column_names_with_markup_are_kept_as_text(tmp_path: Path) -> None:
    path = tmp_path / "markup.csv"
    path.write_text('"<script>alert(1)</script>",<b>wage</b>\n1,2\n', encoding="utf-8")
    frame = read_table(path)
    assert list(frame.columns) == ["<script>alert(1)</script>", "<b>wage</b>"]


def test_surrounding_spaces_in_names_are_stripped(tmp_path: Path) -> None:
    path = tmp_path / "spaces.csv"
    path.write_text("id, wage ,educ\n1,2,3\n", encoding="utf-8")
    assert list(read_table(path).columns) == ["id", "wage", "educ"]


def test_dates_in_text_become_datetimes(tmp_path: Path) -> None:
    path = tmp_path / "dates.csv"
    path.write_text("day,x\n2020-01-31,1\n2021-02-01,2\n", encoding="utf-8")
    frame = read_table(path)
    assert pd.api.types.is_datetime64_any_dtype(frame["day"].dtype)


# ---------------------------------------------------------------------------
# encodings


def test_utf8_with_bom(tmp_path: Path) -> None:
    path = tmp_path / "bom.csv"
    path.write_bytes(codecs.BOM_UTF8 + "city,wage\nZürich,1.5\n".encode())
    frame = read_table(path)
    assert list(frame.columns) == ["city", "wage"]
    assert frame["city"].tolist() == ["Zürich"]


@pytest.mark.parametrize("codec", ["utf-16", "utf-16-be-bom"])
def test_utf16_with_bom(tmp_path: Path, codec: str) -> None:
    text = "city\twage\nZürich\t1.5\nŁódź\t2\n"
    data = text.encode("utf-16") if codec == "utf-16" else codecs.BOM_UTF16_BE + text.encode("utf-16-be")
    path = tmp_path / "wide.tsv"
    path.write_bytes(data)
    frame = read_table(path)
    assert detect_format(path) == "tsv"
    assert frame["city"].tolist() == ["Zürich", "Łódź"]
    assert frame["wage"].tolist() == [1.5, 2.0]


@pytest.mark.parametrize("codec", ["cp1252", "latin-1"])
def test_western_legacy_encoding_is_read(tmp_path: Path, codec: str) -> None:
    last = "Œuvre;Zaragoza €" if codec == "cp1252" else "Ærø;Zaragoza"  # Œ and € are not in Latin-1
    text = f"name;town;income\nMüller;Málaga;1,5\nJosé Ñúñez;Besançon;2,25\n{last};3\n"
    path = tmp_path / "legacy.csv"
    path.write_bytes(text.encode(codec))
    frame = read_table(path)
    assert frame["name"].tolist() == ["Müller", "José Ñúñez", last.split(";")[0]]
    assert frame["town"].iloc[1] == "Besançon"
    assert frame["income"].tolist() == [1.5, 2.25, 3.0]


def test_legacy_byte_after_the_first_megabyte(tmp_path: Path) -> None:
    path = tmp_path / "late.csv"
    body = "id,name\n" + "1,abc\n" * 200_000
    path.write_bytes(body.encode("ascii") + "2,Müller\n".encode("cp1252"))
    frame = read_table(path)
    assert frame["name"].iloc[-1] == "Müller"
    assert len(frame) == 200_001


@pytest.mark.parametrize(
    ("data", "why"),
    [
        ("город,доход\nМосква,1\nКиев,2\n".encode("cp1251"), "Cyrillic in Windows-1251"),
        ("名前,収入\n山田,1\n田中,2\n".encode("shift_jis"), "Japanese in Shift-JIS"),
        ("city,x\nZürich,1\n".encode() + "Málaga,2\n".encode("cp1252"), "UTF-8 mixed with Windows-1252"),
        ("όνομα,x\nΑθήνα,1\n".encode("cp1253"), "Greek in Windows-1253"),
    ],
    ids=["cp1251", "shift-jis", "mixed", "cp1253"],
)
def test_ambiguous_encoding_is_refused(tmp_path: Path, data: bytes, why: str) -> None:
    path = tmp_path / "unknown.csv"
    path.write_bytes(data)
    message = refused(path)
    assert "unknown encoding" in message, why
    assert "UTF-8" in message


def test_utf16_without_bom_is_refused(tmp_path: Path) -> None:
    path = tmp_path / "wide.csv"
    path.write_bytes("city,wage\nOslo,1\n".encode("utf-16-le"))
    message = refused(path)
    assert "UTF-16" in message and "byte-order mark" in message


# ---------------------------------------------------------------------------
# refusals


def test_empty_file(tmp_path: Path) -> None:
    path = tmp_path / "empty.csv"
    path.write_bytes(b"")
    assert "empty" in refused(path)
    with pytest.raises(DataFileError, match="empty"):
        detect_format(path)


def test_blank_text_file(tmp_path: Path) -> None:
    path = tmp_path / "blank.csv"
    path.write_text("\n \n\t\n", encoding="utf-8")
    assert "empty" in refused(path)


def test_error_is_a_secondstage_error(tmp_path: Path) -> None:
    path = tmp_path / "empty.dta"
    path.write_bytes(b"")
    with pytest.raises(SecondStageError):
        read_table(path)


def write_header_only(kind: str, path: Path) -> None:
    frame = pd.DataFrame({"id": pd.Series([], dtype="float64"), "wage": pd.Series([], dtype="float64")})
    if kind == "csv":
        path.write_text("id,wage\n", encoding="utf-8")
    elif kind == "excel":
        frame.to_excel(path, index=False)
    elif kind == "stata":
        pyreadstat.write_dta(frame, str(path))
    elif kind == "spss":
        pyreadstat.write_sav(frame, str(path))
    elif kind == "parquet":
        frame.to_parquet(path, index=False)
    else:
        pyreadr.write_rds(str(path), frame)


@pytest.mark.parametrize(
    ("kind", "file_name"),
    [
        ("csv", "h.csv"),
        ("excel", "h.xlsx"),
        ("stata", "h.dta"),
        ("spss", "h.sav"),
        ("parquet", "h.parquet"),
        ("rds", "h.rds"),
    ],
)
def test_header_without_rows(tmp_path: Path, kind: str, file_name: str) -> None:
    path = tmp_path / file_name
    write_header_only(kind, path)
    assert "no rows of data" in refused(path)


@pytest.mark.parametrize(
    ("header", "duplicate"),
    [("id,wage,id", "id"), ("id, wage,wage ", "wage"), ("x,X,x", "x")],
)
def test_duplicated_column_names(tmp_path: Path, header: str, duplicate: str) -> None:
    path = tmp_path / "dup.csv"
    path.write_text(f"{header}\n1,2,3\n", encoding="utf-8")
    message = refused(path)
    assert f'two columns named "{duplicate}"' in message
    assert "unique" in message


def test_duplicated_column_names_in_excel(tmp_path: Path) -> None:
    import openpyxl

    book = openpyxl.Workbook()
    sheet = book.active
    sheet.append(["id", "wage", "wage"])
    sheet.append([1, 2.5, 3.5])
    path = tmp_path / "dup.xlsx"
    book.save(path)
    assert 'two columns named "wage"' in refused(path)


@pytest.mark.parametrize("header", [",wage", "id,  ,educ", 'id,"",educ'])
def test_blank_column_names(tmp_path: Path, header: str) -> None:
    path = tmp_path / "blank_name.csv"
    path.write_text(f"{header}\n" + ",".join(["1"] * (header.count(",") + 1)) + "\n", encoding="utf-8")
    message = refused(path)
    assert "no name" in message
    assert "column 1" in message or "column 2" in message


def test_blank_column_name_in_excel(tmp_path: Path) -> None:
    import openpyxl

    book = openpyxl.Workbook()
    sheet = book.active
    sheet.append(["id", None, "educ"])
    sheet.append([1, 2.5, 12])
    path = tmp_path / "blank.xlsx"
    book.save(path)
    assert "no name (column 2)" in refused(path)


def test_rows_longer_than_the_header(tmp_path: Path) -> None:
    path = tmp_path / "ragged.csv"
    path.write_text("a,b\n1,2\n3,4,5\n6,7\n", encoding="utf-8")
    message = refused(path)
    assert "line 3 has 3 fields but the header has 2" in message


def test_unknown_binary_file(tmp_path: Path) -> None:
    path = tmp_path / "blob"
    path.write_bytes(np.random.default_rng(3).integers(0, 256, 4096, dtype=np.uint8).tobytes())
    message = refused(path)
    assert "binary file" in message and "Stata" in message


@pytest.mark.parametrize(
    ("content", "file_name", "words"),
    [
        (b"%PDF-1.7\n%\xe2\xe3\xcf\xd3\n", "table.bin", ["PDF document"]),
        (b"\x89PNG\r\n\x1a\n" + bytes(64), "figure", ["PNG image"]),
        (b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + bytes(504), "old", ["Excel 97-2003"]),
        (b"SQLite format 3\x00" + bytes(84), "db", ["SQLite"]),
    ],
)
def test_recognised_non_data_files(tmp_path: Path, content: bytes, file_name: str, words: list[str]) -> None:
    path = tmp_path / file_name
    path.write_bytes(content)
    message = refused(path)
    for word in words:
        assert word in message


@pytest.mark.parametrize(
    ("file_name", "words"),
    [
        ("legacy.xls", ["Excel 97-2003", ".xlsx"]),
        ("analysis.do", ["do-file", ".dta"]),
        ("data.json", ["JSON"]),
        ("archive.zip", ["ZIP archive"]),
    ],
)
def test_unsupported_extensions(tmp_path: Path, file_name: str, words: list[str]) -> None:
    path = tmp_path / file_name
    path.write_bytes(b"a,b\n1,2\n")
    message = refused(path)
    for word in words:
        assert word in message


def test_workbook_named_as_an_old_excel_file(tmp_path: Path, survey: pd.DataFrame) -> None:
    path = tmp_path / "a.xlsx"
    write_excel(survey, path)
    message = refused(path, name="results.xls")
    assert "has the extension .xls, but its content is an Excel workbook (.xlsx)" in message


@pytest.mark.parametrize(
    ("start", "kind"),
    [("<!DOCTYPE html><html><body><table>", "web page"), ('{"rows": [1, 2]}', "JSON"), ('[{"a": 1}]', "JSON")],
)
def test_documents_that_are_not_tables(tmp_path: Path, start: str, kind: str) -> None:
    path = tmp_path / "download.csv"
    path.write_text(start + "\n", encoding="utf-8")
    assert kind in refused(path)


# ---------------------------------------------------------------------------
# content and extension disagree


def test_csv_content_named_dta(tmp_path: Path) -> None:
    path = tmp_path / "stored"
    path.write_text("id,wage\n1,2.5\n", encoding="utf-8")
    message = refused(path, name="survey.dta")
    assert '"survey.dta" does not look like a Stata file' in message
    assert "CSV text" in message
    with pytest.raises(DataFileError, match="does not look like a Stata file"):
        detect_format(path, name="survey.dta")


def test_mismatch_uses_path_extension_without_a_name(tmp_path: Path) -> None:
    path = tmp_path / "survey.sav"
    path.write_text("id;wage\n1;2,5\n", encoding="utf-8")
    message = refused(path)
    assert "does not look like an SPSS file" in message
    assert "semicolon-separated" in message


@pytest.mark.parametrize(
    ("write", "written_as", "named", "expected", "content"),
    [
        (write_stata, "a.dta", "survey.csv", "CSV or TSV text file", "Stata file"),
        (write_parquet, "a.parquet", "survey.xlsx", "Excel workbook", "Parquet file"),
        (write_spss, "a.sav", "survey.rds", "R data file", "SPSS file"),
        (write_excel, "a.xlsx", "survey.dta", "Stata file", "Excel workbook"),
        (write_rdata, "a.RData", "survey.rds", "R data file (.rds)", "R workspace file"),
    ],
)
def test_binary_content_with_the_wrong_extension(
    tmp_path: Path, survey: pd.DataFrame, write, written_as: str, named: str, expected: str, content: str
) -> None:
    path = tmp_path / written_as
    write(survey.drop(columns="interview"), path)
    message = refused(path, name=named)
    assert f'"{named}" does not look like' in message
    assert expected in message
    assert f"its content looks like" in message and content in message


def test_zip_that_is_not_a_workbook(tmp_path: Path) -> None:
    path = tmp_path / "data.xlsx"
    with zipfile.ZipFile(path, "w") as archive:
        archive.writestr("readme.txt", "hello")
    message = refused(path)
    assert "does not look like an Excel workbook" in message and "ZIP archive" in message


def test_damaged_stata_file(tmp_path: Path, survey: pd.DataFrame) -> None:
    whole = tmp_path / "whole.dta"
    write_stata(survey, whole)
    path = tmp_path / "cut.dta"
    path.write_bytes(whole.read_bytes()[:300])
    message = refused(path)
    assert "looks like a Stata file but could not be read" in message


# ---------------------------------------------------------------------------
# SAS


def _installed_sas7bdat_files() -> list[Path]:
    """sas7bdat files shipped inside installed packages (pandas and pyreadstat do not install theirs)."""
    roots = {Path(sysconfig.get_paths()["purelib"]), Path(sysconfig.get_paths()["platlib"])}
    found: list[Path] = []
    for root in roots:
        for directory, _, files in os.walk(root):
            found.extend(Path(directory) / name for name in files if name.lower().endswith(".sas7bdat"))
    return sorted(found)


SAS_FILES = _installed_sas7bdat_files()


@pytest.mark.skipif(
    not SAS_FILES,
    reason=(
        "no .sas7bdat file ships with any installed package (the test data of pandas and pyreadstat is "
        "not installed), and none of pandas, pyarrow, pyreadstat, openpyxl or pyreadr can write one; "
        "only SAS detection is tested"
    ),
)
def test_sas_file_from_an_installed_package() -> None:
    for path in SAS_FILES[:5]:
        assert detect_format(path) == "sas"
        try:
            frame = read_table(path)
        except DataFileError as error:  # some shipped files are deliberately broken
            assert "SAS" in str(error)
            continue
        assert len(frame) > 0 and frame.columns.is_unique


SAS_MAGIC = bytes.fromhex("000000000000000000000000c2ea8160b31411cfbd92080009c7318c181f1011")


def test_sas_detected_by_its_magic_number(stored) -> None:
    path = stored(SAS_MAGIC + bytes(4064))
    assert detect_format(path) == "sas"
    assert detect_format(path, name="survey.sas7bdat") == "sas"
    message = refused(path, name="survey.sas7bdat")
    assert "looks like a SAS data file but could not be read" in message


def test_sas_magic_named_dta(stored) -> None:
    path = stored(SAS_MAGIC + bytes(4064))
    assert "its content looks like a SAS data file" in refused(path, name="x.dta")


# ---------------------------------------------------------------------------
# Excel sheets and R objects


@pytest.fixture
def two_sheets(tmp_path: Path) -> Path:
    path = tmp_path / "book.xlsx"
    with pd.ExcelWriter(path, engine="openpyxl") as writer:
        pd.DataFrame({"a": [1, 2]}).to_excel(writer, sheet_name="first", index=False)
        pd.DataFrame({"b": ["x", "y", "z"]}).to_excel(writer, sheet_name="second", index=False)
    return path


def test_excel_first_sheet_by_default(two_sheets: Path) -> None:
    assert list(read_table(two_sheets).columns) == ["a"]


@pytest.mark.parametrize("sheet", ["second", 1])
def test_excel_chosen_sheet(two_sheets: Path, sheet: str | int) -> None:
    assert read_table(two_sheets, sheet=sheet)["b"].tolist() == ["x", "y", "z"]


def test_excel_missing_sheet(two_sheets: Path) -> None:
    message = refused(two_sheets, sheet="third")
    assert 'no sheet named "third"' in message and '"first"' in message and '"second"' in message


def test_excel_cell_details(tmp_path: Path) -> None:
    import openpyxl

    book = openpyxl.Workbook()
    sheet = book.active
    sheet.append([None, None, None])
    sheet.append(["id", "score", "note", 2019])
    sheet.append([1, 2.5, "ok", 7])
    sheet.append([2, "#N/A", 3, 8])
    sheet.append([3, None, None, 9])
    sheet.append([None, None, None, None])
    path = tmp_path / "cells.xlsx"
    book.save(path)
    frame = read_table(path)
    assert list(frame.columns) == ["id", "score", "note", "2019"]
    assert frame["score"].tolist()[0] == 2.5 and frame["score"].isna().tolist() == [False, True, True]
    assert frame["note"].tolist()[:2] == ["ok", "3"]  # a number in a text column is kept as its text
    assert len(frame) == 3


@pytest.fixture
def two_frames(tmp_path: Path) -> Path:
    path = tmp_path / "workspace.RData"
    pyreadr.write_rdata(
        str(path),
        {"households": pd.DataFrame({"size": [1.0, 4.0]}), "persons": pd.DataFrame({"age": [30.0, 41.0, 7.0]})},
    )
    return path


def test_rdata_with_several_objects_needs_a_choice(two_frames: Path) -> None:
    message = refused(two_frames)
    assert '2 objects ("households", "persons")' in message
    assert "Choose" in message


def test_rdata_chosen_object(two_frames: Path) -> None:
    assert read_table(two_frames, r_object="persons")["age"].tolist() == [30.0, 41.0, 7.0]


def test_rdata_missing_object(two_frames: Path) -> None:
    assert 'no object named "firms"' in refused(two_frames, r_object="firms")


def test_rds_keeps_meaningful_row_names(tmp_path: Path) -> None:
    path = tmp_path / "states.rds"
    pyreadr.write_rds(str(path), pd.DataFrame({"pop": [1.0, 2.0]}, index=["Ohio", "Utah"]))
    frame = read_table(path)
    assert frame["rownames"].tolist() == ["Ohio", "Utah"]
    assert frame["pop"].tolist() == [1.0, 2.0]


@pytest.mark.parametrize(("compress", "suffix"), [(bz2.compress, "bz2"), (lzma.compress, "xz")])
def test_rds_other_compressions(tmp_path: Path, compress, suffix: str) -> None:
    plain = tmp_path / "plain.rds"
    pyreadr.write_rds(str(plain), pd.DataFrame({"x": [1.0, 2.0]}))
    path = tmp_path / f"packed_{suffix}.rds"
    path.write_bytes(compress(plain.read_bytes()))
    assert detect_format(path) == "rds"
    assert read_table(path)["x"].tolist() == [1.0, 2.0]


def test_parquet_written_with_a_named_index(tmp_path: Path) -> None:
    path = tmp_path / "indexed.parquet"
    pd.DataFrame({"firm": [10, 20, 30], "sales": [1.5, 2.5, 3.5]}).set_index("firm").to_parquet(path)
    frame = read_table(path)
    assert list(frame.columns) == ["firm", "sales"]
    assert frame["firm"].tolist() == [10, 20, 30]


def test_parquet_with_an_unnamed_index(tmp_path: Path) -> None:
    path = tmp_path / "unnamed.parquet"
    pd.DataFrame({"sales": [1.5, 2.5]}, index=[7, 9]).to_parquet(path)
    frame = read_table(path)
    assert list(frame.columns) == ["sales"]
    assert isinstance(frame.index, pd.RangeIndex)


# ---------------------------------------------------------------------------
# limits and decompression bombs


def test_too_many_columns(tmp_path: Path) -> None:
    path = tmp_path / "wide.csv"
    path.write_text("a,b,c,d\n1,2,3,4\n", encoding="utf-8")
    message = refused(path, limits=ReadLimits(max_columns=3))
    assert "4 columns, more than the 3" in message


def test_too_many_rows(tmp_path: Path, survey: pd.DataFrame) -> None:
    path = tmp_path / "long.dta"
    write_stata(survey, path)
    assert "more than 3 rows" in refused(path, limits=ReadLimits(max_rows=3))


def test_file_too_large(tmp_path: Path) -> None:
    path = tmp_path / "big.csv"
    path.write_text("a\n" + "1\n" * 1000, encoding="utf-8")
    assert "more than the 1.0 KiB" in refused(path, limits=ReadLimits(max_bytes=1024))


def _xlsx_bomb(path: Path, sheet_bytes: int) -> None:
    """A workbook whose sheet part is ``sheet_bytes`` of one repeated row: tiny packed, huge unpacked."""
    row = b'<row><c t="n"><v>0</v></c></row>'
    block = row * (MiB // len(row))
    with zipfile.ZipFile(path, "w", compression=zipfile.ZIP_DEFLATED, compresslevel=1) as archive:
        archive.writestr(
            "[Content_Types].xml",
            '<?xml version="1.0"?><Types xmlns="http://schemas.openxmlformats.org/package/2006/content-types"/>',
        )
        archive.writestr("xl/workbook.xml", '<?xml version="1.0"?><workbook/>')
        with archive.open("xl/worksheets/sheet1.xml", "w", force_zip64=True) as sheet:
            written = 0
            while written < sheet_bytes:
                sheet.write(block)
                written += len(block)


def test_xlsx_decompression_bomb_is_refused_without_inflating(tmp_path: Path, monkeypatch) -> None:
    path = tmp_path / "bomb.xlsx"
    _xlsx_bomb(path, 256 * MiB)
    assert path.stat().st_size < 4 * MiB

    def no_inflating(*args: object, **kwargs: object) -> None:
        raise AssertionError("a part of the workbook was opened")

    monkeypatch.setattr(zipfile.ZipFile, "open", no_inflating)
    message = refused(path)
    assert "decompression bomb" in message
    assert "xl/worksheets/sheet1.xml" in message


def test_xlsx_total_unpacked_size_limit(tmp_path: Path, monkeypatch) -> None:
    path = tmp_path / "large.xlsx"
    _xlsx_bomb(path, 4 * MiB)
    monkeypatch.setattr(zipfile.ZipFile, "open", lambda *a, **k: pytest.fail("opened"))
    message = refused(path, limits=ReadLimits(max_unpacked_bytes=2 * MiB))
    assert "would unpack to" in message and "more than the 2.0 MiB" in message


def test_parquet_row_bomb_is_refused_from_metadata(tmp_path: Path, monkeypatch) -> None:
    path = tmp_path / "rows.parquet"
    pq.write_table(pa.table({"x": pa.nulls(60_000_000, pa.int8())}), path)
    assert path.stat().st_size < 4 * MiB
    monkeypatch.setattr(pq.ParquetFile, "read", lambda *a, **k: pytest.fail("the table was read"))
    message = refused(path)
    assert "more than 50,000,000 rows" in message


def test_parquet_cell_limit_is_checked_before_reading(tmp_path: Path, monkeypatch) -> None:
    path = tmp_path / "cells.parquet"
    pq.write_table(pa.table({f"v{i}": np.zeros(1000) for i in range(5)}), path)
    monkeypatch.setattr(pq.ParquetFile, "read", lambda *a, **k: pytest.fail("the table was read"))
    message = refused(path, limits=ReadLimits(max_cells=4000))
    assert "5,000 values" in message


def test_compressed_rds_bomb(tmp_path: Path, monkeypatch) -> None:
    path = tmp_path / "bomb.rds"
    with gzip.open(path, "wb", compresslevel=1) as handle:
        handle.write(b"X\n\x00\x00\x00\x03")
        zeros = bytes(MiB)
        for _ in range(64):
            handle.write(zeros)
    monkeypatch.setattr(pyreadr, "read_r", lambda *a, **k: pytest.fail("the file was read"))
    message = refused(path, limits=ReadLimits(max_unpacked_bytes=16 * MiB))
    assert "would unpack to more than 16.0 MiB" in message
