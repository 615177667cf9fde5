"""The content-addressed file store: SHA-256 names, atomic writes, nothing left behind on failure."""

from __future__ import annotations

import hashlib
import io
from pathlib import Path

import pytest

from app.store.files import FileExceedsLimit, FileStore


def test_a_kept_file_lives_under_its_sha256(tmp_path: Path) -> None:
    store = FileStore(tmp_path)
    content = b"outcome,focal\n1,2\n" * 1000

    with store.receive(io.BytesIO(content), limit=1 << 20, suffix=".csv") as incoming:
        path = store.keep(incoming)

    digest = hashlib.sha256(content).hexdigest()
    assert incoming.sha256 == digest
    assert incoming.size_bytes == len(content)
    assert path == tmp_path / digest[:2] / digest
    assert path.read_bytes() == content
    assert store.contains(digest)


def test_the_original_name_never_enters_the_path(tmp_path: Path) -> None:
    store = FileStore(tmp_path)
    with store.receive(io.BytesIO(b"a,b\n1,2\n"), limit=100, suffix=".csv") as incoming:
        path = store.keep(incoming)
    assert path.name == incoming.sha256
    assert "csv" not in path.name


def test_a_file_that_is_not_kept_disappears(tmp_path: Path) -> None:
    store = FileStore(tmp_path)
    with store.receive(io.BytesIO(b"x,y\n"), limit=100) as incoming:
        assert incoming.path.exists()
    assert not incoming.path.exists()
    assert list(store.incoming_dir.iterdir()) == []
    assert not store.contains(incoming.sha256)


def test_an_oversized_file_is_refused_and_leaves_nothing(tmp_path: Path) -> None:
    store = FileStore(tmp_path)
    with pytest.raises(FileExceedsLimit), store.receive(io.BytesIO(b"z" * 5000), limit=4096):
        pass
    assert list(store.incoming_dir.iterdir()) == []
    assert [path for path in tmp_path.iterdir() if path != store.incoming_dir] == []


def test_an_error_inside_the_block_leaves_nothing(tmp_path: Path) -> None:
    store = FileStore(tmp_path)
    with pytest.raises(RuntimeError), store.receive(io.BytesIO(b"a,b\n"), limit=100):
        raise RuntimeError("reading the table failed")
    assert list(store.incoming_dir.iterdir()) == []


def test_the_same_bytes_are_stored_once(tmp_path: Path) -> None:
    store = FileStore(tmp_path)
    paths = []
    for _ in range(2):
        with store.receive(io.BytesIO(b"same,bytes\n"), limit=100) as incoming:
            paths.append(store.keep(incoming))
    assert paths[0] == paths[1]
    assert len(list(paths[0].parent.iterdir())) == 1


def test_delete_removes_the_file(tmp_path: Path) -> None:
    store = FileStore(tmp_path)
    with store.receive(io.BytesIO(b"gone\n"), limit=100) as incoming:
        store.keep(incoming)
    store.delete(incoming.sha256)
    assert not store.contains(incoming.sha256)


@pytest.mark.parametrize("bad", ["../../etc/passwd", "abc", "G" * 64])
def test_only_hex_digests_name_files(tmp_path: Path, bad: str) -> None:
    with pytest.raises(ValueError):
        FileStore(tmp_path).path_for(bad)
