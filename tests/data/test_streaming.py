"""Tests for app.data.readers.streaming: reading while receiving gives what read_table gives for the stored file."""

from __future__ import annotations

import threading
from collections.abc import Callable
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from app.data.readers import ReadWhileReceiving, detect_format, read_table
from app.data.readers import streaming as streaming_module
from app.errors import DataFileError
from tests.data.test_readers import ROUND_TRIPS

MiB = 1 << 20


class Chunks:
    """A source that hands out ``content`` in chunks of ``chunk`` bytes, as an upload arrives."""

    def __init__(self, content: bytes, *, chunk: int = 64 * 1024, fail_after: int | None = None) -> None:
        self._content = memoryview(content)
        self._chunk = chunk
        self._position = 0
        self._fail_after = fail_after

    def read(self, size: int = -1, /) -> bytes:
        if self._fail_after is not None and self._position >= self._fail_after:
            raise DataFileError("the upload was cut off before the end of the file; try again")
        step = self._chunk if size < 0 else min(size, self._chunk)
        piece = bytes(self._content[self._position : self._position + step])
        self._position += len(piece)
        return piece


def receive(source: Chunks, reading: ReadWhileReceiving, path: Path) -> None:
    """What the file store does: read the source through ``reading`` to its end, writing every chunk."""
    with path.open("wb") as target:
        while chunk := reading.read(1 * MiB):
            target.write(chunk)


def through_stream(content: bytes, path: Path, name: str, *, chunk: int = 64 * 1024) -> tuple[pd.DataFrame, str] | str:
    """The table and format read while receiving ``content``, or the message of the DataFileError."""
    source = Chunks(content, chunk=chunk)
    try:
        with ReadWhileReceiving(source, name=name) as reading:
            receive(source, reading, path)
            return reading.table(path)
    except DataFileError as error:
        return str(error)


def from_stored_file(path: Path, name: str) -> tuple[pd.DataFrame, str] | str:
    """The table and format read_table and detect_format give for the stored file, or the message."""
    try:
        return read_table(path, name=name), detect_format(path, name=name)
    except DataFileError as error:
        return str(error)


def assert_same(streamed: tuple[pd.DataFrame, str] | str, stored: tuple[pd.DataFrame, str] | str) -> None:
    if isinstance(stored, str):
        assert streamed == stored
        return
    assert not isinstance(streamed, str), streamed
    pd.testing.assert_frame_equal(streamed[0], stored[0])
    assert streamed[1] == stored[1]


def large_csv(rows: int = 60_000, *, seed: int = 3) -> bytes:
    """A CSV of a few megabytes: more than the head that detection reads, several pyarrow blocks."""
    rng = np.random.default_rng(seed)
    frame = pd.DataFrame(
        {
            "household": np.arange(rows) + 5_000,
            "district": rng.integers(1, 30, rows),
            "enrolled": rng.integers(0, 2, rows),
            "rainfall_mm": np.round(rng.gamma(3.0, 20.0, rows), 1),
            "harvest_index": rng.standard_normal(rows),
            "village": rng.choice(["Amara", "Bekoji", "Dilla", "Gimbi"], rows),
        }
    )
    return frame.to_csv(index=False).encode()


TEXT_CASES: dict[str, tuple[str, Callable[[], bytes]]] = {
    "small": ("plots.csv", lambda: b"plot,yield_t,irrigated\n1,2.5,1\n2,3.25,0\n3,,1\n"),
    "large": ("farms.csv", large_csv),
    "large-no-extension": ("farms", large_csv),
    "tsv": ("plots.tsv", lambda: b"plot\tyield_t\n1\t2.5\n2\t3.0\n"),
    "semicolon-decimal-comma": ("plots.csv", lambda: b"plot;yield_t\n1;2,5\n2;3,0\n"),
    "utf8-bom": ("plots.csv", lambda: "\ufeffplot,région\n1,Savoie\n2,Jura\n".encode()),
    "utf16-bom": ("plots.csv", lambda: "plot,région\n1,Savoie\n2,Jura\n".encode("utf-16")),
    "windows-1252": ("plots.csv", lambda: "plot,région\n1,Savoie\n2,Isère\n".encode("cp1252")),
    "windows-1252-after-the-head": (
        "plots.csv",
        lambda: large_csv().replace(b"Gimbi", "Gimbi\xe9".encode("cp1252")),
    ),
    "quoted-newline-after-the-head": (
        "notes.csv",
        lambda: b"plot,note\n" + b"".join(b"%d,plain\n" % i for i in range(150_000)) + b'7,"two\nlines"\n',
    ),
    "ragged-row-after-the-head": (
        "plots.csv",
        lambda: b"plot,yield_t\n" + b"".join(b"%d,%d\n" % (i, i) for i in range(150_000)) + b"9,9,9\n",
    ),
    "decimal-after-the-head": (
        "plots.csv",
        lambda: b"plot,yield_t\n" + b"".join(b"%d,%d\n" % (i, i % 7) for i in range(150_000)) + b"9,2.5\n",
    ),
    "text-after-the-head-in-a-number-column": (
        "plots.csv",
        lambda: b"plot,yield_t\n" + b"".join(b"%d,%d.5\n" % (i, i % 7) for i in range(150_000)) + b"9,lost\n",
    ),
    "trailing-delimiter": ("plots.csv", lambda: b"plot,yield_t,\n1,2.5,\n2,3.0,\n"),
    "header-only": ("plots.csv", lambda: b"plot,yield_t\n"),
    "duplicated-names": ("plots.csv", lambda: b"plot,plot\n1,2\n"),
    "blank-name": ("plots.csv", lambda: b"plot,,yield_t\n1,2,3\n"),
    "empty": ("plots.csv", lambda: b""),
    "blank-lines": ("plots.csv", lambda: b"\n\n  \n"),
    "web-page": ("plots.csv", lambda: b"<!DOCTYPE html><html><body>no table</body></html>"),
    "csv-named-as-stata": ("plots.dta", lambda: b"plot,yield_t\n1,2.5\n"),
    "csv-named-as-script": ("plots.do", lambda: b"plot,yield_t\n1,2.5\n"),
    "binary-noise": ("plots.csv", lambda: bytes(range(256)) * 64),
}


