"""``advisor tick``: the cron/systemd-timer command, quiet unless the advice changes.

Evaluates like ``check`` (every ``check`` option; default feed: the site's), keeps the result in
``--state-dir`` (see :mod:`advisor.io.statedir`; what changed: :mod:`advisor.evaluation.advisory`), prints to stdout only when the verdict changed (or,
with ``--notify-on-reasons``, the reason set), runs the site's notify command on change, and
exits with ``check``'s status.  A missing, empty or unreadable feed is an undetermined advisory
(not an input error), so the status page never keeps showing an old call.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
from dataclasses import replace
from pathlib import Path

from advisor.commands.helpformat import HelpFormatter

#: The notify command's output, in the state dir (never tick's own output: cron would mail it).
NOTIFY_LOG = "notify.log"

EXIT_HELP = """exit status:
  0   scan            take a laser scan now
  10  astronomical    use the astronomical method
  11  postpone        neither method is worth doing now
  12  undetermined    data missing, stale or implausible (also: feed missing or unreadable)
  2   bad input or usage (site, rules, registry, options)
  74  the state dir cannot be created or written (nothing was changed in it)
  75  another tick held the state dir's lock for --lock-wait seconds (nothing was changed)
  1   internal error

stdout is empty unless the advice changed (or --always), so cron mails only changes; warnings
and errors go to stderr; the notify command's output goes to DIR/notify.log.  Advisory only -
not a safety system."""


def add_parser(sub, add_evaluation_options) -> argparse.ArgumentParser:
    """Register ``advisor tick`` on the subcommand table ``sub``."""
    p = sub.add_parser(
        "tick", help="one cron/timer run: keep the advisory in a state dir, speak only on change",
        description="Evaluate the latest feed, write DIR/advisory.json, .txt and .html atomically, append "
                    "DIR/history.jsonl, and print (and run the site's notify command) only when the verdict "
                    "changed since the last run.",
        epilog=EXIT_HELP, formatter_class=HelpFormatter)
    add_evaluation_options(p)
    p.add_argument("--json", action="store_true", help="when printing, print the advisory JSON object")
    p.add_argument("--state-dir", required=True, metavar="DIR",
                   help="folder for the advisory, history and state (created if its parent exists)")
    p.add_argument("--always", action="store_true", help="print the advisory on every run, not only on change")
    p.add_argument("--notify-on-reasons", action="store_true",
                   help="also announce when the set of reasons (blocks, cautions, error terms) changes")
    p.add_argument("--lock-wait", type=float, default=10.0, metavar="SECONDS",
                   help="how long to wait for an overlapping run to finish (default 10)")
    p.set_defaults(func=cmd_tick)
    return p


def _empty_feed(source: str):
    """A canonical feed with no rows (the feed file could not be read)."""
    import pandas as pd

    from advisor.io.feed import Feed, FeedQuality, canonical_frame
    from advisor.io.site import FeedLayout

    # A one-row canonical table gives the frame its columns and dtypes; the row is dropped.
    table = pd.DataFrame({"time": ["2000-01-01T00:00:00Z"], "wind_mean_ms": [0.0], "wind_gust_ms": [0.0],
                          "air_temp_c": [0.0], "rel_humidity_pct": [50.0]})
    frame = canonical_frame(table, FeedLayout()).frame.iloc[:0]
    return Feed(frame=frame, quality=FeedQuality(0, 0, 0, 0, 0, 0, None, None), source=source)


def _without_feed(args, error):
    """The undetermined call when the feed itself cannot be read, with the reason why."""
    import pandas as pd

    from advisor.commands.main import CheckResult, Inputs, load_ruleset, parse_at, parse_frequency_ghz
    from advisor.decision import EXIT_CODES, Reason, explain
    from advisor.evaluation.evaluate import evaluate
    from advisor.io.references import read_registry
    from advisor.views.context import Context
    from advisor.io.site import load_site

    freq = parse_frequency_ghz(args.freq)
    site = load_site(args.site)
    source = str(args.feed or site.feed.path)
    feed = _empty_feed(source)
    rules = load_ruleset(site, args.rules)
    registry_path = Path(args.references) if args.references else site.references_path
    at = parse_at(args.at) or pd.Timestamp.now(tz="UTC")
    decisions = evaluate(feed.frame, pd.DatetimeIndex([at]), site, read_registry(registry_path), rules, freq)
    call = explain(decisions, 0)
    why = Reason("feed", "both", "block", f"The weather feed cannot be read: {error.one_line()}")
    call = replace(call, reasons=[why] + [r for r in call.reasons if r.rule != "data"])
    quality = feed.quality.as_dict()
    quality.update({"source": source, "data_age_min": None, "ok": False, "error": error.one_line()})
    from advisor.io.site import is_demo_file

    is_demo = site.is_demo or is_demo_file(args.feed) or is_demo_file(registry_path)
    inputs = Inputs(site, feed, rules, registry_path, freq, is_demo, ())
    ctx = Context(site_name=site.name, time_zone=site.time_zone, feed_source=source, is_demo=is_demo,
                  data_quality=quality, notes=())
    return CheckResult(call, ctx, EXIT_CODES[call.verdict], inputs)


def _evaluate(args):
    from advisor.commands.main import run_check
    from advisor.errors import FeedError, InsufficientData

    try:
        return run_check(args)
    except (FeedError, InsufficientData) as exc:
        return _without_feed(args, exc)


def _warn(message: str) -> None:
    print(f"advisor: warning: {message}", file=sys.stderr)


def cmd_tick(args) -> int:
    from datetime import datetime, timezone

    from advisor.commands.main import _want_color
    from advisor.evaluation import advisory
    from advisor.io import notify, statedir
    from advisor.views.advisory import advisory_html, advisory_json, issued_line
    from advisor.views.context import with_note
    from advisor.views.jsondoc import to_json_dict
    from advisor.views.panel import render_panel
    from advisor.views.plain import render_plain
    from advisor.vocabulary import VERDICT

    if not args.lock_wait >= 0:
        from advisor.errors import UsageError

        raise UsageError(f"--lock-wait {args.lock_wait:g} must be zero or more seconds", field="--lock-wait")
    state_dir = Path(args.state_dir)
    try:
        with statedir.locked(state_dir, args.lock_wait):
            leftovers = statedir.remove_leftover_temps(state_dir)
            if leftovers:
                _warn(f"{state_dir}: removed {len(leftovers)} temp file(s) left by an interrupted run")
            result = _evaluate(args)
            call, site = result.call, result.inputs.site
            # --at drives every clock the advisory shows: issued, since, and the state kept for the next run
            now = call.time_utc.to_pydatetime() if args.at is not None else datetime.now(timezone.utc)
            previous, warning = statedir.read_state(state_dir, now, advisory.parse_state)
            if warning:
                _warn(warning)
            change = advisory.track_change(previous, call.verdict, advisory.reason_set(call.reasons),
                                           advisory.utc_text(now), site.tick.dead_feed_ticks, args.notify_on_reasons)
            ctx = with_note(result.ctx, advisory.dead_feed_note(change))
            doc = advisory_json(to_json_dict(call, ctx, result.status), change)
            text = issued_line(change) + "\n" + render_plain(call, ctx, status=result.status)
            full_text = issued_line(change) + "\n" + render_plain(call, ctx, details=True, status=result.status)
            files = {
                "advisory.json": json.dumps(doc, indent=2, allow_nan=False) + "\n",
                "advisory.txt": full_text,
                # the page shows the dead-feed note as a banner of its own
                "advisory.html": advisory_html(call, result.ctx, change, site.feed.max_feed_age_min),
                "state.json": json.dumps(change.state.as_dict(), indent=2) + "\n",
            }
            record = {"issued_utc": change.state.issued_utc, "time_utc": doc["time_utc"], "verdict": call.verdict,
                      "exit_status": result.status, "change": change.kind, "reasons": list(change.state.reasons),
                      "data_age_min": doc["data_quality"].get("data_age_min"),
                      "target_freq_ghz": call.freq_ghz, "undetermined_ticks": change.state.undetermined_ticks,
                      "written_utc": advisory.utc_text(datetime.now(timezone.utc)),  # the machine's clock
                      "pid": os.getpid()}
            for warning in statedir.publish(state_dir, files, record, site.tick.history_max_bytes):
                _warn(warning)
    except statedir.Busy as exc:
        print(f"advisor: busy: {exc.one_line()}", file=sys.stderr)
        return statedir.EXIT_BUSY
    except statedir.StateDirError as exc:
        print(f"advisor: error: {exc.one_line()}", file=sys.stderr)
        return statedir.EXIT_STATE_DIR

    announce = change.kind is not None
    if announce or args.always:
        headline = change.headline if announce else (
            f"advisor tick: no change: {VERDICT[call.verdict].label} since {advisory.short_utc(change.state.since_utc)}")
        if args.json:
            print(json.dumps({**doc, "change": change.kind, "headline": headline}, indent=2, allow_nan=False))
        elif _want_color(sys.stdout):
            from rich.console import Console

            print(headline)
            console = Console()
            console.print(render_panel(call, ctx, console.width, console.height, status=result.status))
        else:
            sys.stdout.write(headline + "\n" + text)
        sys.stdout.flush()
    argv = site.tick.notify_command
    if announce and argv:
        if site.tick.notify_format == "json":
            payload = json.dumps({**doc, "change": change.kind, "headline": change.headline}, indent=2) + "\n"
        else:
            payload = change.headline + "\n\n" + text
        env = {"ADVISOR_VERDICT": call.verdict, "ADVISOR_PREVIOUS_VERDICT": change.previous_verdict or "",
               "ADVISOR_CHANGE": change.kind, "ADVISOR_FEED_LOOKS_DEAD": "1" if change.feed_looks_dead else "0",
               "ADVISOR_STATE_DIR": str(state_dir.resolve())}
        problem = notify.run_notify(argv, payload, site.tick.notify_timeout_s, env,
                                    log_path=state_dir / NOTIFY_LOG, issued=change.state.issued_utc)
        if problem:
            _warn(problem)
    return result.status
