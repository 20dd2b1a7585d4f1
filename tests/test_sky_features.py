"""The sky features in the call: calibrator choice over the whole measurement, the session's elevation,
the gravity term, the session's pointing loss, and where the new features show.

Sources: the calibrator elevations come from advisor.physics.track (checked against astropy in
test_physics_track.py); the gravity residual is the form z(E) = a sin E + b cos E + c (Nikolic, Hills
& Richer 2007, A&A 465, 679); the pointing loss is the Gaussian main beam, exp(-4 ln 2 (sigma/theta)^2),
0.5 at sigma = theta / 2 by the definition of the half-power width (Wilson, Rohlfs & Huettemeister,
Tools of Radio Astronomy).  Weather is synthetic (tests/conftest.py) and only sets the state.
"""

from __future__ import annotations

import json
from dataclasses import replace
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from advisor.catalogue import CATALOGUE
from advisor.features import row_features, target_features, with_target
from advisor.io.feed import canonical_frame
from advisor.io.references import Registry
from advisor.io.site import FeedLayout
from advisor.physics.aperture import root_sum_square
from advisor.physics.track import source_track, sun_separation_over_deg

from .conftest import NIGHT_UTC, run_cli, weather_table

DEMO = Path(__file__).resolve().parents[1] / "example_weather"


def _rows(site, times, **weather):
    table = weather_table(
        end=times[-1], hours=(times[-1] - times[0]).total_seconds() / 3600 + 1, step_min=5.0, **weather
    )
    frame = canonical_frame(table, FeedLayout(max_feed_age_min=15)).frame
    return row_features(frame, times, site, Registry.empty())


def _tracks(site, times):
    ra = np.array([c.ra_deg for c in site.calibrators])
    dec = np.array([c.dec_deg for c in site.calibrators])
    a = site.astronomical
    track = source_track(
        times, ra, dec, site.latitude_deg, site.longitude_deg, a.duration_min, a.min_calibrator_elevation_deg
    )
    sep = sun_separation_over_deg(times, ra, dec, a.duration_min)
    eligible = (
        (track.lowest_elevation_deg >= a.min_calibrator_elevation_deg)
        & (track.highest_elevation_deg <= a.max_calibrator_elevation_deg)
        & (sep >= a.sun_avoidance_deg)
    )
    return track, eligible


def test_the_calibrator_stays_inside_the_limits_for_the_whole_measurement(demo_site):
    """At 19 N sources culminate near the zenith: a choice checked only at the start would send the
    dish above the 80 deg maximum during the measurement (the issue: hundreds of hours a year).
    Every chosen calibrator stays within 25..80 deg from start to end, and such starts exist."""
    site = replace(demo_site, latitude_deg=19.0, longitude_deg=100.0)
    times = pd.date_range("2026-03-01", "2026-03-04", freq="5min", tz="UTC")
    rows = _rows(site, times)
    track, eligible = _tracks(site, times)
    names = [c.name for c in site.calibrators]
    chosen = rows["calibrator_name"].astype(str).to_numpy()
    idx = np.array([names.index(n) if n else -1 for n in chosen])
    have = idx >= 0
    assert have.mean() > 0.5
    r = np.flatnonzero(have)
    assert np.all(track.lowest_elevation_deg[r, idx[r]] >= 25.0)
    assert np.all(track.highest_elevation_deg[r, idx[r]] <= 80.0)
    # the trap the old choice fell into: inside the limits at the start, above 80 deg later
    starts_ok = (track.elevation_deg >= 25.0) & (track.elevation_deg <= 80.0)
    assert (starts_ok & (track.highest_elevation_deg > 80.0)).any()
    np.testing.assert_array_equal(rows["calibrator_available"].to_numpy(), eligible.any(axis=1))


