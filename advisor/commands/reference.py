"""``advisor reference add|list``: the registry of reference scans (taken right after an astronomical correction)."""

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
    ref = sub.add_parser(name, help=help,
                         description="Record and list reference scans (taken right after an astronomical correction).")
    actions = ref.add_subparsers(dest="action", metavar="ACTION")
    add = actions.add_parser("add", help="record a reference scan")
    add.add_argument("--time", required=True, metavar="TIME", help=session.time_help("when it was taken"))
    add.add_argument("--air-temp-c", required=True, metavar="DEGC", help="air temperature at the scan [°C]")
    add.add_argument("--note", help="free text, e.g. 'after holography on 3C 84'")
    add.add_argument("--site", metavar="SITE.yaml", help="use the site's registry")
    add.add_argument("--references", metavar="REFS.csv", help="registry file (created if absent)")
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
            raise UsageError("the site file names no reference registry", field="references.path",
                             hint="add references: {path: refs.csv} to the site file, or pass --references FILE")
        return site.references_path
    raise UsageError("no registry given", field="--references",
                     hint="pass --references FILE or --site SITE.yaml (the bundled demo registry is read-only)")


def _resolve(option: session.TimeOption | None, request: session.Request) -> pd.Timestamp:
    """The instant of a time option (now when not given); day words in the time zone of the site in use."""
    if option is None:
        return pd.Timestamp.now(tz="UTC")
    return option.resolve(load_site(request.site_path).time_zone if option.days_back is not None else None)


def cmd_reference_add(args: argparse.Namespace) -> int:
    request = session.request_from(args)
    path = _registry_path(request)
    time = _resolve(session.parse_time(args.time, "--time"), request)
    try:
        temp = float(args.air_temp_c)
    except ValueError:
        raise UsageError(f"air temperature {args.air_temp_c!r} is not a number", field="--air-temp-c",
                         hint="give °C, e.g. 3.5") from None
    if math.isnan(temp):
        raise UsageError("air temperature is NaN", field="--air-temp-c")
    registry = append_reference(path, time, temp, args.note or "")
    print(f"added reference scan at {time:%Y-%m-%dT%H:%M:%SZ} ({temp:.1f} °C) to {path}; {len(registry)} in registry")
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
