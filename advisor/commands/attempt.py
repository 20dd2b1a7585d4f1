"""``advisor attempt add|list``: the site's record of surface-measurement attempts.

``add`` appends one attempt (method, outcome, optional residual and note) to the history the
site file names (``history: {path: attempts.csv}``) with the weather at its time, computed from
the site's feed by the same feature code as ``check`` (:func:`advisor.model.attempts.weather_at`),
so every recorded row can train the site model without an archive.  The history is written under
a lock and replaced atomically; a duplicate attempt, or a time the feed does not cover, is refused
with one line and nothing is written.  ``list`` shows the newest rows.
"""

from __future__ import annotations

import argparse
import math
import re
from pathlib import Path

import pandas as pd

from advisor.commands import session
from advisor.errors import FeedError, UsageError
from advisor.io.bundled import is_bundled
from advisor.vocabulary import METHOD_LABEL, METHODS

FUTURE_TOLERANCE = pd.Timedelta(minutes=5)
SHOWN_WEATHER = ("wind_gust_ms", "air_temp_c", "rel_humidity_pct", "air_temp_rate_c_per_h")


def add_parser(sub, name: str, help: str) -> None:
    """Register ``advisor attempt`` and its actions."""
    cmd = sub.add_parser(
        name,
        help=help,
        description=(
            "Record and list the site's attempts at measuring the surface. Each recorded row carries the weather "
            "at its time, computed from the site's feed as 'check' computes it, so 'advisor train' can learn from it."
        ),
    )
    actions = cmd.add_subparsers(dest="action", metavar="ACTION")
    add = actions.add_parser(
        "add",
        help="record one attempt and its outcome",
        description="Append one attempt to the site's history with the weather at its time, taken from the feed "
        "as 'check' computes it. A second attempt of the same method within a minute, or a time the "
        "feed does not cover, is refused and nothing is written.",
    )
    add.add_argument("--method", required=True, choices=METHODS, help="how the surface was measured")
    add.add_argument("--usable", required=True, choices=("yes", "no"), help="did it give a usable surface map")
    add.add_argument("--residual-um", metavar="UM", help="measured residual surface rms [µm], if any")
    add.add_argument("--time", metavar="TIME", help=session.time_help("when the attempt started (default: now)"))
    add.add_argument("--note", help="free text, e.g. 'panel 14 noisy'")
    _where(add)
    add.add_argument("--feed", metavar="FEED", help="feed to take the weather from (default: the site's feed)")
    add.set_defaults(func=cmd_attempt_add)
    lst = actions.add_parser("list", help="show the newest recorded attempts")
    _where(lst)
    lst.add_argument("--last", type=int, default=20, metavar="N", help="how many of the newest rows (default 20)")
    lst.set_defaults(func=cmd_attempt_list)
    cmd.set_defaults(func=lambda a: session.missing_action(cmd))


def _where(p: argparse.ArgumentParser) -> None:
    p.add_argument("--site", metavar="SITE.yaml", help="site file naming the history (history.path) and the feed")
    p.add_argument("--history", metavar="ATTEMPTS.csv", help="history file (default: the site's history.path)")


def _history_path(args, site) -> Path:
    if args.history:
        return Path(args.history)
    if is_bundled(site.source):
        raise UsageError(
            "no history given",
            field="--history",
            hint="pass --site SITE.yaml (with history: {path: attempts.csv}) or --history FILE; "
            "the bundled demo history is read-only",
        )
    if site.history_path is None:
        raise UsageError(
            "the site file names no attempt history",
            field="history.path",
            hint="add history: {path: attempts.csv} to the site file, or pass --history FILE",
        )
    return site.history_path


def _clean_note(text: str | None) -> str:
    """One line of printable text (control characters, newlines and tabs become spaces)."""
    return re.sub(r"[\x00-\x1f\x7f]+", " ", text or "").strip()


def _residual(text: str | None) -> float | None:
    if text is None:
        return None
    try:
        value = float(text)
    except ValueError:
        raise UsageError(
            f"residual {text!r} is not a number", field="--residual-um", hint="give µm, e.g. 185"
        ) from None
    if not math.isfinite(value) or value < 0:
        raise UsageError(f"residual {text!r} must be zero or a positive number of µm", field="--residual-um")
    return value


