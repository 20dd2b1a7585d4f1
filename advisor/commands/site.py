"""``advisor site new --feed FILE --out SITE.yaml``: a commented site file drafted from a feed.

The feed's layout is guessed (:mod:`advisor.io.feedguess`); every guess is written with its
reason and everything else is a TODO, which ``rules lint`` and ``check`` refuse until it is filled.
An existing file is never overwritten.
"""

from __future__ import annotations

import argparse
import os
from pathlib import Path

from advisor.commands import session
from advisor.errors import UsageError


def add_parser(sub, name: str, help: str) -> None:
    """Register ``advisor site`` and its action."""
    site = sub.add_parser(name, help=help, description="Start a site file for a new station.")
    actions = site.add_subparsers(dest="action", metavar="ACTION")
    new = actions.add_parser(
        "new",
        help="draft a commented site file from the station's feed",
        description="Guess how FEED is laid out and write a commented site file with "
        "those guesses and a TODO for everything else (position, zone, ...). "
        "The advisor refuses the file until every TODO is filled in.",
    )
    new.add_argument("--feed", required=True, metavar="FEED", help="the logger's file, as exported")
    new.add_argument("--out", required=True, metavar="SITE.yaml", help="the site file to write (must not exist)")
    new.set_defaults(func=cmd_new)
    site.set_defaults(func=lambda a: session.missing_action(site))


def _write_new(path: Path, text: str) -> None:
    """Write ``text`` to ``path`` only if no file is there, all at once (never a half file)."""
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise UsageError(f"folder {folder} does not exist", field="--out", hint="create it first")
    tmp = folder / f".{path.name}.{os.getpid()}.tmp"
    try:
        tmp.write_text(text, encoding="utf-8")
        os.link(tmp, path)  # fails if the file exists: nothing is overwritten
    except FileExistsError:
        raise UsageError(
            f"{path} exists; nothing written", field="--out", hint="choose another name, or remove the file first"
        ) from None
    except OSError as exc:
        raise UsageError(f"cannot write {path}: {exc.strerror}", field="--out") from None
    finally:
        tmp.unlink(missing_ok=True)


def cmd_new(args: argparse.Namespace) -> int:
    from advisor.io.feedguess import guess_layout
    from advisor.io.fileio import check_path
    from advisor.views.sitefile import draft_site_file

    out = check_path(args.out, UsageError, "--out")
    feed = Path(args.feed)
    if out.exists() or out.is_symlink():
        raise UsageError(
            f"{out} exists; nothing written", field="--out", hint="choose another name, or remove the file first"
        )
    guess = guess_layout(feed)
    shown = os.path.relpath(feed.resolve(), (out.parent if str(out.parent) else Path(".")).resolve())
    if shown.startswith(os.pardir + os.sep + os.pardir + os.sep + os.pardir):
        shown = str(feed.resolve())  # far away: the absolute path reads better
    _write_new(out, draft_site_file(guess, shown, feed.name))
    todos = [
        "site.name",
        "site.latitude_deg",
        "site.longitude_deg",
        "site.elevation_m",
        "site.time_zone",
        "site.dish_diameter_m",
        *(f"feed.{k}" if k.startswith(("time", "gust")) else f"feed.columns.{k}" for k in guess.todos),
        "calibrators",
    ]
    import textwrap

    print(f"wrote {out}: {len(guess.columns)} columns mapped, {len(todos)} TODOs to fill in:")
    print(textwrap.fill(", ".join(todos), 80, initial_indent="  ", subsequent_indent="  ", break_on_hyphens=False))
    print(f"then: advisor feed inspect {args.feed} --site {out}")
    return 0
