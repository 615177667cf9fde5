"""Entry point of the ``secondstage`` console script.

Each subcommand module exposes ``register(subparsers)``, which adds its
parser and sets ``handler`` (a function taking the parsed arguments and
returning the exit code). Errors meant for the user are printed as one line
and give a non-zero exit; no traceback reaches the terminal for bad input.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence

from app.cli import backup, check, db, purge, serve, user
from app.errors import SecondStageError

COMMAND_MODULES = (check, serve, db, user, backup, purge)


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="secondstage",
        description="Re-check a manuscript's causal claim: refit it with naive and endogeneity-robust estimators.",
    )
    subparsers = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    for module in COMMAND_MODULES:
        module.register(subparsers)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    parser = build_parser()
    arguments = parser.parse_args(argv)
    try:
        return int(arguments.handler(arguments))
    except SecondStageError as error:
        print(f"secondstage: {error}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        return 130


if __name__ == "__main__":
    sys.exit(main())
