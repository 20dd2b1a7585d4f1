"""``advisor replay``: evaluate every row of an archive and report hours, scores and rule changes.

Scores both methods against recorded attempts (``--history``), writes one row per step with
what blocked each method and the key features (``--csv``), and warns when the reference
registry or the history does not cover the replayed period (stderr, and ``warnings`` in JSON).
"""

from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import TextIO

import pandas as pd

from advisor.commands import session
from advisor.errors import UsageError
from advisor.evaluation.evaluate import Scenario
from advisor.evaluation.replay import Attempts, Replayed, attempts_from_history
from advisor.evaluation.replay_stream import decide_chunks, feature_chunks
from advisor.evaluation.replay_table import step_table
from advisor.evaluation.replay_totals import ReplayTotals
from advisor.features import FEATURES_VERSION, STORED_ROW_FEATURES, complete_row_features, feature_source_paths
from advisor.io import featurecache
from advisor.io.archive import ArchiveReader, NeedsWholeRead
from advisor.io.fileio import atomic_writer, refuse_overwrite
from advisor.io.history import read_history
from advisor.rules.ruleset import RuleSet

PROGRESS_BYTES = 10_000_000  # archives this large take more than a second: show progress


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
        "(cache: $ADVISOR_CACHE_DIR/replay, default ~/.cache/advisor/replay)",
    )
    p.set_defaults(func=cmd_replay)


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
    attempts = attempts_from_history(read_history(args.history)) if args.history else None
    ArchiveReader(inputs.feed_path, inputs.feed_layout).check_head()  # before hashing it for the cache
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
    run = _Run(inputs, scenario, rule_sets, attempts, key, use_cache=not args.no_cache, t_from=t_from, t_to=t_to)
    totals = run.totals(args.csv)
    base_scores = totals.scores(0)
    assert totals.first_ns is not None and totals.last_ns is not None  # a replay without rows stopped earlier
    first, last = (pd.Timestamp(t, tz="UTC") for t in (totals.first_ns, totals.last_ns))
    summary = {
        "feed": str(inputs.feed_path),
        "from_utc": first.strftime("%Y-%m-%dT%H:%M:%SZ"),
        "to_utc": last.strftime("%Y-%m-%dT%H:%M:%SZ"),
        "rows": int(totals.rows),
        "target_freq_ghz": inputs.freq_ghz,
        "rules": len(inputs.rules),
        "hours": totals.hours(0),
        "by_month": _table_dict(totals.by_month()),
        "by_local_hour": _table_dict(totals.by_local_hour()),
        "attempts": base_scores,
        "comparison": None,
        **totals.weather(),
    }
    if len(rule_sets) > 1:
        comparison = totals.comparison()
        comparison["hours_b"] = totals.hours(1)
        if attempts is not None:
            comparison["attempts_b"] = totals.scores(1)
        summary["comparison"] = comparison
    warnings = totals.warnings(inputs.registry, base_scores["attempts_covered"] if base_scores else None)
    summary["warnings"] = warnings
    if args.json:
        for warning in warnings:
            print(f"advisor: warning: {warning}", file=sys.stderr)
        print(json.dumps(summary, indent=2, allow_nan=False))
    else:
        from rich.console import Console

        from advisor.views.replay import replay_renderable

        console = Console(highlight=False)
        console.print(replay_renderable(summary, totals.dominant(), console.width))
    return 0


