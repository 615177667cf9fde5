"""``secondstage backup TARGET`` and ``secondstage restore SOURCE``: a consistent copy of a data directory, and back.

The backup may run while the server runs (SQLite's online backup API); stop
the server before restoring.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from app.settings import Settings


def register(subparsers: argparse._SubParsersAction) -> None:
    """Add the ``backup`` and ``restore`` commands."""
    backup = subparsers.add_parser(
        "backup",
        help="write a consistent copy of the database and the stored files",
        description=(
            "Write a consistent copy of the server's database (SQLite's online backup, safe while the server runs) "
            "and of every stored file it refers to, each checked against its SHA-256, into a new folder. "
            "The copy holds confidential manuscript data: keep it where the server's data may be kept."
        ),
    )
    backup.add_argument("target", type=Path, metavar="TARGET", help="a new folder for the backup")
    _data_dir_option(backup)
    backup.set_defaults(handler=run_backup)

    restore = subparsers.add_parser(
        "restore",
        help="bring a backup back as the server's data directory (stop the server first)",
        description=(
            "Check a backup (manifest, every SHA-256, SQLite's integrity check) and bring it back as the data "
            "directory. Stop the server first; it upgrades the schema when it starts. Everyone signs in again."
        ),
    )
    restore.add_argument("source", type=Path, metavar="SOURCE", help="a folder written by secondstage backup")
    _data_dir_option(restore)
    restore.add_argument(
        "--replace",
        action="store_true",
        help="the data directory holds data: move it aside (to a sibling folder) instead of refusing",
    )
    restore.set_defaults(handler=run_restore)


def run_backup(arguments: argparse.Namespace) -> int:
    from app.services.backup import backup

    report = backup(_settings(arguments), target=arguments.target)
    print(
        f"Backed up {report.cases} case{'s' if report.cases != 1 else ''} and {report.files} stored "
        f"file{'s' if report.files != 1 else ''} ({report.total_bytes:,} bytes, schema {report.schema_revision}) "
        f"into {report.folder}"
    )
    return 0


def run_restore(arguments: argparse.Namespace) -> int:
    from app.services.backup import restore

    report = restore(_settings(arguments), source=arguments.source, replace=arguments.replace)
    print(
        f"Restored {report.cases} case{'s' if report.cases != 1 else ''} and {report.files} stored "
        f"file{'s' if report.files != 1 else ''} into {report.data_dir} (schema {report.schema_revision})."
    )
    if report.moved_aside:
        print(f"The previous data is in {report.moved_aside}; delete it once the restored server works.")
    return 0


def _data_dir_option(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--data-dir", type=Path, metavar="DIR", help="the server's data directory (default: ./secondstage-data)"
    )


def _settings(arguments: argparse.Namespace) -> Settings:
    return Settings(data_dir=arguments.data_dir) if arguments.data_dir is not None else Settings()
