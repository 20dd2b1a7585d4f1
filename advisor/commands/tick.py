"""``advisor tick``: the cron/systemd-timer command, quiet unless the advice changes.

Evaluates like ``check`` (every ``check`` option; default feed: the site's), keeps the result in
``--state-dir`` (see :mod:`advisor.io.statedir`; what changed: :mod:`advisor.evaluation.advisory`),
prints to stdout only when the verdict changed (or, with ``--notify-on-reasons``, the reason
set), runs the site's notify command on change, and exits with ``check``'s status.

The status page never keeps showing an old call: a missing, empty or unreadable feed is an
undetermined advisory (not an input error), and a run that fails for any other reason (a site
or rule file that cannot be read: exit 2; an internal error: exit 1) publishes an undetermined
advisory saying why (:mod:`advisor.views.advisory_failed`) before it reports the error.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
from dataclasses import dataclass, field
from datetime import datetime, timezone
from typing import TYPE_CHECKING, Any

from advisor.commands import session
from advisor.commands.helpformat import HelpFormatter
from advisor.errors import FeedError, InsufficientData, UsageError

#: The notify command's output, in the state dir (never tick's own output: cron would mail it).
NOTIFY_LOG = "notify.log"

if TYPE_CHECKING:
    from advisor.evaluation.advisory import Change
    from advisor.io.site import Site

EXIT_HELP = """exit status:
  0   scan            take a laser scan now
  10  astronomical    use the astronomical method
  11  postpone        neither method is worth doing now
  12  undetermined    data missing, stale or implausible (also: feed missing or unreadable)
  2   bad input or usage (site, rules, registry, options, a --state-dir path too long);
      a run that got as far as the state dir publishes an undetermined advisory saying why
  74  the state dir cannot be created or written (it is left as it was, or the message says
      which file could not be put back)
  75  another tick held the state dir's lock for --lock-wait seconds (nothing was changed)
  1   internal error (an undetermined advisory saying so is published, as for 2)

stdout is empty unless the advice changed (or --always), so cron mails only changes; warnings
and errors go to stderr.  Advisory only - not a safety system."""


def add_parser(sub, name: str, help: str) -> argparse.ArgumentParser:
    """Register ``advisor tick`` on the subcommand table ``sub``."""
    p = sub.add_parser(
        name,
        help=help,
        description="Evaluate the latest feed, write DIR/advisory.json, .txt and .html atomically, append "
        "DIR/history.jsonl, and print (and run the site's notify command) only when the verdict "
        "changed since the last run.",
        epilog=EXIT_HELP,
        formatter_class=HelpFormatter,
    )
    session.add_evaluation_options(p)
    session.add_session_option(p)
    p.add_argument("--json", action="store_true", help="when printing, print the advisory JSON object")
    p.add_argument(
        "--state-dir",
        required=True,
        metavar="DIR",
        help="folder for the advisory, history and state (created if its parent exists)",
    )
    p.add_argument("--always", action="store_true", help="print the advisory on every run, not only on change")
    p.add_argument(
        "--notify-on-reasons",
        action="store_true",
        help="also announce when the set of reasons (blocks, cautions, error terms) changes",
    )
    p.add_argument(
        "--lock-wait",
        type=float,
        default=10.0,
        metavar="SECONDS",
        help="how long to wait for an overlapping run to finish (default 10)",
    )
    p.set_defaults(func=cmd_tick)
    return p


#: The files a status page reads; withdrawn when a failed run cannot even say why.
ADVISORY_FILES = ("advisory.json", "advisory.txt", "advisory.html")


def _evaluate(request: session.Request) -> session.CheckResult:
    """``check``'s result; an unreadable feed gives the undetermined call instead of an input error."""
    try:
        return session.run_check(request)
    except (FeedError, InsufficientData) as exc:
        return session.check_without_feed(request, exc)


def _warn(message: str) -> None:
    print(f"advisor: warning: {message}", file=sys.stderr)


@dataclass
class Outcome:
    """What one run publishes, and what it prints and notifies afterwards."""

    files: dict[str, str]
    record: dict
    change: Change
    history_max_bytes: int
    status: int = 0
    doc: dict = field(default_factory=dict)
    text: str = ""
    panel: Any = None  # the rich panel
    site: Site | None = None  # None when the run failed
    verdict: str = "undetermined"


