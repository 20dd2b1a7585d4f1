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
from pathlib import Path

from advisor.commands import session
from advisor.commands.helpformat import HelpFormatter
from advisor.errors import FeedError, InsufficientData, UsageError

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
and errors go to stderr.  Advisory only - not a safety system."""


def add_parser(sub, name: str, help: str) -> argparse.ArgumentParser:
    """Register ``advisor tick`` on the subcommand table ``sub``."""
    p = sub.add_parser(
        name, help=help,
        description="Evaluate the latest feed, write DIR/advisory.json, .txt and .html atomically, append "
                    "DIR/history.jsonl, and print (and run the site's notify command) only when the verdict "
                    "changed since the last run.",
        epilog=EXIT_HELP, formatter_class=HelpFormatter)
    session.add_evaluation_options(p)
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


def _evaluate(request: session.Request) -> session.CheckResult:
    """``check``'s result; an unreadable feed gives the undetermined call instead of an input error."""
    try:
        return session.run_check(request)
    except (FeedError, InsufficientData) as exc:
        return session.check_without_feed(request, exc)


def _warn(message: str) -> None:
    print(f"advisor: warning: {message}", file=sys.stderr)


def cmd_tick(args) -> int:
    from datetime import datetime, timezone

    from advisor.evaluation import advisory
    from advisor.io import notify, statedir
    from advisor.text import clean_text
    from advisor.views.advisory import advisory_html, advisory_json, advisory_title, issued_line
    from advisor.views.context import with_note
    from advisor.views.jsondoc import to_json_dict
    from advisor.views.panel import render_panel
    from advisor.views.plain import render_plain
    from advisor.vocabulary import VERDICT

    request = session.request_from(args)
    if not args.lock_wait >= 0:
        raise UsageError(f"--lock-wait {args.lock_wait:g} must be zero or more seconds", field="--lock-wait")
    state_dir = Path(args.state_dir)
    try:
        with statedir.locked(state_dir, args.lock_wait):
            leftovers = statedir.remove_leftover_temps(state_dir)
            if leftovers:
                _warn(f"{state_dir}: removed {len(leftovers)} temp file(s) left by an interrupted run")
            result = _evaluate(request)
            call, site = result.call, result.inputs.site
            now = datetime.now(timezone.utc)
            previous, warning = statedir.read_state(state_dir, now, advisory.parse_state)
            if warning:
                _warn(warning)
            blocked_by = {m: c.get("blocked_by", []) for m, c in call.candidates.items()}
            change = advisory.track_change(previous, call.verdict, advisory.reason_set(call.reasons),
                                           advisory.utc_text(now), site.tick.dead_feed_ticks, args.notify_on_reasons,
                                           at_once=advisory.switches_at_once(previous, call.verdict, blocked_by),
                                           confirm=advisory.Confirm(site.tick.confirm_ticks, site.tick.confirm_min))
            ctx = with_note(result.ctx, advisory.dead_feed_note(change))
            doc = advisory_json(to_json_dict(call, ctx, result.status), change)
            text = clean_text(issued_line(change) + "\n" + render_plain(call, ctx), keep_newlines=True)
            panel = render_panel(call, ctx)
            title = advisory_title(call.verdict, ctx.site_name)
            html_panel = render_panel(call, result.ctx)  # the page shows the dead-feed note as a banner
            files = {
                "advisory.json": json.dumps(doc, indent=2, allow_nan=False) + "\n",
                "advisory.txt": text,
                "advisory.html": advisory_html(html_panel, change, title, site.feed.max_feed_age_min),
                "state.json": json.dumps(change.state.as_dict(), indent=2) + "\n",
            }
            record = {"issued_utc": change.state.issued_utc, "time_utc": doc["time_utc"], "verdict": call.verdict,
                      "exit_status": result.status, "change": change.kind, "reasons": list(change.state.reasons),
                      "data_age_min": doc["data_quality"].get("data_age_min"),
                      "target_freq_ghz": call.freq_ghz, "undetermined_ticks": change.state.undetermined_ticks,
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
        elif session.want_color(sys.stdout):
            from rich.console import Console

            print(headline)
            Console().print(panel)
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
               "ADVISOR_CHANGE": change.kind or "", "ADVISOR_FEED_LOOKS_DEAD": "1" if change.feed_looks_dead else "0",
               "ADVISOR_STATE_DIR": str(state_dir.resolve())}
        problem = notify.run_notify(argv, payload, site.tick.notify_timeout_s, env)
        if problem:
            _warn(problem)
    return result.status
