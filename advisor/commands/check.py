"""``advisor check``: the call for one instant, as a panel, plain text or JSON; exit status = verdict."""

from __future__ import annotations

import argparse
import json
import sys

from advisor.commands import session
from advisor.commands.helpformat import EXIT_HELP, HelpFormatter


def add_parser(sub, name: str, help: str) -> None:
    """Register ``advisor check``."""
    p = sub.add_parser(
        name,
        help=help,
        description="Evaluate the feed at one instant and print the call.",
        epilog=EXIT_HELP,
        formatter_class=HelpFormatter,
    )
    session.add_evaluation_options(p)
    session.add_session_option(p)
    p.add_argument("--json", action="store_true", help="print one JSON object (stable schema, see README)")
    p.add_argument(
        "--details",
        action="store_true",
        help="every reason in full with its rule id, every key condition (default: a compact screen that fits 80x24)",
    )
    p.set_defaults(func=cmd_check)


def cmd_check(args: argparse.Namespace) -> int:
    from advisor.views.jsondoc import to_json_dict
    from advisor.views.panel import render_panel
    from advisor.views.plain import render_plain

    result = session.run_check(session.request_from(args))

    details = args.details

    def write() -> None:
        if args.json:
            print(json.dumps(to_json_dict(result.call, result.ctx, result.status), indent=2, allow_nan=False))
        elif session.want_color(sys.stdout):
            from rich.console import Console

            console = Console()
            console.print(render_panel(result.call, result.ctx, console.width, console.height, details, result.status))
        else:
            sys.stdout.write(render_plain(result.call, result.ctx, details=details, status=result.status))

    session.emit(write)  # the exit status is the call's whatever happens to stdout
    return result.status