def cmd_attempt_add(args: argparse.Namespace) -> int:
    from advisor.features import CATALOGUE
    from advisor.io.history import WEATHER_COLUMNS, append_attempt, format_value
    from advisor.io.site import load_site
    from advisor.model.attempts import not_covered, read_feed_for, weather_at
    from advisor.model.inference import feature_phrase

    site = load_site(args.site)
    path = _history_path(args, site)
    residual = _residual(args.residual_um)
    option = session.parse_time(args.time or "now", "--time")
    assert option is not None  # a text was given
    when = option.resolve(site.time_zone)
    now = pd.Timestamp.now(tz="UTC")
    if when > now + FUTURE_TOLERANCE:
        raise UsageError(
            f"{when:%Y-%m-%dT%H:%M:%SZ} is in the future",
            field="--time",
            hint="record an attempt once it has been made",
        )
    if args.feed:
        feed_path = Path(args.feed)
    elif is_bundled(site.source):
        raise UsageError(
            "no feed to take the weather from",
            field="--feed",
            hint="pass --site SITE.yaml (its feed) or --feed FILE; the demo's invented weather is never "
            "recorded unasked",
        )
    elif site.feed.path is not None:
        feed_path = site.feed.path
    else:
        raise UsageError(
            "no feed to take the weather from",
            field="--feed",
            hint="pass --feed FILE or set feed.path in the site file",
        )
    feed = read_feed_for(feed_path, session.feed_layout(site, named_on_command_line=bool(args.feed)), [when])
    weather = weather_at(feed.frame, pd.DatetimeIndex([when]), site)
    why = not_covered(weather, 0, feed.frame, site)
    if why is not None:
        raise FeedError(
            f"no weather for the attempt: {why}",
            source=feed.source,
            field="--time",
            hint="nothing was added; give --feed with a feed (or archive) that covers that time",
        )
    row = weather.iloc[0]
    cells = {"usable": args.usable, "residual_rms_um": format_value(residual), "note": _clean_note(args.note)}
    cells.update({name: format_value(row[name]) for name in WEATHER_COLUMNS})
    line = append_attempt(path, when, args.method, cells)
    shown = ", ".join(feature_phrase(n, float(row[n])) for n in SHOWN_WEATHER if n in CATALOGUE)
    print(
        f"recorded {METHOD_LABEL[args.method]} attempt at {when:%Y-%m-%dT%H:%M:%SZ} (usable: {args.usable}"
        + (f", residual {residual:g} µm" if residual is not None else "")
        + f") in {path} line {line}"
    )
    print(f"  weather from {feed.source} (sample of {row['sample_time']:%Y-%m-%dT%H:%M:%SZ}): {shown}")
    return 0


def cmd_attempt_list(args: argparse.Namespace) -> int:
    from advisor.io.history import own_weather, read_history
    from advisor.io.site import load_site

    if args.last < 1:
        raise UsageError(f"--last {args.last} must be at least 1", field="--last")
    site = load_site(args.site)
    path = Path(args.history) if args.history else (site.history_path if site.history_path else None)
    if path is None:
        raise UsageError(
            "no history given and the site file names none",
            field="--history",
            hint="pass --history FILE, or add history: {path: attempts.csv} to the site file",
        )
    history = read_history(path, usable_below_um=math.inf)  # every row, whatever its outcome column says
    frame = history.frame
    raw = pd.read_csv(path, dtype=str, keep_default_na=False, skipinitialspace=True)
    raw = raw.rename(columns=lambda c: str(c).strip())
    has_weather = own_weather(frame)
    counts = frame["method"].value_counts()
    print(
        f"attempts in {path}: {len(frame)} ("
        + ", ".join(f"{counts.get(m, 0)} {METHOD_LABEL[m]}" for m in METHODS)
        + f"); {int(has_weather.sum())} carry their weather"
    )
    order = frame["time"].sort_values(kind="stable").index[-args.last :]
    print(
        f"  {'time (UTC)':<20}  {'method':<12}  {'usable':<6}  {'µm':>5}  {'gust m/s':>8}  {'°C':>6}  {'°C/h':>5}  note"
    )
    for k in order:
        r = raw.iloc[k]
        gust = frame["wind_gust_ms"].iloc[k] if "wind_gust_ms" in frame else float("nan")
        temp = frame["air_temp_c"].iloc[k] if "air_temp_c" in frame else float("nan")
        rate = frame["air_temp_rate_c_per_h"].iloc[k] if "air_temp_rate_c_per_h" in frame else float("nan")

        def num(v, fmt):
            return "—" if not math.isfinite(v) else format(v, fmt)

        print(
            f"  {frame['time'].iloc[k]:%Y-%m-%dT%H:%M:%SZ}  {METHOD_LABEL[frame['method'].iloc[k]]:<12}  "
            f"{r.get('usable', '') or '—':<6}  {num(frame['residual_rms_um'].iloc[k], '.0f'):>5}  "
            f"{num(gust, '.1f'):>8}  {num(temp, '.1f'):>6}  {num(rate, '+.1f'):>5}  {r.get('note', '')}"
        )
    return 0
