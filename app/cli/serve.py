"""``secondstage serve``: run the web app, optionally with the demo cases loaded first.

A server without any account prints a one-time first-run link: whoever started
it opens the link and chooses the first steward's name and password (there is
no default password).
"""

from __future__ import annotations

import argparse
import ipaddress
import sys
import tempfile
from pathlib import Path

from app.settings import Settings


def register(subparsers: argparse._SubParsersAction) -> None:
    """Add the ``serve`` command."""
    parser = subparsers.add_parser(
        "serve",
        help="run the web app in this process",
        description=(
            "Run SecondStage's web app. All data stay in one data directory on this machine; "
            "pages load nothing from elsewhere."
        ),
    )
    parser.add_argument("--host", default="127.0.0.1", help="address to listen on (default: 127.0.0.1, this machine only)")
    parser.add_argument("--port", type=int, default=8000, help="port to listen on (default: 8000)")
    parser.add_argument(
        "--data-dir",
        type=Path,
        metavar="DIR",
        help="folder for the database and uploaded files (default: ./secondstage-data; with --demo, a new temporary folder)",
    )
    parser.add_argument(
        "--demo",
        action="store_true",
        help="first load the invented demo cases, finished and ready to read, into a fresh data directory",
    )
    parser.set_defaults(handler=run)


def run(arguments: argparse.Namespace) -> int:
    """Load the demo if asked, then serve until interrupted."""
    import uvicorn

    from app.auth.keys import new_secret
    from app.services import demo, sign_in
    from app.services.context import ServiceContext
    from app.web.app import FIRST_RUN_PATH, create_app

    data_dir = arguments.data_dir
    if data_dir is None and arguments.demo:
        data_dir = Path(tempfile.mkdtemp(prefix="secondstage-demo-"))
    settings = Settings(data_dir=data_dir) if data_dir is not None else Settings()
    context = ServiceContext.open(settings)
    try:
        if arguments.demo:
            print(f"Loading the demo cases into {settings.data_dir} ...", file=sys.stderr)
            for case in demo.load_demo(context):
                print(f"  case {case.case.id}: {case.case.title}", file=sys.stderr)
        first_run_key = new_secret() if sign_in.first_run_needed(context) else None
    finally:
        context.close()
    base = f"http://{arguments.host}:{arguments.port}"
    if not _is_loopback(arguments.host):
        print(
            f"Warning: listening on {arguments.host}; anyone who can reach this port can try to sign in. "
            "Put the server behind HTTPS (and set SECONDSTAGE_SECURE_COOKIES=true) unless the network is private.",
            file=sys.stderr,
        )
    if first_run_key is not None:
        print(
            "\nThis server has no account yet. Open this link once to choose the first steward's name and password"
            " (it stops working once the first account exists):\n\n"
            f"    {base}{FIRST_RUN_PATH}{first_run_key}\n",
            file=sys.stderr,
        )
    print(f"SecondStage: open {base}/ (data in {settings.data_dir})", file=sys.stderr)
    uvicorn.run(
        create_app(settings, first_run_key=first_run_key), host=arguments.host, port=arguments.port, log_level="warning"
    )
    return 0


def _is_loopback(host: str) -> bool:
    if host == "localhost":
        return True
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        return False
