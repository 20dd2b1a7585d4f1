"""Replay: hours per verdict, scoring against attempts, and rule-set comparison."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from advisor.commands.main import main
from advisor.evaluation.replay import Attempts, compare_rule_sets, hours_by, score_attempts, step_hours
from advisor.rules.ruleset import RuleEvaluation
from advisor.vocabulary import VERDICTS

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "example_weather"


def _times(n, step_min=10, start="2026-01-16T00:00:00Z"):
    return pd.date_range(start, periods=n, freq=f"{step_min}min").as_unit("ns")


def test_step_hours_counts_nothing_across_a_gap():
    times = _times(6).delete(3)  # a 20-minute hole between rows 2 and 3
    hours = step_hours(times, max_gap_min=15)
    assert hours.tolist() == pytest.approx([10 / 60, 10 / 60, 0.0, 10 / 60, 10 / 60])


def test_hours_by_sums_and_keeps_every_verdict_column():
    verdict = np.array(["scan", "scan", "postpone", "scan"], dtype=object)
    table = hours_by(verdict, np.full(4, 0.5), ["a", "b", "a", "a"])
    assert list(table.columns) == list(VERDICTS)
    assert {"scan", "astronomical", "postpone", "undetermined"} <= set(table.columns)
    assert table.loc["a", "scan"] == 1.0 and table.loc["a", "postpone"] == 0.5 and table.loc["b", "scan"] == 0.5


def test_false_go_and_missed_against_attempts():
    """Without feasibility masks, 'go' is the call naming the method."""
    times = _times(6)
    verdict = np.array(["scan", "scan", "astronomical", "astronomical", "scan", "postpone"], dtype=object)
    fired = {"windy": np.array([False, True, True, False, False, False])}
    attempts = Attempts(
        times_utc=times[[0, 1, 2, 3, 5]] + pd.Timedelta(minutes=2),
        method=np.array(["scan", "scan", "scan", "astronomical", "scan"]),
        usable=np.array([True, False, True, True, False]),
        source="test",
    )
    score = score_attempts(times, verdict, RuleEvaluation(fired, {}), attempts, max_age_min=15)
    scan = score["methods"]["scan"]
    assert scan["attempts"] == 4 and scan["usable"] == 2
    assert scan["allowed"] == scan["advised"] == 2  # rows 0 and 1
    assert scan["false_go"] == 1 and scan["false_go_rate"] == 0.5  # row 1 failed
    assert scan["missed"] == 1 and scan["missed_rate"] == 0.5  # row 2
    windy = next(r for r in scan["per_rule"] if r["rule"] == "windy")
    assert windy == {
        "rule": "windy",
        "attempts_when_fired": 2,
        "failed_when_fired": 1,
        "false_go_when_fired": 1,
        "missed_when_fired": 1,
    }
    astro = score["methods"]["astronomical"]
    assert astro["attempts"] == 1 and astro["allowed"] == 1 and astro["false_go"] == 0 and astro["missed"] == 0
    assert astro["per_rule"] == []  # 'windy' did not fire at row 3


def test_both_methods_are_scored_by_what_the_advice_allowed():
    """With feasibility masks, a method is 'go' wherever it was feasible, even when the other was
    the call; each method's per-rule table lists only the rules that concern it."""
    times = _times(4)
    verdict = np.array(["scan", "scan", "astronomical", "postpone"], dtype=object)
    feasible = {
        "scan": np.array([True, True, True, False]),  # row 2: scan feasible, not the call
        "astronomical": np.array([True, False, True, False]),
    }
    fired = {"fog": np.array([False, True, False, True]), "calibrator_low": np.array([False, True, False, True])}
    attempts = Attempts(
        times_utc=times + pd.Timedelta(minutes=1),
        method=np.array(["astronomical", "astronomical", "scan", "scan"]),
        usable=np.array([False, True, True, True]),
        source="test",
    )
    score = score_attempts(
        times,
        verdict,
        RuleEvaluation(fired, {}),
        attempts,
        15,
        feasible,
        {"fog": "scan", "calibrator_low": "astronomical"},
    )
    scan, astro = score["methods"]["scan"], score["methods"]["astronomical"]
    assert (scan["allowed"], scan["advised"], scan["false_go"], scan["missed"]) == (1, 0, 0, 1)
    assert scan["missed_rate"] == 0.5 and scan["false_go_rate"] == 0.0
    assert (astro["allowed"], astro["false_go"], astro["missed"]) == (1, 1, 1)
    assert astro["false_go_rate"] == 1.0 and astro["missed_rate"] == 1.0
    assert [r["rule"] for r in scan["per_rule"]] == ["fog"]
    assert [r["rule"] for r in astro["per_rule"]] == ["calibrator_low"]


