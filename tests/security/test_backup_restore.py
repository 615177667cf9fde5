"""Backup and restore: a consistent copy taken while the server runs comes back byte for byte; damage is refused."""

from __future__ import annotations

import json
import sqlite3
from contextlib import closing
from pathlib import Path

import pytest

from app.cli.main import main
from app.services import cases, checklists, demo
from app.services.backup import BackupError, backup, restore
from app.services.context import ServiceContext
from app.settings import DATABASE_FILE, Settings
from tests.security.conftest import security_settings


def table_rows(database: Path, query: str) -> list[tuple[object, ...]]:
    with closing(sqlite3.connect(database)) as connection:
        return connection.execute(query).fetchall()


def stored_files(data_dir: Path) -> dict[str, bytes]:
    return {path.name: path.read_bytes() for path in (data_dir / "files").glob("??/*")}


@pytest.fixture(scope="module")
def running(tmp_path_factory: pytest.TempPathFactory) -> tuple[ServiceContext, Path]:
    """A data directory with the demo reviewed and a note, its context left open (the server keeps running)."""
    data_dir = tmp_path_factory.mktemp("live") / "data"
    ctx = ServiceContext.open(security_settings(data_dir, refit_wait_seconds=60.0))
    loaded = demo.load_demo(ctx)
    refit = loaded[0].refits[0]
    item = checklists.get_checklist(ctx, case_id=refit.case_id, refit_id=refit.id).sections[0].items[0]["id"]
    checklists.save_judgement(
        ctx, case_id=refit.case_id, refit_id=refit.id, item_id=item, standing="concern", note="Kept across backups."
    )
    yield ctx, data_dir
    ctx.close()


def test_a_round_trip_brings_back_byte_identical_findings_files_and_notes(
    running: tuple[ServiceContext, Path], tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    _, data_dir = running
    target, restored = tmp_path / "backup", tmp_path / "restored"

    assert main(["backup", str(target), "--data-dir", str(data_dir)]) == 0
    assert "Backed up 4 cases and 4 stored files" in capsys.readouterr().out
    assert main(["restore", str(target), "--data-dir", str(restored)]) == 0
    assert f"into {restored}" in capsys.readouterr().out

    for query in (
        "SELECT id, CAST(findings AS BLOB), CAST(variants AS BLOB) FROM refits ORDER BY id",
        "SELECT refit_id, item_id, standing, note FROM judgements ORDER BY id",
        "SELECT id, title, revision FROM cases ORDER BY id",
    ):
        original = table_rows(data_dir / DATABASE_FILE, query)
        assert original and table_rows(restored / DATABASE_FILE, query) == original
    assert stored_files(restored) == stored_files(data_dir)


def test_the_restored_directory_serves_again(running: tuple[ServiceContext, Path], tmp_path: Path) -> None:
    backup(Settings(data_dir=running[1]), target=tmp_path / "backup")
    restore(Settings(data_dir=tmp_path / "restored"), source=tmp_path / "backup")
    ctx = ServiceContext.open(Settings(data_dir=tmp_path / "restored"))
    try:
        overview = cases.list_cases(ctx)
        assert overview.total_cases == 4 and all(row.verdict for row in overview.cases)
    finally:
        ctx.close()


def test_restore_refuses_a_data_directory_that_holds_data_unless_told_to_move_it_aside(
    running: tuple[ServiceContext, Path], tmp_path: Path
) -> None:
    backup(Settings(data_dir=running[1]), target=tmp_path / "backup")
    occupied = tmp_path / "occupied"
    occupied.mkdir()
    (occupied / "something.txt").write_text("earlier data")

    with pytest.raises(BackupError, match="already holds data"):
        restore(Settings(data_dir=occupied), source=tmp_path / "backup")
    report = restore(Settings(data_dir=occupied), source=tmp_path / "backup", replace=True)

    assert report.moved_aside is not None
    assert (Path(report.moved_aside) / "something.txt").read_text() == "earlier data"
    assert (occupied / DATABASE_FILE).is_file()


@pytest.mark.parametrize("damage", ["a stored file", "the database", "the manifest"])
def test_a_damaged_backup_is_refused_and_nothing_is_restored(
    running: tuple[ServiceContext, Path], tmp_path: Path, damage: str
) -> None:
    target = tmp_path / "backup"
    backup(Settings(data_dir=running[1]), target=target)
    if damage == "a stored file":
        victim = next((target / "files").glob("??/*"))
        victim.write_bytes(victim.read_bytes()[:-1] + b"#")
    elif damage == "the database":
        database = bytearray((target / DATABASE_FILE).read_bytes())
        database[4096:4160] = bytes(byte ^ 0xFF for byte in database[4096:4160])
        (target / DATABASE_FILE).write_bytes(database)
    else:
        manifest = json.loads((target / "manifest.json").read_text())
        manifest["format"] = 99
        (target / "manifest.json").write_text(json.dumps(manifest))

    with pytest.raises(BackupError):
        restore(Settings(data_dir=tmp_path / "restored"), source=target)
    assert not (tmp_path / "restored").exists()
    assert [path.name for path in tmp_path.iterdir()] == ["backup"]


def test_a_backup_never_overwrites_and_leaves_no_half_written_folder(running: tuple[ServiceContext, Path], tmp_path: Path) -> None:
    target = tmp_path / "backup"
    target.mkdir()
    with pytest.raises(BackupError, match="already exists"):
        backup(Settings(data_dir=running[1]), target=target)
    assert [path.name for path in tmp_path.iterdir()] == ["backup"]


def test_a_server_database_is_not_backed_up_by_copying(tmp_path: Path) -> None:
    settings = Settings(data_dir=tmp_path, database_url="postgresql+psycopg://server/secondstage")
    with pytest.raises(BackupError, match="its own tools"):
        backup(settings, target=tmp_path / "backup")
