"""The ``advisor`` command line: the top-level parser and :func:`main` (errors → exit status).

Commands are declared in :data:`COMMANDS` (name, owning module, one-line help).  Only the
module of the command being run is imported and only its parser is built; the others appear in
``--help`` through their one-line help.  Each command module has
``add_parser(sub, name, help)`` (registering the command, with ``func`` as its default) and
imports :mod:`advisor.commands.session` beneath it, never another command.

Every :class:`advisor.errors.AdvisorError` becomes one line on stderr and exit status 2
(12 for insufficient data); anything else is an internal error, exit 1.
"""

from __future__ import annotations

import argparse
import importlib
import os
import sys
from typing import NamedTuple

from advisor import __version__
from advisor.commands.helpformat import EXIT_HELP, HelpFormatter
from advisor.errors import AdvisorError, InsufficientData, internal_error_text


class Command(NamedTuple):
    name: str
    module: str  # under advisor.commands
    help: str


#: Every command, in the order ``--help`` lists them.
COMMANDS = (
    Command("check", "check", "the call for one instant (default: now)"),
    Command("reference", "reference", "the reference-scan registry"),
    Command("attempt", "attempt", "record and list the site's attempts (outcome and the weather at the time)"),
    Command("rules", "rules", "lint, show and explain the rule set"),
    Command("replay", "replay", "replay an archive: hours per verdict, scores against attempts, rule-set changes"),
    Command("tick", "tick", "one cron/timer run: keep the advisory in a state dir, speak only on change"),
    Command("train", "model", "fit the site model on the site's past attempts"),
    Command("model", "model", "inspect a site model file"),
    Command("outlook", "outlook", "the call at every forecast step and the next window for each method"),
    Command("plan", "plan", "plan a session: which correction when, when to re-correct, against the simple choices"),
    Command("demo", "demo", "copy the invented demo site, feed, registry and rules to a folder to edit"),
    Command("feed", "feed", "inspect a weather feed file the way the advisor reads it"),
    Command("site", "site", "draft a commented site file for a new station from its feed"),
)


class _Parser(argparse.ArgumentParser):
    """argparse with one-line errors in the advisor's own format (exit 2)."""

    def error(self, message: str):  # argparse API
        self.exit(2, f"advisor: error: {self.prog}: {message} (see '{self.prog} --help')\n")


def _command_named(argv: list[str]) -> str | None:
    """The command word of ``argv`` (the first argument not starting with '-'), if any."""
    return next((a for a in argv if not a.startswith("-")), None)


def build_parser(only: str | None = None) -> argparse.ArgumentParser:
    """The ``advisor`` parser; with ``only``, just that command's parser is built in full."""
    parser = _Parser(
        prog="advisor",
        description="Before a high-frequency session: scan the reflector now, use the astronomical "
        "method, or postpone - with reasons and numbers.",
        epilog=EXIT_HELP,
        formatter_class=HelpFormatter,
    )
    parser.add_argument("--version", action="version", version=f"advisor {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for command in COMMANDS:
        if only is None or command.name == only:
            module = importlib.import_module(f"advisor.commands.{command.module}")
            module.add_parser(sub, command.name, command.help)
        else:
            sub.add_parser(command.name, help=command.help)  # listed in --help; never run
    return parser


def main(argv: list[str] | None = None) -> int:
    argv = list(sys.argv[1:] if argv is None else argv)
    named = _command_named(argv)
    known = {c.name for c in COMMANDS}
    parser = build_parser(named if named in known else "")
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return 2
    try:
        return args.func(args)
    except InsufficientData as exc:
        print(f"advisor: {exc.one_line()}", file=sys.stderr)
        return 12
    except AdvisorError as exc:
        lines = exc.lines() if hasattr(exc, "lines") else [exc.one_line()]  # a rejected rule set: every error
        for line in lines:
            print(f"advisor: error: {line}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("advisor: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 0
    except Exception as exc:  # pragma: no cover - the last line of defence
        if os.environ.get("ADVISOR_DEBUG"):
            raise
        print(
            f"advisor: internal error: {internal_error_text(exc)} (set ADVISOR_DEBUG=1 for a traceback)",
            file=sys.stderr,
        )
        return 1


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
