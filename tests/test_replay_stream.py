"""A replay streamed in parts equals the whole replay: archive parts, feature chunks, slices, totals.

The reference is the whole-array path (read the archive whole, row features of every row,
decisions of every row, then the summaries over the full arrays), written out below as the
replay command computed it before it streamed.  The streamed command runs with small parts,
feature chunks and decision slices so that many edges fall inside the demo archive, and on
archives made messy on purpose: gaps, a spike, a sensor that falls silent, a cadence that
changes (the first part's guess is wrong), rows out of order and repeated (read whole instead).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import advisor.evaluation.replay_stream as replay_stream
import advisor.io.archive as archive
from advisor.commands import session
from advisor.commands.main import build_parser, main
from advisor.evaluation.evaluate import Scenario
from advisor.evaluation.replay import (
    Replayed,
    attempts_from_history,
    compare_rule_sets,
    dominant_by_month_hour,
    hours_by,
    month_keys,
    score_attempts,
    step_hours,
    weather_hours,
)
from advisor.evaluation.replay_table import coverage_warnings, step_table
from advisor.features import row_features_chunked
from advisor.io.archive import ArchiveReader, NeedsWholeRead
from advisor.io.feed import read_feed
from advisor.io.history import read_history
from advisor.vocabulary import VERDICTS

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "example_weather"
SITE = DEMO / "larch_basin.yaml"
SAMPLE = DEMO / "larch_basin_archive_sample.csv"
REFS = DEMO / "larch_basin_archive_references.csv"
HISTORY = DEMO / "larch_basin_history.csv"
FEATURE_CHUNK = 2_503  # small, so that feature chunks end inside the archive


@pytest.fixture()
def small_parts(monkeypatch):
    """Stream every archive in parts of 1,777 rows, feature chunks of 2,503, slices of ~300 rows."""
    monkeypatch.setattr(archive, "STREAM_ABOVE_BYTES", 0)
    monkeypatch.setattr(archive, "ARCHIVE_PART_ROWS", 1_777)
    monkeypatch.setattr(replay_stream, "FEATURE_CHUNK_ROWS", FEATURE_CHUNK)
    monkeypatch.setattr(replay_stream, "DECIDE_CELLS", 12_000)


def _messy(tmp_path: Path, *, cadence_change=False, out_of_order=False, repeat=False) -> Path:
    """The demo archive with faults: a gap, a wind spike, visibility silent for a while; optionally
    a first stretch at 10 min (the first part's cadence is not the file's), a swapped pair of
    rows, an exactly repeated row."""
    table = pd.read_csv(SAMPLE, dtype=str, keep_default_na=False)
    table.loc[5000, "wind_avg_kn"] = "60.0"  # a spike and its return: step test
    table.loc[7000:7100, "vis_m"] = ""  # a sensor that was reporting falls silent
    table = table.drop(index=range(3000, 3040))  # a 3-hour gap
    if cadence_change:
        table = table.drop(index=range(1, 2900, 2))  # the first ~10 days every 10 min
    table = table.reset_index(drop=True)
    if out_of_order:
        table.iloc[[8000, 8001]] = table.iloc[[8001, 8000]].to_numpy()
    if repeat:
        table = pd.concat([table.iloc[:6001], table.iloc[6000:]], ignore_index=True)
    path = tmp_path / "messy_archive.csv"
    table.to_csv(path, index=False, lineterminator="\n")
    return path


def _args(feed: Path, *extra: str) -> list[str]:
    return ["replay", "--site", str(SITE), "--feed", str(feed), "--references", str(REFS), "--no-cache", *extra]


def _whole_replay(argv: list[str]) -> tuple[dict, pd.DataFrame]:
    """The summary and per-row table of the whole-array replay (what the command computed before it
    streamed), for the same arguments."""
    args = build_parser().parse_args(argv)
    request = session.request_from(args)
    inputs = session.load_inputs(request, read=None)
    zone = inputs.site.time_zone
    t_from = session.parse_time(args.time_from, "--from")
    t_to = session.parse_time(args.time_to, "--to")
    scenario = Scenario(inputs.site, inputs.registry, inputs.rules, inputs.freq_ghz, inputs.odds)
    rule_sets = [inputs.rules]
    if args.compare_rules:
        rule_sets.append(session.load_ruleset(inputs.site, [*request.rule_files, *args.compare_rules]))
    feed = read_feed(inputs.feed_path, inputs.feed_layout)
    frame = feed.frame[feed.frame["kind"] == "observed"]
    times = pd.DatetimeIndex(frame["time"]).as_unit("ns")
    keep = np.ones(len(times), dtype=bool)
    if t_from is not None:
        keep &= times >= t_from.resolve(zone)
    if t_to is not None:
        keep &= times <= t_to.resolve(zone)
    features = row_features_chunked(frame, times[keep], inputs.site, inputs.registry, chunk_rows=FEATURE_CHUNK)
    times_all = pd.DatetimeIndex(features["time"])
    base, *rest = [Replayed(times_all, d.verdict, d.rule_eval, d) for d in scenario.decide(features, rule_sets)]
    other = rest[0] if rest else None
    times = base.times_utc
    cadence = features["feed_cadence_min"].to_numpy(dtype=float)
    cadence_min = float(np.nanmedian(cadence)) if np.isfinite(cadence).any() else None
    layout = inputs.site.feed
    hours = step_hours(times, float(layout.gap_limit_min(cadence_min)))
    age_limit = float(layout.age_limit_min(cadence_min))
    local = times.tz_convert(zone)

    def table(t: pd.DataFrame) -> dict:
        return {str(k): {v: round(float(t.loc[k, v]), 2) for v in t.columns} for k in t.index}

    def hours_dict(verdict) -> dict:
        return {v: round(float(hours[verdict == v].sum()), 2) for v in VERDICTS}

    def score(replayed) -> dict:
        applies = {r.id: r.applies_to for r in replayed.decisions.rules}
        return score_attempts(
            replayed.times_utc, replayed.verdict, replayed.rule_eval, attempts, age_limit, replayed.feasible, applies
        )

    summary = {
        "feed": str(inputs.feed_path),
        "from_utc": times[0].strftime("%Y-%m-%dT%H:%M:%SZ"),
        "to_utc": times[-1].strftime("%Y-%m-%dT%H:%M:%SZ"),
        "rows": int(len(times)),
        "target_freq_ghz": inputs.freq_ghz,
        "rules": len(inputs.rules),
        "hours": hours_dict(base.verdict),
        "by_month": table(hours_by(base.verdict, hours, month_keys(local))),
        "by_local_hour": table(hours_by(base.verdict, hours, local.hour)),
        "attempts": None,
        "comparison": None,
        **weather_hours(features, base.verdict, hours, inputs.site.thresholds.high_frequency_wind_limit_ms),
    }
    attempts, scores = None, None
    if args.history:
        attempts = attempts_from_history(read_history(args.history))
        scores = summary["attempts"] = score(base)
    if other is not None:
        comparison = compare_rule_sets(base.verdict, other.verdict, base.rule_eval, other.rule_eval, hours)
        comparison["hours_b"] = hours_dict(other.verdict)
        if attempts is not None:
            comparison["attempts_b"] = score(other)
        summary["comparison"] = comparison
    summary["warnings"] = coverage_warnings(
        times, hours, features, inputs.registry, attempts, scores["attempts_covered"] if scores else None
    )
    dominant = dominant_by_month_hour(base.verdict, hours, local)
    return summary, step_table(base, other), dominant


def _streamed(argv: list[str], capsys) -> dict:
    assert main([*argv, "--json"]) == 0
    return json.loads(capsys.readouterr().out)


# --------------------------------------------------------------------------- the archive reader
#: 6,963 puts a part's edge three rows into the silence of the visibility sensor (file rows
#: 6,960 on, after the gap): the dropout flags there need the reports before the edge.
@pytest.mark.parametrize("part_rows", [113, 1_777, 6_963, 40_000])
def test_archive_parts_concatenate_to_the_whole_read(tmp_path, part_rows):
    feed = _messy(tmp_path)
    layout = session.load_inputs(session.request_from(build_parser().parse_args(_args(feed))), read=None).feed_layout
    whole = read_feed(feed, layout)
    reader = ArchiveReader(feed, layout, whole.quality.cadence_min, part_rows=part_rows, stream_above_bytes=0)
    parts = list(reader.frames())
    assert len(parts) == -(-len(pd.read_csv(feed)) // part_rows)
    # a part without implausible values has no raw_<name> column: its rows have none to keep
    streamed = pd.concat(parts, ignore_index=True).reindex(columns=whole.frame.columns)
    pd.testing.assert_frame_equal(streamed, whole.frame, check_exact=True)
    assert reader.measured_cadence_min() == whole.quality.cadence_min
    assert (reader.rows, reader.first_time_utc, reader.last_time_utc) == (
        whole.quality.n_rows,
        whole.quality.first_time_utc,
        whole.quality.last_time_utc,
    )


def test_archive_reader_measures_the_whole_files_cadence_when_the_first_part_misleads(tmp_path):
    feed = _messy(tmp_path, cadence_change=True)
    layout = session.load_inputs(session.request_from(build_parser().parse_args(_args(feed))), read=None).feed_layout
    whole = read_feed(feed, layout)
    reader = ArchiveReader(feed, layout, part_rows=1_000, stream_above_bytes=0)
    list(reader.frames())
    assert reader.cadence_min == 10.0  # the first part's guess
    assert reader.measured_cadence_min() == whole.quality.cadence_min == 5.0


def _as_json_lines(csv_path: Path, drop_key_after: int | None = None) -> Path:
    """The archive as JSON Lines (numbers as numbers, an empty cell as a missing key)."""
    table = pd.read_csv(csv_path)
    lines = []
    for i, row in enumerate(table.to_dict(orient="records")):
        row = {k: v for k, v in row.items() if not (isinstance(v, float) and np.isnan(v))}
        if drop_key_after is not None and i < drop_key_after:
            row.pop("vis_m", None)  # the visibility key first appears later in the file
        lines.append(json.dumps(row))
    path = csv_path.with_suffix(".jsonl")
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


@pytest.mark.parametrize("part_rows", [1_777, 6_963])
def test_json_lines_parts_concatenate_to_the_whole_read(tmp_path, part_rows):
    feed = _as_json_lines(_messy(tmp_path))
    layout = session.load_inputs(session.request_from(build_parser().parse_args(_args(feed))), read=None).feed_layout
    whole = read_feed(feed, layout)
    reader = ArchiveReader(feed, layout, whole.quality.cadence_min, part_rows=part_rows, stream_above_bytes=0)
    streamed = pd.concat(list(reader.frames()), ignore_index=True).reindex(columns=whole.frame.columns)
    pd.testing.assert_frame_equal(streamed, whole.frame, check_exact=True)


def test_json_lines_with_a_key_that_appears_late_are_read_whole(tmp_path, capsys, small_parts):
    feed = _as_json_lines(_messy(tmp_path), drop_key_after=5_000)
    layout = session.load_inputs(session.request_from(build_parser().parse_args(_args(feed))), read=None).feed_layout
    with pytest.raises(NeedsWholeRead):
        list(ArchiveReader(feed, layout, part_rows=1_000, stream_above_bytes=0).frames())
    argv = _args(feed)
    expected, _, _ = _whole_replay(argv)
    assert _streamed(argv, capsys) == expected


@pytest.mark.parametrize("fault", ["out_of_order", "repeat"])
def test_archive_reader_asks_for_a_whole_read_when_rows_are_out_of_order_or_repeated(tmp_path, fault):
    feed = _messy(tmp_path, **{fault: True})
    layout = session.load_inputs(session.request_from(build_parser().parse_args(_args(feed))), read=None).feed_layout
    with pytest.raises(NeedsWholeRead):
        list(ArchiveReader(feed, layout, part_rows=1_000, stream_above_bytes=0).frames())


def test_archive_errors_name_the_file_line_as_a_whole_read_does(tmp_path, capsys, small_parts, monkeypatch):
    lines = SAMPLE.read_text(encoding="utf-8").splitlines(keepends=True)
    fields = lines[9001].split(",")
    fields[3] = "warm"  # temp_f of file line 9002
    lines[9001] = ",".join(fields)
    bad = tmp_path / "bad.csv"
    bad.write_text("".join(lines), encoding="utf-8")
    assert main(_args(bad)) == 2
    streamed_error = capsys.readouterr().err
    monkeypatch.setattr(archive, "STREAM_ABOVE_BYTES", 10**12)
    assert main(_args(bad)) == 2
    assert capsys.readouterr().err == streamed_error
    assert ":9002:" in streamed_error


# --------------------------------------------------------------------------- the replay
CASES = {
    "demo": {},
    "messy": {"messy": {}},
    "cadence_change": {"messy": {"cadence_change": True}},
    "out_of_order": {"messy": {"out_of_order": True}},
    "repeat": {"messy": {"repeat": True}},
}


@pytest.mark.parametrize("case", list(CASES))
def test_streamed_replay_equals_the_whole_replay(tmp_path, capsys, small_parts, case):
    spec = CASES[case]
    feed = _messy(tmp_path, **spec["messy"]) if "messy" in spec else SAMPLE
    extra = ["--history", str(HISTORY), "--compare-rules", str(ROOT / "rules" / "wind.yaml")]
    tighter = tmp_path / "tighter.yaml"
    tighter.write_text(
        "rules:\n  - id: calm_only\n    applies_to: both\n    condition: wind_mean_ms > 3\n    effect: block\n"
        "    message: calmer than 3 m/s only\n",
        encoding="utf-8",
    )
    extra[-1] = str(tighter)
    csv_path = tmp_path / "steps.csv"
    argv = _args(feed, *extra)
    expected, expected_table, _ = _whole_replay(argv)
    assert _streamed([*argv, "--csv", str(csv_path)], capsys) == expected
    written = pd.read_csv(csv_path, dtype=str, keep_default_na=False)
    reference = pd.read_csv(
        __import__("io").StringIO(expected_table.to_csv(index=False, lineterminator="\n")),
        dtype=str,
        keep_default_na=False,
    )
    pd.testing.assert_frame_equal(written, reference)
    assert expected["comparison"]["hours_changed"] > 0  # the comparison has something to compare


def test_streamed_replay_of_a_period_equals_the_whole_replay(capsys, small_parts):
    argv = _args(SAMPLE, "--from", "2026-01-10T00:00:00Z", "--to", "2026-02-03T06:00:00Z")
    expected, _, _ = _whole_replay(argv)
    assert _streamed(argv, capsys) == expected


def test_the_dominant_verdict_table_equals_the_whole_replays(small_parts):
    from advisor.commands.replay import _Run  # the command's own pass, without the printing

    argv = _args(SAMPLE)
    args = build_parser().parse_args(argv)
    request = session.request_from(args)
    inputs = session.load_inputs(request, read=None)
    scenario = Scenario(inputs.site, inputs.registry, inputs.rules, inputs.freq_ghz, inputs.odds)
    run = _Run(inputs, scenario, [inputs.rules], None, "unused", use_cache=False, t_from=None, t_to=None)
    totals = run.totals(None)
    _, _, expected = _whole_replay(argv)
    pd.testing.assert_frame_equal(totals.dominant(), expected)


def test_streamed_json_lines_replay_equals_the_whole_replay(tmp_path, capsys, small_parts):
    argv = _args(_as_json_lines(_messy(tmp_path)), "--history", str(HISTORY))
    expected, _, _ = _whole_replay(argv)
    assert _streamed(argv, capsys) == expected


HEADER = "time,wind_mean_ms,wind_gust_ms,air_temp_c,rel_humidity_pct\n"
ROWS = "".join(f"2026-01-01T{h:02d}:{m:02d}:00Z,1.5,2.5,-3.0,60\n" for h in range(3) for m in range(0, 60, 10))
BAD_FILES = {
    "header_only.csv": HEADER,
    "line_in_progress.csv": HEADER + "2026-01-01T00:00:00Z,1,2,3,50",
    "word_for_a_number.csv": HEADER + ROWS + "2026-01-01T03:00:00Z,calm,2.5,-3.0,60\n",
    "extra_field.csv": HEADER + ROWS + "2026-01-01T03:00:00Z,1.5,2.5,-3.0,60,9\n",
    "column_twice.csv": HEADER.replace("air_temp_c", "wind_mean_ms") + ROWS,
    "backwards.csv": HEADER + "".join(reversed(ROWS.splitlines(keepends=True))),
    "bad_json.jsonl": '{"time": "2026-01-01T00:00:00Z", "wind_mean_ms": 1}\n{"time": oops}\n',
    "blank.jsonl": "\n\n",
}


@pytest.mark.parametrize("name", list(BAD_FILES))
def test_a_bad_archive_gets_the_same_one_line_error_streamed_or_read_whole(tmp_path, capsys, monkeypatch, name):
    path = tmp_path / name
    path.write_text(BAD_FILES[name], encoding="utf-8")
    argv = ["replay", "--feed", str(path), "--no-cache", "--json"]
    monkeypatch.setattr(archive, "ARCHIVE_PART_ROWS", 7)
    monkeypatch.setattr(archive, "STREAM_ABOVE_BYTES", 0)
    assert main(argv) == 2
    streamed = capsys.readouterr().err
    monkeypatch.setattr(archive, "STREAM_ABOVE_BYTES", 10**12)
    assert main(argv) == 2
    assert capsys.readouterr().err == streamed
    assert len(streamed.strip().splitlines()) == 1 and "Traceback" not in streamed