@pytest.mark.parametrize("session_el", [30.0, 70.0])
def test_the_calibrator_nearest_the_sessions_elevation_is_preferred(demo_site, session_el):
    """Among the eligible calibrators the one whose elevation halfway through the measurement is
    nearest the session's is chosen (least gravity residual); a session high or low changes the choice."""
    site = replace(demo_site, session=replace(demo_site.session, elevation_deg=session_el))
    times = pd.date_range("2026-01-15", periods=24 * 12, freq="5min", tz="UTC")
    rows = _rows(site, times)
    track, eligible = _tracks(site, times)
    names = [c.name for c in site.calibrators]
    chosen = rows["calibrator_name"].astype(str).to_numpy()
    distance = np.where(eligible, np.abs(track.mid_elevation_deg - session_el), np.inf)
    for i in np.flatnonzero(eligible.any(axis=1)):
        assert distance[i, names.index(chosen[i])] == pytest.approx(distance[i].min(), abs=1e-6)
    other = replace(site, session=replace(site.session, elevation_deg=100.0 - session_el))
    assert (_rows(other, times)["calibrator_name"].astype(str).to_numpy() != chosen).any()


def test_gravity_residual_enters_holographys_budget_only(demo_site):
    """sigma_g = |a (sin E_s - sin E_c) + b (cos E_s - cos E_c)| with the site's a, b (Nikolic et al.
    2007's elevation dependence, one mode); holography's expected surface is the old budget and sigma_g
    in quadrature; the laser scans at the session's elevation and has no such term."""
    site = replace(
        demo_site,
        astronomical=replace(demo_site.astronomical, gravity_sin_um=300.0, gravity_cos_um=-200.0),
        session=replace(demo_site.session, elevation_deg=75.0),
    )
    none = replace(site, astronomical=replace(site.astronomical, gravity_sin_um=0.0, gravity_cos_um=0.0))
    times = pd.DatetimeIndex([NIGHT_UTC])
    with_g, without = _rows(site, times).iloc[0], _rows(none, times).iloc[0]
    e_c, e_s = np.radians(with_g["calibrator_mid_elevation_deg"]), np.radians(75.0)
    expected = abs(300.0 * (np.sin(e_s) - np.sin(e_c)) - 200.0 * (np.cos(e_s) - np.cos(e_c)))
    assert with_g["calibrator_gravity_residual_um"] == pytest.approx(expected, rel=1e-9)
    assert expected > 20.0
    assert with_g["astronomical_surface_rms_um"] == pytest.approx(
        float(root_sum_square(without["astronomical_surface_rms_um"], expected)), rel=1e-9
    )
    np.testing.assert_equal(with_g["scan_surface_rms_um"], without["scan_surface_rms_um"])
    assert without["calibrator_gravity_residual_um"] == 0.0


def test_session_pointing_efficiency_is_the_gaussian_beam(demo_site):
    """exp(-4 ln 2 (sigma/theta)^2) for the wind pointing error on the target's beam; 0.5 at
    sigma = theta / 2 (the half-power width's definition)."""
    times = pd.DatetimeIndex([NIGHT_UTC])
    rows = _rows(demo_site, times, wind_mean_ms=6.0, wind_gust_ms=12.0)
    targets = target_features(demo_site, 230.0)
    out = with_target(rows, targets).iloc[0]
    ratio = out["wind_pointing_error_arcsec"] / targets["beam_fwhm_arcsec"]
    assert out["pointing_efficiency"] == pytest.approx(np.exp(-4 * np.log(2) * ratio**2), rel=1e-12)
    half = rows.copy()
    half["wind_pointing_error_arcsec"] = targets["beam_fwhm_arcsec"] / 2
    assert with_target(half, targets)["pointing_efficiency"].iloc[0] == pytest.approx(0.5, rel=1e-12)


def test_session_pointing_loss_is_its_own_caution(call_for):
    """Gusty wind at 230 GHz: the pointing loss is a warning that applies to both methods (the
    session loses it whichever corrects the surface), reported with its figure."""
    call = call_for(weather_table(wind_mean_ms=3.5, wind_gust_ms=7.5), freq_ghz=230.0)
    reason = next(r for r in call.reasons if r.rule == "session_pointing_loss")
    assert reason.effect == "warn" and reason.applies_to == "both"
    assert f"{call.features['pointing_efficiency']:.2f}" in reason.message


