"""Missing is never fine: optional inputs (visibility, precipitation, pressure, irradiance).

A rule that needs an input the feed does not have at the sample in use neither fires nor
clears; the call is made on what is known and says what it could not see; an optional sensor
that was reporting and fell silent (a dropout) never allows a scan.  The weather built here is
invented and only puts the call in a known state; no check value comes from it.
"""

from __future__ import annotations

import os

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from advisor.catalogue import CATALOGUE
from advisor.io.feed import canonical_frame
from advisor.io.feedlayout import FeedLayout
from advisor.rules.compiler import compile_condition

from .conftest import NIGHT_UTC, registry_at, weather_table

OPTIONAL = ("visibility_m", "precip_mm_h", "pressure_hpa", "solar_wm2")
REQUIRED = ("wind_mean_ms", "wind_gust_ms", "air_temp_c", "rel_humidity_pct")


def _good(**kw):
    table = weather_table(hours=1.0, **kw)
    table["pressure_hpa"] = 900.0
    return table


def _call(call_for, table, **kw):
    return call_for(
        table, registry=registry_at(NIGHT_UTC - pd.Timedelta(hours=1), float(table["air_temp_c"].iloc[-1])), **kw
    )


# --- three-valued conditions ------------------------------------------------------------------


@pytest.mark.parametrize(
    "condition, values, fired, unknown",
    [
        ("precipitation", {"precipitation": False, "precip_mm_h": np.nan}, False, True),
        ("not precipitation", {"precipitation": False, "precip_mm_h": np.nan}, False, True),
        (
            "precipitation or wind_mean_ms > 8",
            {"precipitation": False, "precip_mm_h": np.nan, "wind_mean_ms": 9.0},
            True,
            False,
        ),  # known true whatever the rain
        (
            "precipitation and wind_mean_ms > 8",
            {"precipitation": False, "precip_mm_h": np.nan, "wind_mean_ms": 3.0},
            False,
            False,
        ),  # known false whatever the rain
        ("visibility_m < 1 km", {"visibility_m": np.nan}, False, True),
        ("missing(visibility_m) or visibility_m < 1 km", {"visibility_m": np.nan}, True, False),
        (
            "solar_wm2 > 600 or (missing(solar_wm2) and sun_elevation_deg > 35)",
            {"solar_wm2": np.nan, "sun_elevation_deg": 10.0},
            False,
            False,
        ),  # the rule says what to do without it
        ("reference_age_h > 72 h", {"reference_age_h": np.nan}, False, False),  # not an input: NaN is "no reference"
    ],
)
def test_a_condition_needing_an_absent_input_is_unknown_never_clear(condition, values, fired, unknown):
    """Kleene's three-valued logic (unknown and false = false; unknown or true = true)."""
    compiled = compile_condition(condition, CATALOGUE)
    columns = {k: np.array([v]) for k, v in values.items()}
    got_unknown = compiled.unknown(columns, length=1)
    is_unknown = bool(got_unknown[0]) if got_unknown is not None else False
    assert is_unknown == unknown
    assert bool(compiled.evaluate(columns, length=1)[0] and not is_unknown) == fired


# --- calls -----------------------------------------------------------------------------------


def test_rain_with_only_the_last_precipitation_cell_empty_is_not_a_scan(call_for):
    table = _good(precip_mm_h=5.0)
    table.loc[table.index[-1], "precip_mm_h"] = np.nan
    call = _call(call_for, table)
    assert call.verdict != "scan"
    assert "data.dropout" in call.candidates["scan"]["blocked_by"]


def test_fog_with_only_the_last_visibility_cell_empty_is_not_a_scan(call_for):
    table = _good(visibility_m=200.0)
    table.loc[table.index[-1], "visibility_m"] = np.nan
    assert _call(call_for, table).verdict != "scan"


def test_a_station_without_precipitation_gets_a_call_that_says_so(call_for):
    table = _good().drop(columns=["precip_mm_h"])
    call = _call(call_for, table)
    assert call.verdict == "scan"
    assert "precip_mm_h" in call.unseen_inputs
    reasons = {r.rule: r for r in call.reasons}
    assert "precipitation" in reasons["data.unseen"].message
    assert reasons["rain_stops_both"].effect == "warn" and reasons["rain_stops_both"].message.startswith("Not checked")


