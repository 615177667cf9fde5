"""``secondstage user``: add, list, reset a password and remove accounts from the server's machine."""

from __future__ import annotations

import io
from pathlib import Path

import pytest

from app.cli.main import main
from app.services import sign_in
from app.services.context import ServiceContext
from app.settings import Settings


def run(monkeypatch: pytest.MonkeyPatch, arguments: list[str], stdin: str = "") -> int:
    monkeypatch.setattr("sys.stdin", io.StringIO(stdin))
    return main(arguments)


def test_the_first_steward_can_be_added_from_the_command_line(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    data = ["--data-dir", str(tmp_path)]
    assert run(monkeypatch, ["user", "list", *data]) == 0
    assert "No accounts yet" in capsys.readouterr().out

    add = ["user", "add", "--password-stdin", *data]
    assert run(monkeypatch, [*add, "Keeper", "--role", "steward"], "a long password\n") == 0
    assert "Added keeper (steward)." in capsys.readouterr().out
    assert run(monkeypatch, [*add, "rosa", "--role", "referee", "--full-name", "Rosa Lind"], "another password\n") == 0
    assert run(monkeypatch, ["user", "list", *data]) == 0
    listing = capsys.readouterr().out
    assert "keeper" in listing and "rosa" in listing and "Rosa Lind" in listing and "long password" not in listing

    assert run(monkeypatch, ["user", "reset-password", "rosa", "--password-stdin", *data], "a third password\n") == 0
    ctx = ServiceContext.open(Settings(data_dir=tmp_path))
    try:
        assert sign_in.sign_in(ctx, name="rosa", password="a third password", address="cli").user.name == "rosa"
    finally:
        ctx.close()

    assert run(monkeypatch, ["user", "remove", "rosa", *data]) == 0
    assert "Removed rosa" in capsys.readouterr().out


def test_problems_are_one_line_and_change_nothing(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    data = ["--data-dir", str(tmp_path)]
    assert run(monkeypatch, ["user", "add", "anna", "--role", "referee", "--password-stdin", *data], "short\n") == 2
    assert "at least 10 characters" in capsys.readouterr().err
    assert run(monkeypatch, ["user", "remove", "nobody", *data]) == 2
    assert "no account named 'nobody'" in capsys.readouterr().err
    assert run(monkeypatch, ["user", "add", "anna", "--role", "referee", *data]) == 2
    assert "--password-stdin" in capsys.readouterr().err
