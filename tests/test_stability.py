"""A stable call: a change of preference is announced only when it holds; a block switches at once.

No physics here: the sequences are made up to put the tracker in known states, and the demo
feed (invented) only gives a realistic mix of changes to count.
"""

from __future__ import annotations

import importlib.util
from pathlib import Path

import numpy as np
import pandas as pd

from advisor.evaluation import advisory
from advisor.evaluation.stability import changes_at_once, stabilise

ROOT = Path(__file__).resolve().parent.parent
T0 = pd.Timestamp("2026-11-25T19:00:00Z")


CONFIRM = advisory.Confirm(3, 15.0)


def _run(sequence, confirm=CONFIRM, every_min=5.0):
    """Feed (verdict, blocked_by) pairs to the tracker; the kinds it announces."""
    state, kinds = None, []
    for k, (verdict, blocked_by) in enumerate(sequence):
        now = advisory.utc_text((T0 + pd.Timedelta(minutes=every_min * k)).to_pydatetime())
        change = advisory.track_change(
            state,
            verdict,
            (),
            now,
            6,
            False,
            at_once=advisory.switches_at_once(state, verdict, blocked_by),
            confirm=confirm,
        )
        kinds.append(change.kind)
        state = change.state
    return kinds, state


NONE = {"scan": [], "astronomical": []}


def test_a_brief_change_of_preference_is_not_announced():
    kinds, state = _run([("scan", NONE), ("astronomical", NONE), ("scan", NONE), ("scan", NONE)])
    assert kinds == ["first", None, None, None]
    assert state.verdict == "scan" and state.pending is None


def test_a_change_that_holds_is_announced_after_the_confirmation():
    kinds, state = _run([("scan", NONE)] + [("astronomical", NONE)] * 3)
    assert kinds == ["first", None, None, "verdict"]
    assert state.verdict == "astronomical"


def test_a_block_on_the_advised_method_switches_at_once():
    fog = {"scan": ["fog_blinds_laser"], "astronomical": []}
    kinds, state = _run([("scan", NONE), ("astronomical", fog)])
    assert kinds == ["first", "verdict"] and state.verdict == "astronomical"


def test_bad_data_switches_at_once_and_a_shortfall_of_efficiency_waits():
    kinds, _ = _run([("scan", NONE), ("undetermined", NONE)])
    assert kinds == ["first", "verdict"]
    low = {"scan": ["efficiency.min"], "astronomical": []}
    kinds, _ = _run([("scan", NONE), ("astronomical", low)])
    assert kinds == ["first", None]


def test_pending_state_survives_a_round_trip_through_json():
    _, state = _run([("scan", NONE), ("astronomical", NONE)])
    import json

    again = advisory.parse_state(json.dumps(state.as_dict()))
    assert again == state and again.pending == "astronomical" and again.pending_ticks == 1


def test_offline_spans_absorb_short_runs_but_not_forced_ones():
    times = pd.date_range(T0, periods=12, freq="5min")
    verdict = np.array(["scan"] * 4 + ["astronomical"] * 2 + ["scan"] * 4 + ["postpone"] * 2, dtype=object)
    hard = {"scan": np.zeros(12, dtype=bool), "astronomical": np.zeros(12, dtype=bool)}
    out = stabilise(times, verdict, changes_at_once(verdict, hard), 15.0)
    assert list(out) == ["scan"] * 12  # 10 min of holography, 10 min of postpone: absorbed
    hard["scan"][10:] = True  # postpone because the laser is blocked: at once
    forced = stabilise(times, verdict, changes_at_once(verdict, hard), 15.0)
    assert list(forced[10:]) == ["postpone"] * 2
    longer = stabilise(times, verdict, changes_at_once(verdict, hard), 5.0)
    assert list(longer) == list(verdict)  # with a 5-min confirmation every run stands


def test_demo_afternoon_sends_at_most_a_few_notices_and_the_week_fewer_than_without_confirmation():
    spec = importlib.util.spec_from_file_location("notices", ROOT / "benchmarks" / "notices.py")
    notices = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(notices)
    zone = "America/Denver"
    afternoon = list(
        notices.tick_calls(
            5.0,
            pd.Timestamp("2026-11-25 12:00", tz=zone).tz_convert("UTC"),
            pd.Timestamp("2026-11-25 15:00", tz=zone).tz_convert("UTC"),
        )
    )
    confirm = advisory.Confirm(3, 15.0)
    assert notices.count_notices(afternoon, confirm) <= 3
    week = list(notices.tick_calls(5.0))
    assert notices.count_notices(week, confirm) < notices.count_notices(week, None)
