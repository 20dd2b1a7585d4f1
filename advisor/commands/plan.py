"""``advisor plan``: a schedule of corrections for a session, and the simple alternatives to it.

    advisor plan [--start T] [--hours H] [--freq F] [--elevation DEG] [--forecast FILE]
                 [--json] [--svg FILE]  (+ --site, --feed, --references, --rules, --model as for check)

The shell around :mod:`advisor.evaluation.plan`: loads the inputs as ``outlook`` does (the
feed, and the site's forecast file when the site's own feed is read, or ``--forecast``),
plans, and prints the plan as text or JSON; ``--svg`` also saves a picture.  Exit status 0 when
a plan was printed (whatever it says), 2 on bad input.
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from advisor.commands import options, session
from advisor.commands.helpformat import HelpFormatter
from advisor.io.fileio import atomic_write_text


def add_parser(sub, name: str, help: str) -> argparse.ArgumentParser:
    """Register ``plan`` on the ``advisor`` subparsers."""
    p = sub.add_parser(
        name,
        help=help,
        description="Plan a session: which correction to make when (laser scan or holography), when to "
        "re-correct as the structure's temperature moves, counting each correction's telescope "
        "time and odds of success, over observations then the site's forecast. Compares the plan "
        "with laser now, holography now, and waiting for a method that is blocked now.",
        epilog="Exit status: 0 plan printed; 2 bad input or usage. Advisory only - not a safety system.",
        formatter_class=HelpFormatter,
    )
    session.add_evaluation_options(p, with_at=False)
    p.add_argument(
        "--start",
        metavar="TIME",
        help=session.time_help("start of the session (default: now; the demo feed's last sample for the demo)"),
    )
    p.add_argument(
        "--hours", metavar="H", help="length of the session [h] (default: the site's thresholds.session_hours)"
    )
    p.add_argument(
        "--forecast",
        metavar="FILE",
        help="forecast file read beside the feed, in the feed's format "
        "(default: the site's forecast.path when the site's own feed is read)",
    )
    p.add_argument("--json", action="store_true", help="print one JSON object: corrections, alternatives, steps")
    p.add_argument("--svg", metavar="FILE", help="also save the plan as an SVG picture")
    p.set_defaults(func=cmd_plan)
    return p


def cmd_plan(args: argparse.Namespace) -> int:
    from advisor.evaluation.plan import MAX_PLAN_HOURS, compute_plan
    from advisor.views.context import Context
    from advisor.views.plan_data import plan_json
    from advisor.views.plan_svg import plan_svg
    from advisor.views.plan_text import render_plain_plan

    hours = session.parse_hours(args.hours, "--hours", 0.5, MAX_PLAN_HOURS)
    svg = options.svg_target(args.svg, "plan.svg")
    start_option = session.parse_time(args.start, "--start")
    request = session.request_from(args)
    inputs = session.load_inputs(request, read="whole")
    site = inputs.site
    hours = hours if hours is not None else (site.thresholds.session_hours or 4.0)
    feed = inputs.require_feed()
    notes = list(inputs.notes)
    frame, forecast_source = session.with_site_forecast(
        inputs, request, notes, Path(args.forecast) if args.forecast else None
    )
    start = session.evaluation_time(inputs, start_option, frame)
    sources = " + ".join([feed.source, *([forecast_source] if forecast_source else [])])
    plan = compute_plan(
        frame, start, hours, site, inputs.registry, inputs.rules, inputs.freq_ghz, odds=inputs.odds, source=sources
    )
    quality = feed.quality.as_dict()
    quality["source"] = feed.source
    ctx = Context(
        site_name=site.name,
        time_zone=site.time_zone,
        feed_source=sources,
        is_demo=inputs.is_demo,
        data_quality=quality,
        notes=tuple(notes),
    )
    svg_text = plan_svg(plan, ctx) if svg is not None else None
    if args.json:
        print(json.dumps(plan_json(plan, ctx), indent=2, allow_nan=False))
    else:
        width = options.text_width()
        sys.stdout.write(render_plain_plan(plan, ctx, width))
    if svg is not None and svg_text is not None:
        atomic_write_text(svg, svg_text)
        print(f"advisor: saved the plan picture to {svg}", file=sys.stderr)
    return 0