def test_scan_with_precipitation_unknown_near_saturation_gets_a_caution(call_for):
    table = _good(rel_humidity_pct=93.0).drop(columns=["precip_mm_h"])
    call = _call(call_for, table)
    reasons = {r.rule: r for r in call.reasons}
    assert "rain_unknown_near_saturation" in reasons and reasons["rain_unknown_near_saturation"].effect == "warn"


def test_a_missing_code_in_an_optional_column_keeps_the_row(call_for):
    table = _good()
    table["visibility_m"] = table["visibility_m"].astype(object)
    table.loc[table.index[-30:], "visibility_m"] = -9900
    feed = canonical_frame(table, FeedLayout(missing=(-9900.0,)))
    assert feed.frame["good"].all()  # the row is kept: only visibility is missing
    assert feed.quality.coded_cells == {"visibility_m": 30} and feed.quality.rows_with_codes == 30
    assert np.isnan(feed.frame["visibility_m"].iloc[-1])
    call = _call(call_for, table, layout=FeedLayout(missing=(-9900.0,)))
    assert call.verdict != "undetermined"
    assert "visibility_m" in call.unseen_inputs


def test_a_missing_code_word_and_per_column_codes(tmp_path):
    from advisor.io.feedlayout import ColumnMap

    table = _good()
    table["rh"] = table["rel_humidity_pct"].astype(object)
    table.loc[table.index[-1], "rh"] = "M"
    layout = FeedLayout(columns=(ColumnMap("rel_humidity_pct", "rh", "%", missing=("M",)),))
    feed = canonical_frame(table.drop(columns=["rel_humidity_pct"]), layout)
    assert feed.quality.coded_cells == {"rh": 1}
    assert not feed.frame["good"].iloc[-1]  # a required input missing: the row is not good


# --- a property: optional sensor dropouts never scan ------------------------------------------


@st.composite
def dropouts(draw):
    """A calm, clear night feed (which scans) whose optional sensor goes silent near the end."""
    table = _good()
    name = draw(st.sampled_from(OPTIONAL))
    if name == "solar_wm2":
        table[name] = 0.0
    k = draw(st.integers(1, 40))  # minutes of silence before the call
    how = draw(st.sampled_from(["empty", "code", "implausible"]))
    if how == "empty":
        table.loc[table.index[-k:], name] = np.nan
    elif how == "code":
        table.loc[table.index[-k:], name] = -9900.0
    else:
        table.loc[table.index[-k:], name] = {
            "visibility_m": -5.0,
            "precip_mm_h": 900.0,
            "pressure_hpa": 5.0,
            "solar_wm2": 4000.0,
        }[name]
    return table


@settings(
    max_examples=int(os.environ.get("ADVISOR_PROPERTY_EXAMPLES", "2000")),
    deadline=None,
    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow],
)
@given(table=dropouts())
def test_an_optional_sensor_that_just_fell_silent_never_allows_a_scan(call_for, table):
    call = _call(call_for, table, layout=FeedLayout(missing=(-9900.0,)))
    assert call.verdict != "scan"
    assert "data.dropout" in call.candidates["scan"]["blocked_by"] or not call.features["data_ok"]


def test_a_sensor_the_station_reports_only_now_and_then_is_not_a_dropout(call_for):
    table = _good()
    table["visibility_m"] = np.where(np.arange(len(table)) % 2 == 0, 30000.0, np.nan)  # every other sample
    table.loc[table.index[-1], "visibility_m"] = np.nan
    call = _call(call_for, table)
    assert not call.features["input_dropout"] and call.verdict == "scan"
    assert "visibility_m" in call.unseen_inputs


def test_after_the_dropout_limit_the_call_rests_on_what_is_known(call_for):
    table = weather_table(hours=3.0)
    table.loc[table.index[-70:], "visibility_m"] = np.nan  # silent for 70 min: past the 60-min limit
    call = _call(call_for, table)
    assert not call.features["input_dropout"] and call.verdict == "scan" and "visibility_m" in call.unseen_inputs