def test_integration_time_factor_is_one_on_the_reference_night(demo_site):
    """On the site's reference night (its PWV, air temperature and standard pressure) the factor is 1;
    it grows with water vapour (radiometer equation: (T_sys*/T_sys*_ref)^2)."""
    atm = demo_site.atmosphere
    rho = atm.reference_pwv_mm / atm.water_scale_height_km
    from advisor.physics.moisture import saturation_vapour_pressure_hpa

    rh = (
        100.0
        * rho
        * (atm.reference_air_temp_c + 273.15)
        / 216.7
        / saturation_vapour_pressure_hpa(atm.reference_air_temp_c)
    )
    times = pd.DatetimeIndex([NIGHT_UTC])
    targets = target_features(demo_site, 86.0)
    ref = with_target(
        _rows(demo_site, times, air_temp_c=atm.reference_air_temp_c, temp_rate_c_per_h=0.0, rel_humidity_pct=rh),
        targets,
    ).iloc[0]
    assert ref["pwv_mm"] == pytest.approx(atm.reference_pwv_mm, rel=1e-6)
    assert ref["integration_time_factor"] == pytest.approx(1.0, abs=1e-3)
    assert ref["system_temp_k"] == pytest.approx(targets["reference_system_temp_k"], rel=1e-3)
    wet = with_target(
        _rows(
            demo_site,
            times,
            air_temp_c=atm.reference_air_temp_c,
            temp_rate_c_per_h=0.0,
            rel_humidity_pct=min(100.0, 2 * rh),
        ),
        targets,
    ).iloc[0]
    assert wet["integration_time_factor"] > 1.2


# --------------------------------------------------------------------------- the command line


def test_elevation_option_reaches_the_features_and_bad_values_are_one_line(capsys):
    status, out, _ = run_cli(capsys, "check", "--json", "--elevation", "70")
    doc = json.loads(out)
    assert doc["features"]["session_elevation_deg"] == 70.0
    status_45, out_45, _ = run_cli(capsys, "check", "--json")
    assert json.loads(out_45)["features"]["session_elevation_deg"] == 45.0  # the demo site's
    assert json.loads(out_45)["features"]["transmission"] > doc["features"]["transmission"] * 0.9
    for bad in ("95", "abc", "-3"):
        status, out, err = run_cli(capsys, "check", "--elevation", bad)
        assert status == 2 and err.count("\n") == 1 and "--elevation" in err and "Traceback" not in err


def test_check_json_lists_every_new_feature(capsys):
    _, out, _ = run_cli(capsys, "check", "--json")
    features = json.loads(out)["features"]
    for name in (
        "water_vapour_density_gm3",
        "pwv_mm",
        "zenith_opacity",
        "transmission",
        "integration_time_factor",
        "system_temp_k",
        "frost_point_c",
        "frost_point_spread_c",
        "rel_humidity_ice_pct",
        "sun_state",
        "calibrator_sun_separation_deg",
        "calibrators_sun_blocked",
        "calibrator_gravity_residual_um",
        "session_elevation_deg",
        "pointing_efficiency",
        "sun_avoidance_deg",
    ):
        assert name in features and features[name] is not None, name


def test_key_conditions_show_the_sky_and_frost_only_when_cold(call_for):
    from advisor.views.callparts import key_features

    cold = dict(key_features(call_for(weather_table(air_temp_c=-6.0)).features))
    warm = dict(key_features(call_for(weather_table(air_temp_c=6.0)).features))
    for shown in (cold, warm):
        assert CATALOGUE["pwv_mm"].label in shown and CATALOGUE["integration_time_factor"].label in shown
        assert CATALOGUE["pointing_efficiency"].label in shown
    assert CATALOGUE["frost_point_spread_c"].label in cold and CATALOGUE["frost_point_spread_c"].label not in warm


