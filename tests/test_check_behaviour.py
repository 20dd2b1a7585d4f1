"""The calls the spine must make on the demo site (issue 2's behaviour list)."""

from __future__ import annotations

import pandas as pd
import pytest

from advisor.io.references import Registry
from advisor.io.site import ColumnMap, FeedLayout

from .conftest import NIGHT_UTC, registry_at, weather_table


def test_calm_dry_night_with_fresh_matched_reference_scans(call_for, site_with):
    # Both methods are feasible; which one is worth more depends on the session (holography's
    # better surface must pay back its extra 33 minutes): the laser for 2 h, holography for 8 h.
    call = call_for(weather_table(), site=site_with(session_hours=2.0))
    assert call.verdict == "scan", [r.message for r in call.reasons]
    assert call.candidates["scan"]["feasible"] and call.candidates["astronomical"]["feasible"]
    assert call.features["hours_since_sunset"] > 2
    assert call.features["wind_mean_ms"] < 2.5
    assert call_for(weather_table(), site=site_with(session_hours=8.0)).verdict == "astronomical"


def test_fog_blocks_laser_but_not_holography(call_for):
    # RH 99 % at 2 °C gives a dew-point spread of ~0.15 °C (Magnus form); visibility 400 m.
    call = call_for(weather_table(rel_humidity_pct=99.0, visibility_m=400.0))
    assert call.features["fog"]
    assert call.features["calibrator_available"]
    assert call.verdict == "astronomical"
    assert "fog_blinds_laser" in call.candidates["scan"]["blocked_by"]
    assert call.candidates["astronomical"]["feasible"]


def test_fog_by_visibility_alone(call_for):
    call = call_for(weather_table(visibility_m=600.0))
    assert call.features["fog"] and call.verdict == "astronomical"


def test_rain_postpones(call_for):
    call = call_for(weather_table(precip_mm_h=2.0, rel_humidity_pct=96.0, visibility_m=5000.0))
    assert call.verdict == "postpone"
    assert "rain_stops_both" in call.candidates["scan"]["blocked_by"]
    assert "rain_stops_both" in call.candidates["astronomical"]["blocked_by"]


def test_mean_wind_above_high_frequency_limit_postpones(call_for):
    # ~4 m/s is the usual high-frequency limit on large dishes (common practice).
    call = call_for(weather_table(wind_mean_ms=5.0, wind_gust_ms=6.5))
    assert call.verdict == "postpone"
    reasons = {r.rule for r in call.reasons}
    assert "high_frequency_wind_limit" in reasons


def test_wind_just_below_limit_does_not_trigger_the_limit(call_for):
    call = call_for(weather_table(wind_mean_ms=3.8, wind_gust_ms=4.5))
    assert "high_frequency_wind_limit" not in {r.rule for r in call.reasons}
    assert call.verdict in ("scan", "astronomical")


def test_no_reference_calm_clear_goes_astronomical(call_for):
    call = call_for(weather_table(), registry=Registry.empty())
    assert call.verdict == "astronomical"
    assert "no_reference" in call.candidates["scan"]["blocked_by"]


def test_old_reference_goes_astronomical(call_for):
    table = weather_table()
    call = call_for(table, registry=registry_at(NIGHT_UTC - pd.Timedelta(hours=100), table["air_temp_c"].iloc[-1]))
    assert call.verdict == "astronomical"
    assert "reference_too_old" in call.candidates["scan"]["blocked_by"]


def test_thermally_mismatched_reference_degrades_the_laser_instead_of_blocking_it(call_for):
    """8 °C from the reference: the laser's ranges through air and its mount add an error term
    (Edlén 1966 / Ciddor 1996: dn/dT ≈ -0.9 ppm/K), so holography wins on efficiency; the laser is
    not blocked and no reason claims the difference map would be wrong."""
    table = weather_table()
    matched = call_for(table, registry=registry_at(NIGHT_UTC - pd.Timedelta(hours=3), table["air_temp_c"].iloc[-1]))
    call = call_for(table, registry=registry_at(NIGHT_UTC - pd.Timedelta(hours=3), table["air_temp_c"].iloc[-1] + 8))
    assert call.verdict == "astronomical"
    assert (
        call.candidates["scan"]["feasible"]
        and "reference_thermal_mismatch" not in call.candidates["scan"]["blocked_by"]
    )
    mismatch = next(r for r in call.reasons if r.rule == "reference_thermal_mismatch")
    assert mismatch.effect == "warn" and "refractive index" in mismatch.message
    assert "difference map would mix" not in mismatch.message
    assert call.features["reference_mismatch_um"] > 100.0
    assert call.candidates["scan"]["surface_rms_um"] > matched.candidates["scan"]["surface_rms_um"] + 50.0


