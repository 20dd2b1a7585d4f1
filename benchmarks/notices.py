"""How many "verdict changed" notices would `advisor tick` send on the demo feed?

Simulates a tick every --every minutes over the whole demo mast feed (and over one afternoon),
with the site's confirmation setting (tick.confirm_ticks / confirm_min) and without it (every
change announced at once), using the same evaluation and change tracking as `advisor tick`.
Prints the counts; nothing is timed.

    python benchmarks/notices.py [--every 5]
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from advisor.catalogue import CATALOGUE
from advisor.evaluation import advisory
from advisor.evaluation.evaluate import evaluate
from advisor.explain import explain
from advisor.io.feed import read_feed
from advisor.io.references import read_registry
from advisor.io.site import load_site
from advisor.model.inference import load_model
from advisor.rules.loader import default_rule_files, load_rules


def tick_calls(every_min: float, start=None, end=None):
    """(time, verdict, blocked_by) at every tick time over the demo feed (or [start, end])."""
    site = load_site(None)
    feed = read_feed(site.feed.path, site.feed)
    frame = feed.frame[feed.frame["kind"] == "observed"]
    first, last = frame["time"].iloc[0] + pd.Timedelta(hours=1), frame["time"].iloc[-1]
    times = pd.date_range(start or first, end or last, freq=pd.Timedelta(minutes=every_min))
    rules = load_rules([(p, "default") for p in default_rule_files()], CATALOGUE)
    model = load_model(site.model_path) if site.model_path else None
    decisions = evaluate(
        frame, times, site, read_registry(site.references_path), rules, 86.0, model.odds if model else None
    )
    for i, t in enumerate(times):
        call = explain(decisions, i)
        yield (
            t,
            call.verdict,
            {m: c["blocked_by"] for m, c in call.candidates.items()},
            advisory.reason_set(call.reasons),
        )


def count_notices(calls, confirm: advisory.Confirm | None) -> int:
    """Verdict-change announcements over a sequence of tick calls (``confirm`` None: every change at once)."""
    state, notices = None, 0
    for t, verdict, blocked_by, reasons in calls:
        now = advisory.utc_text(t.to_pydatetime())
        at_once = confirm is None or advisory.switches_at_once(state, verdict, blocked_by)
        change = advisory.track_change(state, verdict, reasons, now, 6, False, at_once=at_once, confirm=confirm)
        notices += change.kind == "verdict"
        state = change.state
    return notices


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--every", type=float, default=5.0, help="minutes between ticks (default 5)")
    args = parser.parse_args()
    site = load_site(None)
    confirm = advisory.Confirm(site.tick.confirm_ticks, site.tick.confirm_min)
    week = list(tick_calls(args.every))
    zone = site.time_zone
    afternoon = list(
        tick_calls(
            args.every,
            pd.Timestamp("2026-11-25 12:00", tz=zone).tz_convert("UTC"),
            pd.Timestamp("2026-11-25 15:00", tz=zone).tz_convert("UTC"),
        )
    )
    days = (week[-1][0] - week[0][0]).total_seconds() / 86400.0
    print(f"demo feed, a tick every {args.every:g} min, {len(week)} ticks over {days:.1f} days")
    print(f"  every change announced at once : {count_notices(week, None)} notices")
    print(f"  confirmed ({confirm.ticks} ticks or {confirm.minutes:g} min) : {count_notices(week, confirm)} notices")
    print(f"25 Nov 12:00-15:00 local, {len(afternoon)} ticks")
    print(f"  every change announced at once : {count_notices(afternoon, None)} notices")
    print(f"  confirmed                       : {count_notices(afternoon, confirm)} notices")
    return 0


if __name__ == "__main__":
    sys.exit(main())