class _Run:
    """One replay: the archive read in parts (or its features from the cache), decided in slices.

    What a part cannot know until the end, the feed's cadence and the gap limit that follows
    from the rows' cadence, is guessed from the first part; when the guess did not hold, the
    replay runs again with the measured values (an archive whose cadence changed over time).
    """

    def __init__(
        self,
        inputs: session.Inputs,
        scenario: Scenario,
        rule_sets: list[RuleSet],
        attempts: Attempts | None,
        key: str,
        use_cache: bool,
        t_from: pd.Timestamp | None,
        t_to: pd.Timestamp | None,
    ) -> None:
        self.inputs, self.scenario, self.rule_sets, self.attempts = inputs, scenario, rule_sets, attempts
        self.key, self.use_cache, self.t_from, self.t_to = key, use_cache, t_from, t_to
        self.feed_cadence_min: float | None = None
        self.whole_read = False
        self.recompute = False  # a cache entry turned out damaged
        self.zone_checked = False
        self.archive: ArchiveReader | None = None

    def totals(self, csv_path: str | None) -> ReplayTotals:
        with _csv_file(csv_path) as fh:
            csv_rows = None if fh is None else _CsvRows(fh)
            gap_limit = None
            for _ in range(5):  # a damaged cache entry, a cadence guess, a whole read, a gap-limit guess
                totals = ReplayTotals(self.rule_sets, self.inputs.site, self.attempts, gap_limit)
                if csv_rows is not None:
                    csv_rows.restart()
                again = self._pass(totals, None if csv_rows is None else csv_rows.write)
                if not again and totals.rows == 0:
                    raise self._no_rows()
                if not again and totals.consistent():
                    return totals
                gap_limit = totals.measured_gap_limit_min()
        raise AssertionError("the replay's cadence did not settle")  # pragma: no cover

    def _no_rows(self) -> UsageError:
        archive = self.archive
        covers = "" if archive is None else f"the archive covers {archive.first_time_utc} to {archive.last_time_utc}"
        return UsageError("no archive rows in the chosen period", field="--from/--to", hint=covers or None)

    def _pass(self, totals: ReplayTotals, write_rows) -> bool:
        """Decide every row once; True when it must be done again (a guess about the feed failed)."""
        entry = featurecache.open_entry(self.key) if self.use_cache and not self.recompute else None
        if entry is not None:
            cached: Iterator[pd.DataFrame] = (
                complete_row_features(stored, self.inputs.site) for stored in entry.chunks()
            )
            try:
                decide_chunks(cached, self.scenario, self.rule_sets, totals, write_rows)
            except featurecache.DamagedEntry:  # removed by the cache: compute the features again
                self.recompute = True
                return True
            return False
        reader = ArchiveReader(
            self.inputs.feed_path,
            self.inputs.feed_layout,
            self.feed_cadence_min,
            stream_above_bytes=2**62 if self.whole_read else None,
        )
        self.archive = reader
        writer = featurecache.Writer(self.key) if self.use_cache else None
        progress = _Progress(self.inputs.feed_path, reader)
        keep = False  # publish the cache entry only when these are the replay's features
        try:
            chunks: Iterator[pd.DataFrame] = feature_chunks(
                self._frames(reader),
                self.inputs.site,
                self.inputs.registry,
                self.t_from,
                self.t_to,
                on_rows=progress.rows_done,
            )
            if writer is not None:
                chunks = _stored_as_they_pass(chunks, writer)
            decide_chunks(chunks, self.scenario, self.rule_sets, totals, write_rows)
            measured = reader.measured_cadence_min()
            if measured != reader.cadence_min:  # the first part's cadence was not the file's
                self.feed_cadence_min = measured
                return True
            keep = totals.rows > 0
            return False
        except NeedsWholeRead:
            self.whole_read = True
            return True
        finally:
            progress.stop()
            if writer is not None and keep:
                writer.commit()
            elif writer is not None:
                writer.abort()

    def _frames(self, reader: ArchiveReader) -> Iterator[pd.DataFrame]:
        """The archive's canonical parts, the first one checked against the computed sun."""
        for frame in reader.frames():
            if not self.zone_checked:
                session.check_feed_zone(reader.feed_of(frame), self.inputs.site, self.inputs.feed_layout)
                self.zone_checked = True
            yield frame


def _stored_as_they_pass(chunks: Iterator[pd.DataFrame], writer) -> Iterator[pd.DataFrame]:
    """The chunks unchanged, each stored in the feature cache on its way."""
    for chunk in chunks:
        writer.add(chunk[list(STORED_ROW_FEATURES)])
        yield chunk


@contextmanager
def _csv_file(path: str | None) -> Iterator[TextIO | None]:
    """``replay --csv``: the file, published whole when the replay ends (None without --csv)."""
    if path is None:
        yield None
        return
    try:
        with atomic_writer(path) as fh:
            yield fh
    except OSError as exc:  # opening, writing or publishing it
        raise UsageError(f"cannot write {path}: {exc.strerror}", field="--csv") from None


class _CsvRows:
    """One row per step, written as the slices are decided; a pass run again starts the file over."""

    def __init__(self, fh: TextIO) -> None:
        self.fh = fh
        self.header = True

    def restart(self) -> None:
        self.fh.seek(0)
        self.fh.truncate()
        self.header = True

    def write(self, decisions) -> None:
        base = decisions[0]
        times = pd.DatetimeIndex(base.features["time"])
        other = decisions[1] if len(decisions) > 1 else None
        table = step_table(
            Replayed(times, base.verdict, base.rule_eval, base),
            None if other is None else Replayed(times, other.verdict, other.rule_eval, other),
        )
        table.to_csv(self.fh, index=False, header=self.header, lineterminator="\n")
        self.header = False


class _Progress:
    """How much of a long archive is read, on stderr when it is a terminal; else nothing."""

    def __init__(self, path, reader: ArchiveReader) -> None:
        self.progress = None
        self.reader = reader
        if not sys.stderr.isatty() or Path(path).stat().st_size < PROGRESS_BYTES:
            return
        from rich.console import Console
        from rich.progress import Progress

        self.progress = Progress(console=Console(stderr=True), transient=True)
        self.task = self.progress.add_task(f"replaying {Path(path).name}", total=100.0)
        self.progress.start()

    def rows_done(self, rows: int) -> None:
        if self.progress is not None:
            self.progress.update(
                self.task, completed=100.0 * self.reader.fraction_read(), description=f"replaying: {rows:,} rows"
            )

    def stop(self) -> None:
        if self.progress is not None:
            self.progress.stop()
            self.progress = None


def _table_dict(table: pd.DataFrame) -> dict:
    return {str(k): {v: round(float(table.loc[k, v]), 2) for v in table.columns} for k in table.index}