def test_rules_features_lists_the_sky(capsys):
    status, out, _ = run_cli(capsys, "rules", "features")
    assert status == 0
    for name in (
        "pwv_mm",
        "zenith_opacity",
        "integration_time_factor",
        "frost_point_spread_c",
        "calibrator_sun_separation_deg",
        "session_elevation_deg",
    ):
        assert name in out


def test_replay_cache_is_keyed_by_the_sessions_elevation(capsys):
    """The calibrator choice depends on the session's elevation: a cached replay at one elevation is
    not reused at another (same summary as a fresh computation)."""
    base = [
        "replay",
        "--site",
        str(DEMO / "larch_basin.yaml"),
        "--feed",
        str(DEMO / "larch_basin_archive_sample.csv"),
        "--references",
        str(DEMO / "larch_basin_archive_references.csv"),
        "--freq",
        "86",
        "--from",
        "2026-01-10T00:00:00Z",
        "--to",
        "2026-01-20T00:00:00Z",
        "--json",
    ]
    docs = {}
    for label, extra in (
        ("low", ["--elevation", "20"]),
        ("high", ["--elevation", "85"]),
        ("high_fresh", ["--elevation", "85", "--no-cache"]),
    ):
        status, out, _ = run_cli(capsys, *base, *extra)
        assert status == 0
        docs[label] = json.loads(out)["hours"]
    assert docs["high"] == docs["high_fresh"]
    assert docs["low"] != docs["high"]  # the elevation changes the call (gravity term), so a stale cache would show


def test_a_year_at_19_north_never_points_near_the_sun(demo_site):
    """The issue's year at 19 N with the demo calibrators, every 10 min of 2026: the choice before
    ("longest above the limit" among the calibrators inside the limits now) had the Sun within 5 deg
    of its calibrator for about 70 h of daylight and sent the dish above 80 deg during hundreds of
    hours of measurements; now every chosen calibrator stays 30 deg or more from the Sun and inside
    25..80 deg for the whole measurement (geometry: advisor.physics.sky / track, checked against
    astropy in their own tests)."""
    from advisor.features import choose_calibrator
    from advisor.physics.sky import elevation_and_minutes_above, sun_separation_deg
    from advisor.physics.sun import solar_position

    site = replace(demo_site, latitude_deg=19.0, longitude_deg=100.0)
    times = pd.date_range("2026-01-01", "2027-01-01", freq="10min", tz="UTC", inclusive="left")
    ra = np.array([c.ra_deg for c in site.calibrators])
    dec = np.array([c.dec_deg for c in site.calibrators])
    rows = np.arange(len(times))
    el, minutes = elevation_and_minutes_above(times, ra, dec, 19.0, 100.0, 25.0)
    usable_now = (el >= 25.0) & (el <= 80.0)
    old = np.argmax(np.where(usable_now, minutes, -1.0), axis=1)
    old_ok = usable_now[rows, old] & (minutes[rows, old] >= 45.0)
    old_sep = sun_separation_deg(times, ra, dec)[rows, old]
    sun_up = solar_position(times, 19.0, 100.0)[0] > 0.0
    assert (old_ok & sun_up & (old_sep < 5.0)).sum() / 6.0 > 40.0  # hours
    track, _ = _tracks(site, times)
    assert (old_ok & (track.highest_elevation_deg[rows, old] > 80.0)).sum() / 6.0 > 200.0

    out: dict = {}
    names = np.asarray(choose_calibrator(times, site, out)).astype(str)
    chosen = out["calibrator_available"]
    assert chosen.mean() > 0.99
    assert np.nanmin(out["calibrator_sun_separation_deg"]) >= 30.0
    index = np.array([[c.name for c in site.calibrators].index(n) if n else 0 for n in names])
    assert np.all(track.highest_elevation_deg[rows, index][chosen] <= 80.0)
    assert np.all(track.lowest_elevation_deg[rows, index][chosen] >= 25.0)
