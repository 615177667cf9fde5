"""``secondstage db upgrade``: create or upgrade the database schema of a data directory."""

from __future__ import annotations

import argparse
from pathlib import Path

from app.settings import Settings


def register(subparsers: argparse._SubParsersAction) -> None:
    """Add the ``db`` command group."""
    parser = subparsers.add_parser("db", help="manage the server's database", description="Manage the server's database.")
    commands = parser.add_subparsers(dest="db_command", required=True, metavar="ACTION")
    upgrade = commands.add_parser(
        "upgrade",
        help="create the database or upgrade it to the newest schema",
        description=(
            "Create the database or upgrade it to the newest schema. The server also does this when it starts. "
            "The database URL comes from SECONDSTAGE_DATABASE_URL, or defaults to SQLite in the data directory."
        ),
    )
    upgrade.add_argument(
        "--data-dir", type=Path, metavar="DIR", help="the server's data directory (default: ./secondstage-data)"
    )
    upgrade.set_defaults(handler=run_upgrade)


def run_upgrade(arguments: argparse.Namespace) -> int:
    """Upgrade and say from which revision to which."""
    from app.services.maintenance import upgrade_database

    settings = Settings(data_dir=arguments.data_dir) if arguments.data_dir is not None else Settings()
    result = upgrade_database(settings)
    if result.before == result.after:
        print(f"The database is up to date (schema {result.after}).")
    else:
        print(f"Upgraded the database from schema {result.before or 'none'} to {result.after}.")
    return 0