def test_attempts_outside_the_archive_are_not_scored():
    times = _times(3)
    attempts = Attempts(
        pd.DatetimeIndex([times[-1] + pd.Timedelta(hours=5)]), np.array(["scan"]), np.array([True]), "test"
    )
    score = score_attempts(times, np.array(["scan"] * 3, dtype=object), RuleEvaluation({}, {}), attempts)
    assert score["attempts_covered"] == 0 and score["methods"]["scan"]["missed_rate"] is None


def test_compare_attributes_changes_to_the_rule_that_differs():
    a = np.array(["astronomical", "astronomical", "scan"], dtype=object)
    b = np.array(["scan", "astronomical", "scan"], dtype=object)
    eval_a = RuleEvaluation({"fog_blinds_laser": np.array([True, True, False])}, {})
    eval_b = RuleEvaluation({}, {})  # the rule is disabled in B
    result = compare_rule_sets(a, b, eval_a, eval_b, np.full(3, 0.25))
    assert result["hours_changed"] == 0.25
    assert result["transitions"] == [{"from": "astronomical", "to": "scan", "hours": 0.25}]
    assert result["by_rule"] == [{"rule": "fog_blinds_laser", "hours_changed": 0.25}]


@pytest.fixture()
def sample_args():
    return [
        "replay",
        "--site",
        str(DEMO / "larch_basin.yaml"),
        "--feed",
        str(DEMO / "larch_basin_archive_sample.csv"),
        "--references",
        str(DEMO / "larch_basin_archive_references.csv"),
        "--from",
        "2026-01-10T00:00:00Z",
        "--to",
        "2026-01-20T00:00:00Z",
    ]