def _advise(request: session.Request, args, previous, now) -> Outcome:
    """Evaluate and render the advisory of this run (everything that can fail on the inputs)."""
    from advisor.evaluation import advisory
    from advisor.text import clean_text
    from advisor.views.advisory import advisory_html, advisory_json, issued_line
    from advisor.views.context import with_note
    from advisor.views.jsondoc import to_json_dict
    from advisor.views.panel import render_panel
    from advisor.views.plain import render_plain

    result = _evaluate(request)
    call, site = result.call, result.inputs.site
    if args.at is not None:  # --at drives every clock the advisory shows: issued, since, the state kept
        now = call.time_utc.to_pydatetime()
    blocked_by = {m: c.get("blocked_by", []) for m, c in call.candidates.items()}
    change = advisory.track_change(
        previous,
        call.verdict,
        advisory.reason_set(call.reasons),
        advisory.utc_text(now),
        site.tick.dead_feed_ticks,
        args.notify_on_reasons,
        at_once=advisory.switches_at_once(previous, call.verdict, blocked_by),
        confirm=advisory.Confirm(site.tick.confirm_ticks, site.tick.confirm_min),
    )
    ctx = with_note(result.ctx, advisory.dead_feed_note(change))
    doc = advisory_json(to_json_dict(call, ctx, result.status), change)
    text = clean_text(issued_line(change) + "\n" + render_plain(call, ctx, status=result.status), keep_newlines=True)
    full_text = clean_text(
        issued_line(change) + "\n" + render_plain(call, ctx, details=True, status=result.status), keep_newlines=True
    )

    def panel(width: int, height: int):
        return render_panel(call, ctx, width, height, status=result.status)

    files = {
        "advisory.json": json.dumps(doc, indent=2, allow_nan=False) + "\n",
        "advisory.txt": full_text,
        # the page shows the dead-feed note as a banner of its own
        "advisory.html": advisory_html(
            call, result.ctx, change, float(site.feed.age_limit_min(call.features.get("feed_cadence_min")))
        ),
        "state.json": json.dumps(change.state.as_dict(), indent=2) + "\n",
    }
    record = {
        "issued_utc": change.state.issued_utc,
        "time_utc": doc["time_utc"],
        "verdict": call.verdict,
        "exit_status": result.status,
        "change": change.kind,
        "reasons": list(change.state.reasons),
        "data_age_min": doc["data_quality"].get("data_age_min"),
        "target_freq_ghz": call.freq_ghz,
        "undetermined_ticks": change.state.undetermined_ticks,
        **advisory.conditions(call),
        "written_utc": advisory.utc_text(datetime.now(timezone.utc)),  # the machine's clock
        "pid": os.getpid(),
    }
    return Outcome(
        files, record, change, site.tick.history_max_bytes, result.status, doc, text, panel, site, call.verdict
    )


def _failed(request: session.Request, args, previous, now, exc: Exception) -> Outcome:
    """The undetermined advisory of a run that could not evaluate (``exc``): the old one must not stand.

    Built from plain strings only.  The site file is read once more for its name and limits;
    if that is what failed, neutral defaults are used.
    """
    from advisor.errors import AdvisorError, internal_error_text
    from advisor.evaluation import advisory
    from advisor.io.site import FeedLayout, TickConfig, load_site
    from advisor.views.advisory_failed import FAILED_RULE, failed_advisory

    status = 2 if isinstance(exc, AdvisorError) else 1
    problem = exc.one_line() if isinstance(exc, AdvisorError) else f"internal error: {internal_error_text(exc)}"
    try:
        site = load_site(request.site_path)
        name, tick, stale_min = site.name, site.tick, float(site.feed.age_limit_min(None))
    except Exception:  # the site file may be what failed
        name, tick, stale_min = None, TickConfig(), float(FeedLayout().age_limit_min(None))
    try:
        at = request.at.resolve(None) if request.at is not None else now
        time_utc = f"{at:%Y-%m-%dT%H:%M:%S}Z"
    except Exception:
        time_utc = f"{now:%Y-%m-%dT%H:%M:%S}Z"
    # A failing run is not a dead feed: it never says so, however many fail in a row.
    change = advisory.track_change(
        previous,
        "undetermined",
        (f"{FAILED_RULE}[both]",),
        advisory.utc_text(now),
        dead_feed_ticks=10**9,
        notify_on_reasons=args.notify_on_reasons,
    )
    files = failed_advisory(
        change, problem, status, site_name=name, time_utc=time_utc, freq_ghz=request.freq_ghz, stale_after_min=stale_min
    )
    files["state.json"] = json.dumps(change.state.as_dict(), indent=2) + "\n"
    record = {
        "issued_utc": change.state.issued_utc,
        "time_utc": time_utc,
        "verdict": "undetermined",
        "exit_status": status,
        "change": change.kind,
        "reasons": list(change.state.reasons),
        "data_age_min": None,
        "target_freq_ghz": request.freq_ghz,
        "undetermined_ticks": change.state.undetermined_ticks,
        "error": problem,
        "pid": os.getpid(),
    }
    return Outcome(files, record, change, tick.history_max_bytes, status)