def test_stale_feed_is_undetermined_never_scan(call_for):
    table = weather_table(end=NIGHT_UTC - pd.Timedelta(minutes=40))
    call = call_for(table, at=NIGHT_UTC)
    assert call.verdict == "undetermined"
    assert call.features["data_age_min"] == pytest.approx(40.0)
    assert not call.candidates["scan"]["feasible"]


def test_implausible_latest_sample_is_undetermined(call_for):
    table = weather_table()
    table.loc[table.index[-1], "rel_humidity_pct"] = 180.0
    call = call_for(table)
    assert call.verdict == "undetermined"


def test_feed_within_age_limit_is_still_used(call_for, site_with):
    call = call_for(weather_table(end=NIGHT_UTC - pd.Timedelta(minutes=10)), site=site_with(session_hours=2.0))
    assert call.verdict == "scan"


def test_knots_and_fahrenheit_through_mapping_give_identical_call(call_for, demo_site):
    si = weather_table()
    logger = pd.DataFrame(
        {
            "stamp": si["time"],
            "ws_kn": si["wind_mean_ms"] / (1852.0 / 3600.0),
            "wg_kn": si["wind_gust_ms"] / (1852.0 / 3600.0),
            "t_f": si["air_temp_c"] * 9.0 / 5.0 + 32.0,
            "rh_frac": si["rel_humidity_pct"] / 100.0,
            "vis_km": si["visibility_m"] / 1000.0,
            "precip_mm_h": si["precip_mm_h"],
            "solar_wm2": si["solar_wm2"],
        }
    )
    layout = FeedLayout(
        time_column="stamp",
        columns=(
            ColumnMap("wind_mean_ms", "ws_kn", "kn"),
            ColumnMap("wind_gust_ms", "wg_kn", "kn"),
            ColumnMap("air_temp_c", "t_f", "degF"),
            ColumnMap("rel_humidity_pct", "rh_frac", "fraction"),
            ColumnMap("visibility_m", "vis_km", "km"),
        ),
    )
    a = call_for(si)
    b = call_for(
        logger, layout=layout, registry=registry_at(NIGHT_UTC - pd.Timedelta(hours=2), si["air_temp_c"].iloc[-1] + 0.8)
    )
    assert a.verdict == b.verdict
    for name, value in a.features.items():
        if isinstance(value, float):
            assert b.features[name] == pytest.approx(value, rel=1e-9, abs=1e-9, nan_ok=True), name
    assert a.candidates == b.candidates


def test_daytime_thermal_transition_adds_error_term(call_for):
    # 15:30 UTC on 16 Jan is ~08:30 local, shortly after sunrise: sun between -6 and +15 deg.
    at = pd.Timestamp("2026-01-16T15:30:00Z")
    call = call_for(weather_table(end=at), at=at)
    assert call.features["sun_transition"]
    assert "sun_transition" in {r.rule for r in call.reasons}


def test_higher_frequency_lowers_efficiency(call_for):
    low = call_for(weather_table(), freq_ghz=43.0)
    high = call_for(weather_table(), freq_ghz=115.0)
    assert high.candidates["scan"]["ruze_efficiency"] < low.candidates["scan"]["ruze_efficiency"]


def test_every_call_has_reasons_with_numbers(call_for):
    call = call_for(weather_table(wind_mean_ms=5.0, wind_gust_ms=6.5))
    limit = next(r for r in call.reasons if r.rule == "high_frequency_wind_limit")
    assert "5.0 m/s" in limit.message and "4.0 m/s" in limit.message


def test_messages_read_well_with_missing_values_and_negative_zero():
    from advisor.rules.ruleset import format_message

    text = format_message("spread {a:.1f} °C, visibility {b:.0f} m): blind", {"a": -0.01, "b": float("nan")})
    assert text == "spread 0.0 °C, visibility n/a): blind"