def test_replay_sample_json_hours_add_up(capsys, sample_args):
    assert main(sample_args + ["--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    total = sum(doc["hours"].values())
    assert total == pytest.approx(10 * 24, abs=0.1)
    by_month = sum(sum(m.values()) for m in doc["by_month"].values())
    assert by_month == pytest.approx(total, abs=1e-6)


def test_replay_compare_rules_disabling_fog_rule(capsys, tmp_path, sample_args):
    override = tmp_path / "no_fog.yaml"
    override.write_text("rules:\n  - id: fog_blinds_laser\n    enabled: false\n")
    assert main(sample_args + ["--compare-rules", str(override), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    comp = doc["comparison"]
    # Only scan can gain when a scan-blocking rule is disabled.
    assert all(t["to"] == "scan" for t in comp["transitions"])
    assert all(r["rule"] == "fog_blinds_laser" for r in comp["by_rule"])
    assert comp["hours_b"]["scan"] >= doc["hours"]["scan"]


def test_replay_csv_export(tmp_path, sample_args):
    out = tmp_path / "steps.csv"
    assert main(sample_args + ["--csv", str(out), "--json"]) == 0
    table = pd.read_csv(out, dtype=str, keep_default_na=False)
    for column in (
        "time",
        "verdict",
        "blocked_by_scan",
        "blocked_by_astronomical",
        "p_usable_scan",
        "surface_rms_um_astronomical",
        "odds_extrapolated_scan",
        "wind_gust_ms",
        "dew_point_spread_c",
        "reference_age_h",
        "fog",
        "data_ok",
    ):
        assert column in table.columns, column
    assert set(table["verdict"]) <= {"scan", "astronomical", "postpone", "undetermined"}
    assert table["time"].str.endswith("Z").all()
    for flag in ("fog", "data_ok", "has_reference", "odds_extrapolated_scan"):
        assert set(table[flag]) <= {"true", "false"}, flag
    # a method is blocked exactly where the replay found it infeasible for a stated reason
    postponed = table[table["verdict"] == "postpone"]
    assert len(postponed) and (postponed["blocked_by_scan"] != "").all()
    scanned = table[table["verdict"] == "scan"]
    assert len(scanned) and (scanned["blocked_by_scan"] == "").all()
    tokens = {t for cell in table["blocked_by_scan"] for t in cell.split(";") if t}
    assert tokens and tokens <= {*_rule_ids(), "efficiency.min", "target.unreachable", "model.scan", "data"}


def _rule_ids() -> set[str]:
    from advisor.features import CATALOGUE
    from advisor.rules.loader import default_rule_files, load_rules

    return {r.id for r in load_rules([(p, "default") for p in default_rule_files()], CATALOGUE)}


def test_replay_without_feed_is_usage_error(capsys):
    assert main(["replay"]) == 2
    assert "--feed" in capsys.readouterr().err


def test_replay_scores_the_demo_history(capsys):
    """The history file that trains the model is the same one replay scores against: both methods."""
    argv = [
        "replay",
        "--site",
        str(DEMO / "larch_basin.yaml"),
        "--feed",
        str(DEMO / "larch_basin_archive_sample.csv"),
        "--references",
        str(DEMO / "larch_basin_archive_references.csv"),
        "--history",
        str(DEMO / "larch_basin_history.csv"),
        "--json",
    ]
    assert main(argv) == 0
    attempts = json.loads(capsys.readouterr().out)["attempts"]
    history = pd.read_csv(DEMO / "larch_basin_history.csv")
    in_period = history[(history["time"] >= "2026-01-01") & (history["time"] < "2026-03-01T00:05")]
    assert attempts["attempts_covered"] == len(in_period)
    for method in ("scan", "astronomical"):
        m = attempts["methods"][method]
        assert m["attempts"] == int((in_period["method"] == method).sum()) > 0
        assert m["usable"] == int(((in_period["method"] == method) & (in_period["usable"] == "yes")).sum())
        assert m["false_go"] <= m["allowed"] <= m["attempts"]
        assert 0.0 <= (m["missed_rate"] or 0.0) <= 1.0


def test_replay_warns_when_the_registry_does_not_cover_the_period(capsys, sample_args):
    """The demo week's registry starts in November 2026: replaying January with it leaves the
    laser without a reference the whole time, and replay says so instead of a silent 'scan 0 h'."""
    argv = [a for a in sample_args]
    argv[argv.index("--references") + 1] = str(DEMO / "references.csv")
    assert main(argv + ["--json"]) == 0
    captured = capsys.readouterr()
    doc = json.loads(captured.out)
    assert doc["hours"]["scan"] == 0.0
    assert len(doc["warnings"]) == 1 and "no reference scan is in force" in doc["warnings"][0]
    assert "(100%)" in doc["warnings"][0] and "advisor: warning:" in captured.err
    assert main(sample_args + ["--json"]) == 0  # the archive's own registry covers it
    assert json.loads(capsys.readouterr().out)["warnings"] == []


def test_replay_warns_when_the_history_does_not_cover_the_period(capsys, sample_args, tmp_path):
    history = tmp_path / "attempts.csv"
    history.write_text("time,method,usable\n2026-01-19T03:00:00Z,scan,yes\n2026-01-19T05:00:00Z,astronomical,no\n")
    assert main(sample_args + ["--history", str(history), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert any("have no attempt to score against" in w and "2 attempts only" in w for w in doc["warnings"])
    late = tmp_path / "late.csv"
    late.write_text("time,method,usable\n2026-06-19T03:00:00Z,scan,yes\n")
    assert main(sample_args + ["--history", str(late), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert any("falls in the replayed period" in w and "nothing to score" in w for w in doc["warnings"])


def test_one_pass_over_two_rule_sets_equals_two_replays(demo_site, default_rules, tmp_path):
    """--compare-rules computes the features once; the verdicts must equal separate replays."""
    from advisor.commands.session import load_ruleset
    from advisor.evaluation.evaluate import Scenario
    from advisor.features import row_features_chunked
    from advisor.io.feed import read_feed
    from advisor.io.references import read_registry
    from advisor.io.site import load_site

    site = load_site(DEMO / "larch_basin.yaml")
    override = tmp_path / "no_fog.yaml"
    override.write_text("rules:\n  - id: fog_blinds_laser\n    enabled: false\n")
    other = load_ruleset(site, [str(override)])
    feed = read_feed(DEMO / "larch_basin_archive_sample.csv", site.feed)
    frame = feed.frame.iloc[:3000]
    times = pd.DatetimeIndex(frame["time"])
    registry = read_registry(DEMO / "larch_basin_archive_references.csv")
    scenario = Scenario(site, registry, default_rules, 86.0)
    both = scenario.decide(row_features_chunked(frame, times, site, registry, chunk_rows=1000), [default_rules, other])
    for rules, got in zip((default_rules, other), both):
        (alone,) = scenario.decide(row_features_chunked(frame, times, site, registry, chunk_rows=700), [rules])
        assert np.array_equal(alone.verdict, got.verdict)
        assert all(np.array_equal(alone.rule_eval.fired[k], got.rule_eval.fired[k]) for k in alone.rule_eval.fired)


def _cache_files():
    import os

    folder = Path(os.environ["ADVISOR_CACHE_DIR"]) / "replay"
    # an entry is a directory named by its key (writers' temporaries start with a dot)
    return sorted(p for p in folder.iterdir() if p.is_dir() and not p.name.startswith(".")) if folder.exists() else []


def test_second_replay_reuses_the_features_and_gives_the_same_answer(capsys, tmp_path, monkeypatch, sample_args):
    monkeypatch.setenv("ADVISOR_CACHE_DIR", str(tmp_path / "cache"))
    assert main(sample_args + ["--json"]) == 0
    cold = json.loads(capsys.readouterr().out)
    assert len(_cache_files()) == 1

    import advisor.commands.replay as cli_replay

    def no_reading(*_a, **_k):
        raise AssertionError("the archive was read again")

    monkeypatch.setattr(cli_replay.ArchiveReader, "frames", no_reading)
    assert main(sample_args + ["--json"]) == 0
    assert json.loads(capsys.readouterr().out) == cold


def test_cache_key_follows_the_inputs(capsys, tmp_path, monkeypatch, sample_args):
    monkeypatch.setenv("ADVISOR_CACHE_DIR", str(tmp_path / "cache"))
    refs = tmp_path / "refs.csv"
    refs.write_bytes((DEMO / "larch_basin_archive_references.csv").read_bytes())
    args = [a if a != str(DEMO / "larch_basin_archive_references.csv") else str(refs) for a in sample_args]
    assert main(args + ["--json"]) == 0
    first = json.loads(capsys.readouterr().out)
    with refs.open("a") as fh:  # a new reference scan changes the features: a new entry
        fh.write("2026-01-12T01:00:00Z,-20.0,new\n")
    assert main(args + ["--json"]) == 0
    second = json.loads(capsys.readouterr().out)
    assert len(_cache_files()) == 2
    assert first != second
    # Another frequency reuses the entry: the row features do not depend on the target.
    import advisor.commands.replay as cli_replay

    def no_reading(*_a, **_k):
        raise AssertionError("the archive was read again for another frequency")

    monkeypatch.setattr(cli_replay.ArchiveReader, "frames", no_reading)
    assert main(args + ["--freq", "43", "--json"]) == 0
    at_43 = json.loads(capsys.readouterr().out)
    assert len(_cache_files()) == 2
    assert at_43["target_freq_ghz"] == 43.0 and at_43["hours"] != second["hours"]


def test_damaged_cache_entry_is_recomputed(capsys, tmp_path, monkeypatch, sample_args):
    monkeypatch.setenv("ADVISOR_CACHE_DIR", str(tmp_path / "cache"))
    assert main(sample_args + ["--json"]) == 0
    good = json.loads(capsys.readouterr().out)
    (entry,) = _cache_files()
    biggest = max(entry.iterdir(), key=lambda p: p.stat().st_size)
    size = biggest.stat().st_size
    biggest.write_bytes(biggest.read_bytes()[: size // 2])  # truncated
    assert main(sample_args + ["--json"]) == 0
    assert json.loads(capsys.readouterr().out) == good
    assert _cache_files() == [entry] and biggest.stat().st_size == size


def test_no_cache_writes_nothing(capsys, tmp_path, monkeypatch, sample_args):
    monkeypatch.setenv("ADVISOR_CACHE_DIR", str(tmp_path / "cache"))
    assert main(sample_args + ["--no-cache", "--json"]) == 0
    assert _cache_files() == []