def cmd_tick(args) -> int:
    from datetime import datetime, timezone

    from advisor.evaluation import advisory
    from advisor.io import notify, statedir
    from advisor.vocabulary import VERDICT

    request = session.request_from(args)
    if not args.lock_wait >= 0:
        raise UsageError(f"--lock-wait {args.lock_wait:g} must be zero or more seconds", field="--lock-wait")
    state_dir = statedir.check_state_dir(args.state_dir)
    failure: Exception | None = None
    try:
        with statedir.locked(state_dir, args.lock_wait):
            for message in statedir.recover(state_dir):
                _warn(message)
            now = datetime.now(timezone.utc)
            previous, set_aside = statedir.read_state(state_dir, now, advisory.parse_state)
            if set_aside:
                _warn(set_aside)
            try:
                out = _advise(request, args, previous, now)
                warnings = statedir.publish(state_dir, out.files, out.record, out.history_max_bytes)
            except (statedir.Busy, statedir.StateDirError):
                raise
            except Exception as exc:  # whatever failed, the old advisory must not stand
                if os.environ.get("ADVISOR_DEBUG"):
                    import traceback

                    traceback.print_exc()
                failure = exc
                try:
                    out = _failed(request, args, previous, now, exc)
                except Exception:  # cannot even say why: withdraw the old advisory
                    statedir.withdraw(state_dir, ADVISORY_FILES)
                    raise failure from None
                warnings = statedir.publish(state_dir, out.files, out.record, out.history_max_bytes)
            for warning in warnings:
                _warn(warning)
    except statedir.Busy as exc:
        print(f"advisor: busy: {exc.one_line()}", file=sys.stderr)
        return statedir.EXIT_BUSY
    except statedir.StateDirError as exc:
        if failure is not None:
            _report(failure)
        print(f"advisor: error: {exc.one_line()}", file=sys.stderr)
        return statedir.EXIT_STATE_DIR
    if failure is not None:
        raise failure  # one line on stderr (advisor.commands.main); the undetermined advisory is published

    change, doc, text = out.change, out.doc, out.text
    announce = change.kind is not None
    if announce or args.always:
        headline = (
            change.headline
            if announce
            else (
                f"advisor tick: no change: {VERDICT[out.verdict].label} since {advisory.short_utc(change.state.since_utc)}"
            )
        )

        def write() -> None:
            if args.json:
                print(json.dumps({**doc, "change": change.kind, "headline": headline}, indent=2, allow_nan=False))
            elif session.want_color(sys.stdout):
                from rich.console import Console

                print(headline)
                console = Console()
                console.print(out.panel(console.width, console.height))
            else:
                sys.stdout.write(headline + "\n" + text)

        session.emit(write)
    argv = out.site.tick.notify_command if out.site is not None else ()
    if announce and argv and out.site is not None:
        if out.site.tick.notify_format == "json":
            payload = json.dumps({**doc, "change": change.kind, "headline": change.headline}, indent=2) + "\n"
        else:
            payload = change.headline + "\n\n" + text
        env = {
            "ADVISOR_VERDICT": out.verdict,
            "ADVISOR_PREVIOUS_VERDICT": change.previous_verdict or "",
            "ADVISOR_CHANGE": change.kind or "",
            "ADVISOR_FEED_LOOKS_DEAD": "1" if change.feed_looks_dead else "0",
            "ADVISOR_STATE_DIR": str(state_dir.resolve()),
        }
        problem = notify.run_notify(
            argv,
            payload,
            out.site.tick.notify_timeout_s,
            env,
            log_path=state_dir / NOTIFY_LOG,
            issued=out.change.state.issued_utc,
        )
        if problem:
            _warn(problem)
    return out.status


def _report(exc: Exception) -> None:
    """The one line :mod:`advisor.commands.main` would print for ``exc``."""
    from advisor.errors import AdvisorError, internal_error_text

    if isinstance(exc, AdvisorError):
        print(f"advisor: error: {exc.one_line()}", file=sys.stderr)
    else:
        print(f"advisor: internal error: {internal_error_text(exc)}", file=sys.stderr)
