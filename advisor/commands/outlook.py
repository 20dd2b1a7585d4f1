"""``advisor outlook``: the call at every forecast step, the windows for each method, the next one.

    advisor outlook [--feed FEED] [--forecast FILE] --freq 86 [--from T] [--hours 24]
                    [--min-duration-min N] [--json | --csv] [--svg FILE]  (+ every option of check)

The shell around :mod:`advisor.evaluation.outlook`: loads the inputs exactly as ``check`` does, adds the
forecast file (``--forecast``, or the site's ``forecast.path`` when the site's own feed is
read) and the forecast rows' issue times, then prints one of the views.  Exit status 0 when
an outlook was printed, 2 on bad input.
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from advisor.commands import options, session
from advisor.commands.helpformat import HelpFormatter
from advisor.errors import UsageError
from advisor.io.fileio import atomic_write_text

MAX_HOURS = 31 * 24.0


def add_parser(sub, name: str, help: str) -> argparse.ArgumentParser:
    """Register ``outlook`` on the ``advisor`` subparsers."""
    p = sub.add_parser(
        name,
        help=help,
        description="Evaluate every step of a forecast with the same rules as check; print a timeline "
        "strip (one letter per step: S scan, A astronomical, P postpone, U undetermined, "
        "? gap), the windows for each method and the next one.",
        epilog="Exit status: 0 outlook printed; 2 bad input or usage. Advisory only - not a safety system.",
        formatter_class=HelpFormatter,
    )
    session.add_evaluation_options(p)
    p.add_argument(
        "--forecast",
        metavar="FILE",
        help="forecast file read beside the feed, in the feed's format "
        "(default: the site's forecast.path when the site's own feed is read)",
    )
    p.add_argument(
        "--from",
        dest="from_",
        metavar="TIME",
        help=session.time_help("first step (default: --at, else now; the demo feed's last sample for the demo)"),
    )
    p.add_argument("--hours", default="24", metavar="H", help="how far to look ahead [h] (default 24)")
    p.add_argument(
        "--min-duration-min",
        metavar="N",
        help="offer only windows at least N minutes long "
        "(never shorter than the method's duration + the site's settling time)",
    )
    out = p.add_mutually_exclusive_group()
    out.add_argument("--json", action="store_true", help="print one JSON object: steps, windows, next windows")
    out.add_argument(
        "--csv", action="store_true", help="print CSV, one row per step (time in ISO 8601 UTC, verdict, ...)"
    )
    p.add_argument("--svg", metavar="FILE", help="also save the timeline picture as SVG")
    p.set_defaults(func=cmd_outlook)
    return p


def _positive_number(text: str | None, option: str, lo: float, hi: float, default: float | None) -> float | None:
    if text is None:
        return default
    try:
        value = float(text)
    except ValueError:
        raise UsageError(
            f"{text!r} is not a number", field=option, hint=f"give a number between {lo:g} and {hi:g}"
        ) from None
    if not (lo <= value <= hi) or value != value:
        raise UsageError(f"{value:g} is outside {lo:g}..{hi:g}", field=option)
    return value


def cmd_outlook(args: argparse.Namespace) -> int:
    from advisor.evaluation.outlook import combine_frames, compute_outlook
    from advisor.io.feed import read_feed
    from advisor.views.outlook_data import outlook_csv_text, outlook_json
    from advisor.views.outlook_plain import render_plain_outlook
    from advisor.views.outlook_rich import outlook_renderable, outlook_svg

    hours = _positive_number(args.hours, "--hours", 0.1, MAX_HOURS, 24.0) or 24.0  # never None: has a default
    min_dur = _positive_number(args.min_duration_min, "--min-duration-min", 0.0, 7 * 1440.0, None)
    svg = options.svg_target(args.svg, "outlook.svg")
    if args.from_ is not None and args.at is not None:
        raise UsageError(
            "give --from or --at, not both", field="--from", hint="--from is the first step of the outlook"
        )
    from_option = session.parse_time(args.from_, "--from")
    request = session.request_from(args)
    start_option = from_option or request.at

    inputs = session.load_inputs(request, read="whole")
    site = inputs.site
    feed = inputs.require_feed()
    frame = feed.frame  # issue times were read with the feed
    # The site's forecast file goes with the site's own feed; --forecast names one explicitly.
    forecast_path = (
        Path(args.forecast) if args.forecast else (site.forecast.path if request.feed_path is None else None)
    )
    sources = [feed.source]
    if forecast_path is not None:
        fc = read_feed(
            forecast_path,
            session.feed_layout(site, named_on_command_line=args.forecast is not None),
            issue_time_column=site.forecast.issue_time_column,
        )
        frame = combine_frames(frame, fc.frame)
        sources.append(fc.source)
    start = session.evaluation_time(inputs, start_option, frame)

    outlook = compute_outlook(
        frame,
        start,
        hours,
        site,
        inputs.registry,
        inputs.rules,
        inputs.freq_ghz,
        odds=inputs.odds,
        min_duration_min=min_dur,
        source=" + ".join(sources),
    )
    quality = feed.quality.as_dict()
    quality["source"] = feed.source
    ctx = session.make_context(site, " + ".join(sources), inputs.is_demo, quality, notes=inputs.notes)

    svg_text = outlook_svg(outlook, ctx) if svg is not None else None
    if args.json:
        print(json.dumps(outlook_json(outlook, ctx), indent=2, allow_nan=False))
    elif args.csv:
        sys.stdout.write(outlook_csv_text(outlook))
    elif session.want_color(sys.stdout):
        from rich.console import Console

        console = Console()
        console.print(outlook_renderable(outlook, ctx, console.width))
    else:
        width = options.text_width()
        sys.stdout.write(render_plain_outlook(outlook, ctx, width))
    if svg is not None and svg_text is not None:
        atomic_write_text(svg, svg_text)
        print(f"advisor: saved the outlook picture to {svg}", file=sys.stderr)
    return 0
