"""Windows over time steps (advisor/windows.py): run-length logic, exact edges, minimum length, gaps.

These are definitions of ours (a step at t covers [t, t + step)), not physics: the expected
values follow from that definition, and a brute-force loop written here is the reference for the
property test.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from advisor.evaluation.windows import WINDOW_COLUMNS, find_windows, next_window, runs

T0 = pd.Timestamp("2026-01-16T04:00:00Z")


def grid(n, step_min=10.0, start=T0):
    return pd.date_range(start, periods=n, freq=pd.Timedelta(minutes=step_min))


def windows(usable, step_min=10.0, min_length_min=0.0, times=None, **values):
    usable = np.asarray(usable, dtype=bool)
    n = len(usable)
    times = grid(n, step_min) if times is None else times
    arrays = {
        k: values.get(k, np.zeros(n)) for k in ("wind_mean_ms", "wind_gust_ms", "dew_point_spread_c", "ruze_efficiency")
    }
    extra = {k: values[k] for k in ("advised", "beyond_horizon") if k in values}
    return find_windows(times, step_min, usable, min_length_min, **arrays, **extra)


def test_window_edges_fall_exactly_on_step_boundaries():
    usable = np.zeros(12, dtype=bool)
    usable[3:9] = True  # steps 04:30 .. 05:20
    table = windows(usable)
    assert list(table.columns) == list(WINDOW_COLUMNS)
    assert len(table) == 1
    w = table.iloc[0]
    assert w["start_utc"] == pd.Timestamp("2026-01-16T04:30:00Z")
    assert w["end_utc"] == pd.Timestamp("2026-01-16T05:30:00Z")  # last step 05:20 + one step
    assert w["length_min"] == 60.0
    assert (w["first_step"], w["stop_step"]) == (3, 9)
    assert not w["open_end"]


def test_hourly_steps_give_hour_edges():
    usable = [False, True, True, False]
    w = windows(usable, step_min=60.0).iloc[0]
    assert (w["start_utc"], w["end_utc"]) == (pd.Timestamp("2026-01-16T05:00Z"), pd.Timestamp("2026-01-16T07:00Z"))
    assert w["length_min"] == 120.0


def test_window_shorter_than_method_duration_is_not_offered():
    # a laser scan of 12 min + 10 min settling needs 22 min: two 10-min steps are not enough
    usable = [True, True, False, True, True, True, False]
    table = windows(usable, min_length_min=22.0)
    assert len(table) == 1
    assert table.iloc[0]["start_utc"] == T0 + pd.Timedelta(minutes=30)
    assert table.iloc[0]["length_min"] == 30.0


def test_window_exactly_as_long_as_needed_is_offered():
    assert len(windows([True, True, True], min_length_min=30.0)) == 1
    assert len(windows([True, True, True], min_length_min=30.5)) == 0


def test_a_gap_splits_a_window_in_two():
    usable = [True, True, True, False, True, True, True]
    table = windows(usable)
    assert list(table["first_step"]) == [0, 4]
    assert list(table["stop_step"]) == [3, 7]
    assert table.iloc[0]["end_utc"] == T0 + pd.Timedelta(minutes=30)  # ends where the gap starts
    assert table.iloc[1]["start_utc"] == T0 + pd.Timedelta(minutes=40)  # resumes where it ends


def test_a_jump_in_the_step_times_splits_a_window_even_if_every_step_is_usable():
    times = grid(6).delete(3)  # 04:30 missing from the times themselves
    table = windows(np.ones(5, dtype=bool), times=times)
    assert len(table) == 2
    assert table.iloc[0]["end_utc"] == T0 + pd.Timedelta(minutes=30)
    assert table.iloc[1]["start_utc"] == T0 + pd.Timedelta(minutes=40)


def test_window_figures_are_worst_case_and_mean_ignoring_missing_values():
    usable = [True, True, True, True]
    table = windows(
        usable,
        wind_mean_ms=np.array([1.0, 3.0, np.nan, 2.0]),
        wind_gust_ms=np.array([2.0, 5.0, 4.0, np.nan]),
        dew_point_spread_c=np.array([4.0, 1.5, 3.0, 2.0]),
        ruze_efficiency=np.array([0.6, 0.5, np.nan, 0.7]),
        advised=np.array([True, False, True, True]),
        beyond_horizon=np.array([False, False, False, True]),
    )
    w = table.iloc[0]
    assert w["max_wind_mean_ms"] == 3.0
    assert w["max_wind_gust_ms"] == 5.0
    assert w["min_dew_point_spread_c"] == 1.5
    assert w["mean_ruze_efficiency"] == pytest.approx(0.6)
    assert w["advised_fraction"] == pytest.approx(0.75)
    assert bool(w["beyond_horizon"]) and bool(w["open_end"])


def test_no_usable_step_gives_no_window_and_no_next_window():
    table = windows(np.zeros(5, dtype=bool))
    assert len(table) == 0 and list(table.columns) == list(WINDOW_COLUMNS)
    assert next_window(table) is None
    assert len(windows(np.zeros(0, dtype=bool))) == 0


def test_next_window_is_the_earliest_as_iso_utc():
    nxt = next_window(windows([False, True, True, False, True]))
    assert nxt["start_utc"] == "2026-01-16T04:10:00Z" and nxt["end_utc"] == "2026-01-16T04:30:00Z"
    assert nxt["length_min"] == 20.0


def _brute_force_runs(mask):
    out, start = [], None
    for i, m in enumerate(mask):
        if m and start is None:
            start = i
        if not m and start is not None:
            out.append((start, i))
            start = None
    if start is not None:
        out.append((start, len(mask)))
    return out


@settings(max_examples=200, deadline=None)
@given(st.lists(st.booleans(), max_size=80), st.integers(min_value=0, max_value=6))
def test_runs_match_a_plain_loop_and_short_runs_are_dropped(mask, min_steps):
    starts, stops = runs(np.array(mask, dtype=bool))
    assert list(zip(starts.tolist(), stops.tolist())) == _brute_force_runs(mask)
    table = windows(np.array(mask, dtype=bool), min_length_min=10.0 * min_steps)
    expected = [(a, b) for a, b in _brute_force_runs(mask) if b - a >= min_steps]
    assert list(zip(table["first_step"], table["stop_step"])) == expected
