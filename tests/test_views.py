"""The presentation layer and the pieces split out for it: views read the vocabulary, the state
folder writes whatever it is given, replay's heat strip shows what the computation found."""

from __future__ import annotations

import io
import json
from datetime import datetime, timezone

import numpy as np
import pandas as pd
import pytest

from advisor.evaluation.replay import dominant_by_month_hour
from advisor.io import statedir
from advisor.views.callparts import SEVERITY
from advisor.views.replay import heat_strip
from advisor.vocabulary import LETTERS, REASON_EFFECTS

NOW = datetime(2026, 12, 1, 3, 0, tzinfo=timezone.utc)


def test_reasons_are_ordered_by_every_effect_a_reason_can_carry():
    assert sorted(SEVERITY) == sorted(REASON_EFFECTS) and SEVERITY[0] == "block"


# --- replay: computation gives verdicts, the view gives letters ----------------------------
def _local_hours(spec):
    """(local times, verdicts, hours): one row per (month day, hour, verdict, hours) of ``spec``."""
    times = pd.DatetimeIndex([pd.Timestamp(t, tz="America/Denver") for t, _, _ in spec])
    return times, np.array([v for _, v, _ in spec], dtype=object), np.array([h for _, _, h in spec])


def test_dominant_verdict_per_month_and_local_hour():
    times, verdict, hours = _local_hours(
        [
            ("2026-01-31 05:00", "scan", 1.0),
            ("2026-01-30 05:00", "postpone", 0.5),  # scan wins 05h in Jan
            ("2026-02-01 05:00", "astronomical", 0.2),
            ("2026-02-02 05:10", "postpone", 0.1),
            ("2026-02-03 23:00", "undetermined", 1.0),
        ]
    )
    table = dominant_by_month_hour(verdict, hours, times)
    assert list(table.index) == ["2026-01", "2026-02"] and list(table.columns) == list(range(24))
    assert table.loc["2026-01", 5] == "scan" and table.loc["2026-02", 5] == "astronomical"
    assert table.loc["2026-02", 23] == "undetermined"
    assert (table.loc["2026-01"] == "").sum() == 23  # one hour of January has hours at all


def test_heat_strip_shows_vocabulary_letters_and_a_dot_where_there_are_no_hours():
    from rich.console import Console

    times, verdict, hours = _local_hours([("2026-01-31 05:00", "scan", 1.0), ("2026-01-31 06:00", "postpone", 1.0)])
    console = Console(file=io.StringIO(), width=80, color_system=None)
    console.print(heat_strip(dominant_by_month_hour(verdict, hours, times)))
    [line] = [t for t in console.file.getvalue().splitlines() if t.startswith("2026-01")]
    assert line == "2026-01  " + "·" * 5 + LETTERS["scan"] + LETTERS["postpone"] + "·" * 17


# --- the state folder knows nothing of verdicts ----------------------------------------------
def test_state_folder_publishes_any_files_in_order_with_one_history_line(tmp_path):
    with statedir.locked(tmp_path, 1.0):
        state, warning = statedir.read_state(tmp_path, NOW, int)
        assert (state, warning) == (None, None)
        files = {"page.txt": "hello\n", statedir.STATE_FILE: "41"}
        assert statedir.publish(tmp_path, files, {"n": 1}, history_max_bytes=10_000) == []
        assert statedir.read_state(tmp_path, NOW, int) == (41, None)
    assert (tmp_path / "page.txt").read_text() == "hello\n"
    lines = (tmp_path / statedir.HISTORY_FILE).read_text().splitlines()
    assert [json.loads(line) for line in lines] == [{"n": 1}]
    assert not list(tmp_path.glob(".*.tmp"))


def test_state_the_parser_rejects_is_set_aside_with_a_warning(tmp_path):
    (tmp_path / statedir.STATE_FILE).write_text("not a number")
    state, warning = statedir.read_state(tmp_path, NOW, int)
    assert state is None and "corrupted or truncated state file" in warning
    assert [p.name for p in tmp_path.iterdir()] == ["state.json.corrupt-20261201T030000Z"]


def test_a_failed_publish_renames_nothing(tmp_path):
    (tmp_path / statedir.STATE_FILE).write_text("1")

    with pytest.raises(TypeError):  # a record JSON cannot hold: the history append fails
        statedir.publish(tmp_path, {"page.txt": "new", statedir.STATE_FILE: "2"}, {"bad": object()}, 10_000)
    assert (tmp_path / statedir.STATE_FILE).read_text() == "1" and not (tmp_path / "page.txt").exists()
    assert not list(tmp_path.glob(".*.tmp"))
