"""Uploads: stored once under their hash, profiled, versioned; bad files leave nothing behind."""

from __future__ import annotations

import io

import numpy as np
import pandas as pd
import pytest
from sqlalchemy import func, select

from app.errors import DataFileError
from app.services import cases, datasets
from app.services.context import ServiceContext
from app.services.errors import FileRefused, FileTooLarge, NotFound
from app.store.models import Dataset
from tests.services.conftest import simulated_csv, upload


@pytest.fixture
def case_id(ctx: ServiceContext) -> int:
    return cases.create_case(ctx, title="Uploads").case.id


def test_an_upload_becomes_a_profiled_data_version(ctx: ServiceContext, case_id: int, demo_csv: bytes) -> None:
    detail = datasets.upload_dataset(ctx, case_id=case_id, source=io.BytesIO(demo_csv), file_name="walking.csv")

    frame = pd.read_csv(io.BytesIO(demo_csv))
    assert (detail.dataset.version, detail.dataset.n_rows, detail.dataset.n_columns) == (1, *frame.shape)
    assert detail.dataset.original_name == "walking.csv"
    assert detail.dataset.file_format == "csv"
    assert ctx.files.path_for(detail.dataset.sha256).read_bytes() == demo_csv
    profile = {variable["name"]: variable for variable in detail.profile["variables"]}
    bmi = profile["bmi"]
    values = frame["bmi"].dropna()
    assert bmi["n_missing"] == frame["bmi"].isna().sum() > 0
    assert bmi["mean"] == pytest.approx(values.mean(), rel=1e-12)
    assert bmi["sd"] == pytest.approx(values.std(ddof=1), rel=1e-12)
    assert (bmi["min"], bmi["max"]) == (values.min(), values.max())
    assert sum(bmi["histogram"]["counts"]) == len(values)


def test_the_history_counts_rows_and_columns_in_words(ctx: ServiceContext, case_id: int) -> None:
    upload(ctx, case_id, b"only\n1\n", "one.csv")
    upload(ctx, case_id, simulated_csv(), "many.csv")

    messages = [event.message for event in cases.get_case(ctx, case_id=case_id).events if event.kind == "dataset_uploaded"]
    assert any("one.csv (1 row, 1 column)" in message for message in messages), messages
    rows, columns = pd.read_csv(io.BytesIO(simulated_csv())).shape
    assert any(f"many.csv ({rows:,} rows, {columns} columns)" in message for message in messages), messages


def test_each_upload_is_the_next_version_and_identical_bytes_are_stored_once(
    ctx: ServiceContext, case_id: int
) -> None:
    content = simulated_csv()
    upload(ctx, case_id, content, "v1.csv")
    upload(ctx, case_id, content, "v1 again.csv")
    upload(ctx, case_id, simulated_csv(seed=8), "v2.csv")

    versions = cases.get_case(ctx, case_id=case_id).datasets
    assert [item.version for item in versions] == [1, 2, 3]
    assert versions[0].sha256 == versions[1].sha256 != versions[2].sha256
    stored = [path for path in ctx.files.root.rglob("*") if path.is_file()]
    assert len(stored) == 2


def test_the_file_name_is_metadata_only(ctx: ServiceContext, case_id: int) -> None:
    detail = datasets.upload_dataset(
        ctx, case_id=case_id, source=io.BytesIO(simulated_csv()), file_name="../../secret\x00/..\\survey.csv"
    )
    assert detail.dataset.original_name == "survey.csv"
    assert ctx.files.path_for(detail.dataset.sha256).name == detail.dataset.sha256


BAD_FILES = {
    "empty": ("empty.csv", b"", FileRefused, "empty"),
    "wrong type": ("scan.csv", b"%PDF-1.4\n%\xe2\xe3\n1 0 obj\n", DataFileError, "PDF"),
    "binary": ("data.csv", bytes(range(256)) * 8, DataFileError, "binary"),
    "unknown encoding": ("data.csv", b"\xff\xfe\x00\x00garbage\x80\x81\x82\x83", DataFileError, "UTF-32"),
    "duplicated names": ("data.csv", b"a,a,b\n1,2,3\n4,5,6\n", DataFileError, "two columns named"),
    "blank name": ("data.csv", b"a,,b\n1,2,3\n4,5,6\n", DataFileError, "no name"),
    "header only": ("data.csv", b"a,b\n", DataFileError, "no rows"),
}


@pytest.mark.parametrize("kind", BAD_FILES)
def test_a_bad_file_gets_a_message_and_leaves_nothing(ctx: ServiceContext, case_id: int, kind: str) -> None:
    name, content, error, message = BAD_FILES[kind]

    with pytest.raises(error, match=message):
        datasets.upload_dataset(ctx, case_id=case_id, source=io.BytesIO(content), file_name=name)

    assert_nothing_stored(ctx)


def test_a_file_over_the_limit_is_refused_while_it_arrives(ctx: ServiceContext, case_id: int) -> None:
    limit = ctx.settings.max_upload_bytes
    content = b"a,b\n" + b"1,2\n" * (limit // 4 + 1)

    with pytest.raises(FileTooLarge, match="larger than this server accepts"):
        datasets.upload_dataset(ctx, case_id=case_id, source=io.BytesIO(content), file_name="big.csv")

    assert_nothing_stored(ctx)


def test_an_upload_to_an_unknown_case_is_refused_before_reading(ctx: ServiceContext) -> None:
    class Unread(io.BytesIO):
        def read(self, *args: object) -> bytes:
            raise AssertionError("the upload was read although the case does not exist")

    with pytest.raises(NotFound):
        datasets.upload_dataset(ctx, case_id=404, source=Unread(), file_name="x.csv")


def test_column_names_with_markup_are_kept_verbatim(ctx: ServiceContext, case_id: int) -> None:
    content = 'x,<b onmouseover="alert(1)">bold</b>\n1,2\n3,4\n'.encode()
    detail = datasets.upload_dataset(ctx, case_id=case_id, source=io.BytesIO(content), file_name="m.csv")
    assert [variable["name"] for variable in detail.profile["variables"]] == [
        "x",
        '<b onmouseover="alert(1)">bold</b>',
    ]


def test_a_stored_version_reads_back_as_the_same_table(ctx: ServiceContext, case_id: int) -> None:
    content = simulated_csv()
    dataset_id = upload(ctx, case_id, content)
    with ctx.reading() as session:
        frame = datasets.load_frame(ctx, session.get_one(Dataset, dataset_id))
    expected = pd.read_csv(io.BytesIO(content))
    np.testing.assert_allclose(frame.to_numpy(dtype=float), expected.to_numpy(dtype=float))


def assert_nothing_stored(ctx: ServiceContext) -> None:
    with ctx.reading() as session:
        assert session.scalar(select(func.count()).select_from(Dataset)) == 0
    assert [path for path in ctx.files.root.rglob("*") if path.is_file()] == []


@pytest.mark.parametrize(("size", "words"), [(0, "0 bytes"), (1023, "1023 bytes"), (1536, "1.5 KB"), (512 * 1024**2, "512 MB")])
def test_sizes_are_written_in_words(size: int, words: str) -> None:
    assert datasets.format_bytes(size) == words
