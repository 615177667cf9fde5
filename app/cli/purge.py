"""``secondstage purge``: delete the closed cases whose retention period has passed, files included."""

from __future__ import annotations

import argparse
from pathlib import Path

from app.settings import Settings


def register(subparsers: argparse._SubParsersAction) -> None:
    """Add the ``purge`` command."""
    parser = subparsers.add_parser(
        "purge",
        help="delete closed cases older than the retention period",
        description=(
            "Delete every case closed longer ago than the retention period (SECONDSTAGE_RETENTION_DAYS or "
            "--retention-days), with its data files, claims, refits, notes and audit entries; each deletion is "
            "checked afterwards. Run it from cron or a systemd timer."
        ),
    )
    parser.add_argument(
        "--data-dir", type=Path, metavar="DIR", help="the server's data directory (default: ./secondstage-data)"
    )
    parser.add_argument("--retention-days", type=int, metavar="DAYS", help="override the configured retention period")
    parser.add_argument("--dry-run", action="store_true", help="list the cases that would be deleted, delete nothing")
    parser.set_defaults(handler=run)


def run(arguments: argparse.Namespace) -> int:
    from app.services.context import ServiceContext
    from app.services.lifecycle import purge_closed

    options: dict[str, object] = {}
    if arguments.data_dir is not None:
        options["data_dir"] = arguments.data_dir
    if arguments.retention_days is not None:
        options["retention_days"] = arguments.retention_days
    ctx = ServiceContext.open(Settings(**options))
    try:
        report = purge_closed(ctx, dry_run=arguments.dry_run)
    finally:
        ctx.close()
    if report.retention_days is None:
        print("No retention period is configured (SECONDSTAGE_RETENTION_DAYS or --retention-days): nothing purged.")
        return 0
    verb = "Would delete" if report.dry_run else "Deleted"
    count = len(report.cases)
    print(f"{verb} {count} case{'s' if count != 1 else ''} closed more than {report.retention_days} days ago.")
    for case in report.cases:
        print(f"  case {case.id}{f' ({case.reference})' if case.reference else ''}, closed {case.closed_at:%Y-%m-%d}")
    return 0
