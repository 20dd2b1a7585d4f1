"""``advisor feed inspect FILE [--site SITE]``: what the advisor makes of a feed file.

With ``--site`` the file is read exactly as a call would read it (the site's layout and
position: the time-zone check runs); without, the layout is guessed from the file and the
report says what was guessed and what a site file must still say (``advisor site new``).
"""

from __future__ import annotations

import argparse
import sys
from dataclasses import replace
from pathlib import Path

from advisor.commands import session
from advisor.errors import FeedError


def add_parser(sub, name: str, help: str) -> None:
    """Register ``advisor feed`` and its action."""
    feed = sub.add_parser(name, help=help, description="Look at a weather feed file the way the advisor reads it.")
    actions = feed.add_subparsers(dest="action", metavar="ACTION")
    inspect = actions.add_parser(
        "inspect",
        help="columns and units recognised, cadence, span, gaps, missing codes, implausible values, time-zone sanity",
        description="Read FILE and report what the advisor makes of it: the columns and units it "
        "recognises, cadence, span, gaps, missing-value codes and implausible values per "
        "column, and whether the irradiance agrees with the computed sun (needs --site). "
        "Without --site the layout is guessed from the file.",
    )
    inspect.add_argument("file", metavar="FILE", help="the logger's CSV or JSON Lines file, as exported")
    inspect.add_argument("--site", metavar="SITE.yaml", help="read FILE with this site's feed layout and position")
    inspect.set_defaults(func=cmd_inspect)
    feed.set_defaults(func=lambda a: session.missing_action(feed))


def cmd_inspect(args: argparse.Namespace) -> int:
    from advisor.evaluation.feedcheck import inspect_feed
    from advisor.io.feed import check_whole_read, read_feed
    from advisor.io.feedguess import guess_layout
    from advisor.io.site import load_site
    from advisor.views.feedreport import render_feed_report

    path = Path(args.file)
    check_whole_read(path)
    guess = None
    lat: float | None
    lon: float | None
    if args.site:
        site = load_site(args.site)
        layout = replace(site.feed, path=path)
        how = f"the site file {args.site}"
        lat, lon = site.latitude_deg, site.longitude_deg
    else:
        guess = guess_layout(path)
        layout = guess.layout
        how = "a layout guessed from the file (no --site)"
        if not guess.zone_known:
            how += "; times read as UTC until a zone is given"
        lat = lon = None
    try:
        feed = read_feed(path, layout)
    except FeedError:
        if guess is not None:
            from advisor.views.feedreport import render_guess

            session.emit(lambda: sys.stdout.write(render_guess(guess)))
        raise
    report = inspect_feed(feed, layout, lat, lon)
    session.emit(lambda: sys.stdout.write(render_feed_report(report, how, guess)))
    return 0
