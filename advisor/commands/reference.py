"""``advisor reference add|list``: the registry of reference scans (taken right after an astronomical correction).

``add`` takes the air temperature at the scan from ``--air-temp-c``, or else from the feed (the
site's, or ``--feed``) at the scan's time, computed as ``check`` computes it, and says so.
"""

from __future__ import annotations

import argparse
import math
from pathlib import Path

import pandas as pd

from advisor.commands import session
from advisor.errors import UsageError
from advisor.io.references import append_reference, read_registry
from advisor.io.site import load_site


def add_parser(sub, name: str, help: str) -> None:
    """Register ``advisor reference`` and its actions."""
    ref = sub.add_parser(
        name, help=help, description="Record and list reference scans (taken right after an astronomical correction)."
    )
    actions = ref.add_subparsers(dest="action", metavar="ACTION")
    add = actions.add_parser("add", help="record a reference scan")
    add.add_argument("--time", required=True, metavar="TIME", help=session.time_help("when it was taken"))
    add.add_argument(
        "--air-temp-c", metavar="DEGC", help="air temperature at the scan [°C] (default: the feed's at that time)"
    )
    add.add_argument("--note", help="free text, e.g. 'after holography on 3C 84'")
    add.add_argument("--site", metavar="SITE.yaml", help="use the site's registry and feed")
    add.add_argument("--references", metavar="REFS.csv", help="registry file (created if absent)")
    add.add_argument("--feed", metavar="FEED", help="feed to read the air temperature from (default: the site's)")
    add.set_defaults(func=cmd_reference_add)
    lst = actions.add_parser("list", help="show the registry with ages")
    lst.add_argument("--site", metavar="SITE.yaml")
    lst.add_argument("--references", metavar="REFS.csv")
    lst.add_argument("--at", metavar="TIME", help=session.time_help("compute ages at this time (default now)"))
    lst.set_defaults(func=cmd_reference_list)
    ref.set_defaults(func=lambda a: session.missing_action(ref))


def _registry_path(request: session.Request) -> Path:
    """The registry to write: ``--references``, else the site file's (the demo's is read-only)."""
    if request.references_path is not None:
        return request.references_path
    if request.site_path is not None:
        site = load_site(request.site_path)
        if site.references_path is None:
            raise UsageError(
                "the site file names no reference registry",
                field="references.path",
                hint="add references: {path: refs.csv} to the site file, or pass --references FILE",
            )
        return site.references_path
    raise UsageError(
        "no registry given",
        field="--references",
        hint="pass --references FILE or --site SITE.yaml (the bundled demo registry is read-only)",
    )


def _resolve(option: session.TimeOption | None, request: session.Request) -> pd.Timestamp:
    """The instant of a time option (now when not given); day words in the time zone of the site in use."""
    if option is None:
        return pd.Timestamp.now(tz="UTC")
    return option.resolve(load_site(request.site_path).time_zone if option.days_back is not None else None)


def _feed_temperature(request: session.Request, time: pd.Timestamp) -> tuple[float, str]:
    """The air temperature at ``time`` from the feed, as ``check`` computes it, and where it came from."""
    from advisor.errors import FeedError
    from advisor.model.attempts import not_covered, read_feed_for, weather_at

    if request.site_path is None and request.feed_path is None:
        raise UsageError(
            "no air temperature given and no feed to read it from",
            field="--air-temp-c",
            hint="give --air-temp-c DEGC, or --site SITE.yaml / --feed FILE to take it from the feed",
        )
    site = load_site(request.site_path)
    path = request.feed_path or site.feed.path
    if path is None:
        raise UsageError(
            "no air temperature given and the site file names no feed",
            field="--air-temp-c",
            hint="give --air-temp-c DEGC or --feed FILE",
        )
    feed = read_feed_for(path, session.feed_layout(site, named_on_command_line=request.feed_path is not None), [time])
    weather = weather_at(feed.frame, pd.DatetimeIndex([time]), site)
    why = not_covered(weather, 0, feed.frame, site)
    temp = float(weather["air_temp_c"].iloc[0])
    if not math.isfinite(temp) or (why is not None and "temperature rate" not in why):
        raise FeedError(
            f"no air temperature at the scan: {why or 'the feed gives none'}",
            source=feed.source,
            field="--time",
            hint="nothing was added; give --air-temp-c DEGC",
        )
    sample = weather["sample_time"].iloc[0]
    return temp, f"from the feed {feed.source} (sample of {sample:%Y-%m-%dT%H:%M:%SZ})"


def cmd_reference_add(args: argparse.Namespace) -> int:
    request = session.request_from(args)
    path = _registry_path(request)
    time = _resolve(session.parse_time(args.time, "--time"), request)
    if args.air_temp_c is None:
        temp, origin = _feed_temperature(request, time)
    else:
        try:
            temp = float(args.air_temp_c)
        except ValueError:
            raise UsageError(
                f"air temperature {args.air_temp_c!r} is not a number", field="--air-temp-c", hint="give °C, e.g. 3.5"
            ) from None
        if math.isnan(temp):
            raise UsageError("air temperature is NaN", field="--air-temp-c")
        origin = "as given"
    registry = append_reference(path, time, temp, args.note or "")
    print(
        f"added reference scan at {time:%Y-%m-%dT%H:%M:%SZ} ({temp:.1f} °C, {origin}) to {path}; "
        f"{len(registry)} in registry"
    )
    return 0


def cmd_reference_list(args: argparse.Namespace) -> int:
    request = session.request_from(args)
    path: Path | None
    if request.references_path is not None or request.site_path is not None:
        path = _registry_path(request)
    else:
        path = load_site(None).references_path
    registry = read_registry(path)
    now = _resolve(request.at, request)
    print(f"reference scans in {path} (ages at {now:%Y-%m-%d %H:%M} UTC):")
    if len(registry) == 0:
        print("  (none)")
        return 0
    print(f"  {'time (UTC)':<20}  {'age':>8}  {'air °C':>6}  note")
    for t, temp, note in zip(registry.times_utc, registry.air_temp_c, registry.notes):
        age_h = (now - t).total_seconds() / 3600.0
        age = f"{age_h:.1f} h" if age_h >= 0 else "future"
        print(f"  {t:%Y-%m-%dT%H:%M:%SZ}  {age:>8}  {temp:>6.1f}  {note}")
    return 0