@pytest.mark.parametrize("case", list(TEXT_CASES))
def test_text_read_while_receiving_is_read_table_of_the_stored_file(tmp_path: Path, case: str) -> None:
    name, make = TEXT_CASES[case]
    content = make()
    streamed = through_stream(content, tmp_path / "streamed", name)
    stored_path = tmp_path / "stored"
    stored_path.write_bytes(content)
    assert_same(streamed, from_stored_file(stored_path, name))


@pytest.mark.parametrize(("file_name", "fmt", "write", "with_dates"), ROUND_TRIPS, ids=[r[0] for r in ROUND_TRIPS])
def test_every_format_read_while_receiving_is_read_table_of_the_stored_file(
    tmp_path: Path, survey: pd.DataFrame, file_name: str, fmt: str, write, with_dates: bool
) -> None:
    written = tmp_path / file_name
    write(survey if with_dates else survey.drop(columns="interview"), written)
    streamed = through_stream(written.read_bytes(), tmp_path / "streamed", file_name, chunk=1000)
    assert_same(streamed, from_stored_file(written, file_name))
    assert streamed[1] == fmt


def test_a_plain_csv_is_parsed_while_it_arrives(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    def not_again(*args: object, **kwargs: object) -> None:
        pytest.fail("the stored file was read again")

    monkeypatch.setattr(streaming_module, "read_table", not_again)
    frame, fmt = through_stream(large_csv(), tmp_path / "streamed", "farms.csv")
    assert fmt == "csv" and len(frame) == 60_000
    assert list(frame.columns) == ["household", "district", "enrolled", "rainfall_mm", "harvest_index", "village"]


def test_a_parser_far_behind_holds_the_upload_back_without_losing_bytes(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(streaming_module, "PIPE_BYTES", 100_000)
    content = large_csv()
    stored_path = tmp_path / "stored"
    stored_path.write_bytes(content)
    streamed = through_stream(content, tmp_path / "streamed", "farms.csv", chunk=7_000)
    assert_same(streamed, from_stored_file(stored_path, "farms.csv"))


def test_a_binary_file_larger_than_the_pipe_passes_without_waiting_for_a_parser(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(streaming_module, "PIPE_BYTES", 10_000)
    content = b"PAR1" + bytes(3 * MiB)  # a Parquet magic: not parsed while it arrives, refused afterwards
    streamed = through_stream(content, tmp_path / "streamed", "farms.parquet")
    stored_path = tmp_path / "stored"
    stored_path.write_bytes(content)
    assert isinstance(streamed, str) and streamed == from_stored_file(stored_path, "farms.parquet")


def test_an_upload_that_fails_half_way_stops_the_parser(tmp_path: Path) -> None:
    source = Chunks(large_csv(), fail_after=2 * MiB)
    before = threading.active_count()
    with pytest.raises(DataFileError, match="cut off"):
        with ReadWhileReceiving(source, name="farms.csv") as reading:
            receive(source, reading, tmp_path / "partial")
    assert threading.active_count() == before


def test_leaving_before_the_table_is_asked_for_stops_the_parser(tmp_path: Path) -> None:
    source = Chunks(large_csv())
    before = threading.active_count()
    with ReadWhileReceiving(source, name="farms.csv") as reading:
        reading.read(1 * MiB)
    assert threading.active_count() == before


def test_a_stored_file_that_differs_in_size_is_read_again(tmp_path: Path) -> None:
    content = b"plot,yield_t\n1,2.5\n2,3.0\n"
    source = Chunks(content)
    path = tmp_path / "stored"
    with ReadWhileReceiving(source, name="plots.csv") as reading:
        receive(source, reading, path)
        path.write_bytes(content + b"3,4.0\n")
        frame, fmt = reading.table(path)
    assert fmt == "csv" and frame["plot"].tolist() == [1, 2, 3]


def test_the_file_name_is_required() -> None:
    with pytest.raises(ValueError):
        ReadWhileReceiving(Chunks(b"a\n1\n"), name="")
