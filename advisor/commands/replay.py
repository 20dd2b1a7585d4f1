"""``advisor replay``: evaluate every row of an archive and report hours, scores and rule changes.

Scores both methods against recorded attempts (``--history``), writes one row per step with
what blocked each method and the key features (``--csv``), and warns when the reference
registry or the history does not cover the replayed period (stderr, and ``warnings`` in JSON).
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path
from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd

from advisor.commands import session
from advisor.errors import UsageError
from advisor.evaluation.evaluate import Scenario
from advisor.evaluation.replay import (
    attempts_from_history,
    compare_rule_sets,
    dominant_by_month_hour,
    hours_by,
    month_keys,
    replay_features,
    replay_from_features,
    score_attempts,
    step_hours,
    weather_hours,
)
from advisor.evaluation.replay_table import coverage_warnings, step_table
from advisor.features import FEATURES_VERSION, feature_source_paths
from advisor.io import featurecache
from advisor.io.feed import check_whole_read, read_feed
from advisor.io.fileio import refuse_overwrite
from advisor.io.history import read_history
from advisor.vocabulary import VERDICTS

PROGRESS_ROWS = 150_000  # archives this long take more than a second: show progress


def add_parser(sub, name: str, help: str) -> None:
    """Register ``advisor replay``."""
    p = sub.add_parser(
        name,
        help=help,
        description="Evaluate every row of a weather archive with the same rules and decision as "
        "`check`, then summarise hours per verdict (by month and hour of day), score the "
        "advice against recorded attempts, and compare two rule sets.",
    )
    session.add_evaluation_options(p, with_at=False)
    p.add_argument(
        "--history",
        metavar="ATTEMPTS.csv",
        help="recorded attempts: time, method (scan|astronomical), usable (yes/no); both methods are scored",
    )
    p.add_argument(
        "--compare-rules",
        metavar="FILE.yaml",
        nargs="+",
        action="extend",
        help="a second rule set (layered like --rules) to compare with",
    )
    p.add_argument("--from", dest="time_from", metavar="TIME", help=session.time_help("first instant"))
    p.add_argument("--to", dest="time_to", metavar="TIME", help=session.time_help("last instant"))
    p.add_argument("--json", action="store_true", help="print the summary as one JSON object")
    p.add_argument(
        "--csv",
        metavar="FILE",
        help="write one row per evaluated time: time, verdict, what blocked "
        "each method, its expected surface and odds, the key features and flags (true/false)",
    )
    p.add_argument(
        "--no-cache",
        action="store_true",
        help="recompute the archive's features instead of reusing them from an earlier replay "
        "(cache: $ADVISOR_CACHE_DIR, default ~/.cache/advisor/replay)",
    )
    p.set_defaults(func=cmd_replay)


def _progress(total: int):
    """A progress callback drawing on stderr for long archives on a terminal, else a no-op."""
    if total < PROGRESS_ROWS or not sys.stderr.isatty():
        return None, None
    from rich.console import Console
    from rich.progress import Progress

    progress = Progress(console=Console(stderr=True), transient=True)
    task = progress.add_task("replaying", total=total)
    progress.start()
    return (lambda done, _total: progress.update(task, completed=done)), progress


def cmd_replay(args: argparse.Namespace) -> int:
    request = session.request_from(args)
    if request.feed_path is None:
        raise UsageError("replay needs an archive", field="--feed", hint="pass --feed ARCHIVE.csv")
    from_option = session.parse_time(args.time_from, "--from")
    to_option = session.parse_time(args.time_to, "--to")
    inputs = session.load_inputs(request, read=None)
    refuse_overwrite(
        args.csv,
        {
            "--feed": inputs.feed_path,
            "--history": args.history,
            "--site": request.site_path,
            "--references": inputs.registry_path,
            "--rules": request.rule_files,
        },
        "--csv",
    )
    zone = inputs.site.time_zone
    t_from = from_option.resolve(zone) if from_option is not None else None
    t_to = to_option.resolve(zone) if to_option is not None else None
    if t_from is not None and t_to is not None and t_to <= t_from:
        raise UsageError("--to must be after --from", field="--to")
    scenario = Scenario(inputs.site, inputs.registry, inputs.rules, inputs.freq_ghz, inputs.odds)
    rule_sets = [inputs.rules]
    if args.compare_rules:  # the same features serve both rule sets
        rule_sets.append(session.load_ruleset(inputs.site, [*request.rule_files, *args.compare_rules]))
    check_whole_read(inputs.feed_path)  # before hashing it for the cache
    key = featurecache.key_for(
        inputs.feed_path,
        Path(inputs.site.source),
        inputs.registry_path,
        {
            "from": t_from,
            "to": t_to,
            "time_zone": inputs.feed_layout.time_zone,
            "session_elevation_deg": inputs.site.session.elevation_deg,
        },  # the calibrator choice depends on it
        code_paths=feature_source_paths(),
        features_version=FEATURES_VERSION,
    )
    features = None if args.no_cache else featurecache.load(key)
    if features is None:
        features = _compute_features(inputs, scenario, t_from, t_to)
        if not args.no_cache:
            featurecache.store(key, features)
    base, *rest = replay_from_features(features, scenario, rule_sets)
    other = rest[0] if rest else None
    times = base.times_utc
    cadence = features["feed_cadence_min"].to_numpy(dtype=float)
    cadence_min = float(np.nanmedian(cadence)) if np.isfinite(cadence).any() else None
    layout = inputs.site.feed
    hours = step_hours(times, float(layout.gap_limit_min(cadence_min)))
    age_limit = float(layout.age_limit_min(cadence_min))
    local = times.tz_convert(ZoneInfo(inputs.site.time_zone))
    summary = {
        "feed": str(inputs.feed_path),
        "from_utc": times[0].strftime("%Y-%m-%dT%H:%M:%SZ"),
        "to_utc": times[-1].strftime("%Y-%m-%dT%H:%M:%SZ"),
        "rows": int(len(times)),
        "target_freq_ghz": inputs.freq_ghz,
        "rules": len(inputs.rules),
        "hours": _hours_dict(base.verdict, hours),
        "by_month": _table_dict(hours_by(base.verdict, hours, month_keys(local))),
        "by_local_hour": _table_dict(hours_by(base.verdict, hours, local.hour)),
        "attempts": None,
        "comparison": None,
        **weather_hours(features, base.verdict, hours, inputs.site.thresholds.high_frequency_wind_limit_ms),
    }
    attempts, scores = None, None
    if args.history:
        attempts = attempts_from_history(read_history(args.history))
        scores = summary["attempts"] = _score(base, attempts, inputs, age_limit)
    if other is not None:
        comparison = compare_rule_sets(base.verdict, other.verdict, base.rule_eval, other.rule_eval, hours)
        comparison["hours_b"] = _hours_dict(other.verdict, hours)
        if attempts is not None:
            comparison["attempts_b"] = _score(other, attempts, inputs, age_limit)
        summary["comparison"] = comparison
    warnings = coverage_warnings(
        times, hours, features, inputs.registry, attempts, scores["attempts_covered"] if scores else None
    )
    summary["warnings"] = warnings
    if args.csv:
        _write_csv(args.csv, step_table(base, other))
    if args.json:
        for warning in warnings:
            print(f"advisor: warning: {warning}", file=sys.stderr)
        print(json.dumps(summary, indent=2, allow_nan=False))
    else:
        from rich.console import Console

        from advisor.views.replay import replay_renderable

        console = Console(highlight=False)
        console.print(replay_renderable(summary, dominant_by_month_hour(base.verdict, hours, local), console.width))
    return 0


def _compute_features(inputs, scenario, t_from, t_to) -> pd.DataFrame:
    """Read the archive and compute the features of every observed row in the period."""
    feed = read_feed(inputs.feed_path, inputs.feed_layout)
    session.check_feed_zone(feed, inputs.site, inputs.feed_layout)
    frame = feed.frame[feed.frame["kind"] == "observed"]
    times = pd.DatetimeIndex(frame["time"]).as_unit("ns")
    keep = np.ones(len(times), dtype=bool)
    if t_from is not None:
        keep &= times >= t_from
    if t_to is not None:
        keep &= times <= t_to
    times = times[keep]
    if len(times) == 0:
        raise UsageError(
            "no archive rows in the chosen period",
            field="--from/--to",
            hint=f"the archive covers {feed.quality.first_time_utc} to {feed.quality.last_time_utc}",
        )
    on_chunk, progress = _progress(len(times))
    try:
        return replay_features(frame, times, scenario, on_chunk=on_chunk)
    finally:
        if progress:
            progress.stop()


def _hours_dict(verdict: np.ndarray, hours: np.ndarray) -> dict:
    return {v: round(float(hours[verdict == v].sum()), 2) for v in VERDICTS}


def _table_dict(table: pd.DataFrame) -> dict:
    return {str(k): {v: round(float(table.loc[k, v]), 2) for v in table.columns} for k in table.index}


def _score(replayed, attempts, inputs, age_limit: float) -> dict:
    """Both methods scored against the attempts; per-rule tables only for rules that concern the method."""
    applies = {r.id: r.applies_to for r in replayed.decisions.rules} if replayed.decisions is not None else None
    return score_attempts(
        replayed.times_utc, replayed.verdict, replayed.rule_eval, attempts, age_limit, replayed.feasible, applies
    )


def _write_csv(path: str, table: pd.DataFrame) -> None:
    from advisor.io.fileio import atomic_write_text

    try:
        atomic_write_text(path, table.to_csv(index=False, lineterminator="\n"))
    except OSError as exc:
        raise UsageError(f"cannot write {path}: {exc.strerror}", field="--csv") from None


def _pct(rate) -> str:
    return "n/a" if rate is None else f"{rate:.0%}"
