"""The data gate: a statistic needs samples covering half its window, so a gap before the
evaluation time is never read as calm.  (Invented weather only puts the call in a known state.)"""

from __future__ import annotations

import pandas as pd

from .conftest import NIGHT_UTC, registry_at, weather_table


def _reference(table):
    return registry_at(NIGHT_UTC - pd.Timedelta(hours=1), float(table["air_temp_c"].iloc[-1]))


def test_a_storm_then_silence_then_one_calm_row_is_never_scan(call_for):
    storm = weather_table(end=NIGHT_UTC - pd.Timedelta(minutes=15), wind_mean_ms=12.0, wind_gust_ms=20.0)
    calm = weather_table(end=NIGHT_UTC, hours=0.0)  # one row at the evaluation time
    table = pd.concat([storm, calm], ignore_index=True)
    call = call_for(table, registry=_reference(table))
    assert call.verdict == "undetermined"
    assert not call.features["data_ok"]


def test_a_one_row_feed_and_a_feed_whose_only_good_row_is_the_last_are_undetermined(call_for):
    one = weather_table(hours=0.0)
    assert call_for(one, registry=_reference(one)).verdict == "undetermined"
    table = weather_table()
    table.loc[: len(table) - 2, "rel_humidity_pct"] = 250.0  # every row implausible but the last
    assert call_for(table, registry=_reference(table)).verdict == "undetermined"


def test_a_short_dropout_inside_the_window_still_allows_a_call(call_for):
    table = weather_table()
    table = table.drop(index=range(len(table) - 4, len(table) - 1)).reset_index(drop=True)  # 3 minutes lost
    call = call_for(table, registry=_reference(table))
    assert call.features["data_ok"] and call.verdict != "undetermined"


def test_an_hourly_feed_is_read_at_its_own_cadence(call_for, demo_site):
    from dataclasses import replace

    site = replace(demo_site, feed=replace(demo_site.feed, max_feed_age_min=90.0))
    table = weather_table(step_min=60.0, hours=12.0)
    call = call_for(table, registry=_reference(table), site=site)
    assert call.features["feed_cadence_min"] == 60.0
    assert call.features["data_ok"] and call.features["wind_mean_ms"] == 1.5
