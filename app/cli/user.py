"""``secondstage user add|remove|reset-password|list``: manage the accounts of a server from its machine.

Passwords are never given on the command line (other users of the machine can
read it): they are asked on the terminal, or read from one line of standard
input with ``--password-stdin``.
"""

from __future__ import annotations

import argparse
import getpass
import sys
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from app.auth.actors import Actor
from app.auth.roles import Role
from app.errors import SecondStageError
from app.services.context import ServiceContext
from app.settings import Settings

COMMAND_LINE = Actor.system("command line")


def register(subparsers: argparse._SubParsersAction) -> None:
    """Add the ``user`` command group."""
    parser = subparsers.add_parser(
        "user",
        help="add, remove, list accounts or reset a password",
        description="Manage the accounts of a SecondStage server (run on the server's machine).",
    )
    actions = parser.add_subparsers(dest="user_command", required=True, metavar="ACTION")

    add = actions.add_parser("add", help="add an account", description="Add an account; the password is asked for.")
    add.add_argument("name", help="the name to sign in with (letters, digits and . _ - @)")
    add.add_argument(
        "--role",
        required=True,
        choices=[str(role) for role in Role],
        help="steward (accounts, every case), coordinator (every case, assigns), referee (assigned cases), "
        "reader (shared cases, read-only)",
    )
    add.add_argument("--full-name", default="", help="the person's full name, shown beside the sign-in name")
    _password_options(add)
    add.set_defaults(handler=run_add)

    remove = actions.add_parser(
        "remove", help="remove an account", description="Remove an account with its sign-ins, API tokens and case access."
    )
    remove.add_argument("name")
    _data_dir_option(remove)
    remove.set_defaults(handler=run_remove)

    reset = actions.add_parser(
        "reset-password",
        help="set a new password for an account",
        description="Set a new password for an account; its sign-ins end at once.",
    )
    reset.add_argument("name")
    _password_options(reset)
    reset.set_defaults(handler=run_reset_password)

    listing = actions.add_parser("list", help="list the accounts", description="List the accounts of the server.")
    _data_dir_option(listing)
    listing.set_defaults(handler=run_list)


def run_add(arguments: argparse.Namespace) -> int:
    from app.services import users

    password = _new_password(arguments)
    with _context(arguments) as ctx:
        added = users.add_user(
            ctx, name=arguments.name, role=arguments.role, password=password, full_name=arguments.full_name
        )
    print(f"Added {added.name} ({added.role}).")
    return 0


def run_remove(arguments: argparse.Namespace) -> int:
    from app.services import users

    with _context(arguments) as ctx:
        removed = users.remove_user(ctx, user_id=users.user_id_of(ctx, name=arguments.name))
    print(f"Removed {removed.name} with its sign-ins, API tokens and case access.")
    return 0


def run_reset_password(arguments: argparse.Namespace) -> int:
    from app.services import users

    password = _new_password(arguments)
    with _context(arguments) as ctx:
        changed = users.reset_password(ctx, user_id=users.user_id_of(ctx, name=arguments.name), password=password)
    print(f"New password set for {changed.name}; their sign-ins have ended.")
    return 0


def run_list(arguments: argparse.Namespace) -> int:
    from app.services import users

    with _context(arguments) as ctx:
        listing = users.list_users(ctx)
    if not listing.users:
        print("No accounts yet. Add the first steward with: secondstage user add NAME --role steward")
        return 0
    width = max(len(user.name) for user in listing.users)
    for user in listing.users:
        full = f"  {user.full_name}" if user.full_name else ""
        print(
            f"{user.name:<{width}}  {user.role:<11}  signed in: {user.open_sessions}  tokens: {user.active_tokens}"
            f"  since {user.created_at:%Y-%m-%d}{full}"
        )
    return 0


def _password_options(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--password-stdin", action="store_true", help="read the password from one line of standard input instead of asking"
    )
    _data_dir_option(parser)


def _data_dir_option(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--data-dir", type=Path, metavar="DIR", help="the server's data directory (default: ./secondstage-data)"
    )


def _new_password(arguments: argparse.Namespace) -> str:
    if arguments.password_stdin:
        return sys.stdin.readline().rstrip("\r\n")
    if not sys.stdin.isatty():
        raise SecondStageError("there is no terminal to ask for the password on; pipe it in with --password-stdin")
    password = getpass.getpass("Password: ")
    if getpass.getpass("The same password again: ") != password:
        raise SecondStageError("the two passwords differ; nothing was changed")
    return password


@contextmanager
def _context(arguments: argparse.Namespace) -> Iterator[ServiceContext]:
    """The server's service context, acting as the command line (which may manage accounts)."""
    settings = Settings(data_dir=arguments.data_dir) if arguments.data_dir is not None else Settings()
    ctx = ServiceContext.open(settings)
    try:
        yield ctx.acting_as(COMMAND_LINE)
    finally:
        ctx.close()
