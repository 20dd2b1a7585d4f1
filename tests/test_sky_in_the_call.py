"""The sky and the Sun in the call: the four cases of the open issue, end to end.

1. Sun avoidance: at 19 N with the demo calibrators, 3C 279 passes 0.2-0.3 deg from the Sun in
   October 2026; it is never chosen, and when every calibrator high enough is near the Sun the
   astronomical method is blocked with a reason naming the Sun.  Check values: astropy (the Sun's
   separation from the chosen source over the measurement).
2. Humid (PWV ~35 mm) against dry (PWV ~6 mm) night at 116 GHz: the zenith opacity from itur (ITU-R
   P.676-12 Annex 2), the time factor from the radiometer equation; different calls, reasons
   naming PWV and opacity.
3. Frost at -15 C with the air saturated over ice (RH over water 86 %): the frost point from
   psychrolib (over ice below 0 C, ASHRAE / Hyland-Wexler); not a clean scan.
4. The polar sunrise at 70 N, 114 W on 2026-05-16T10:00Z: hours since sunrise and is_night from
   astropy's Sun (crossing of -0.833 deg, Meeus ch. 15), and polar day / polar night.

The weather tables are synthetic (tests/conftest.py): they put the decision in a state; every
number checked comes from the named reference.
"""

from __future__ import annotations

import warnings
from dataclasses import replace

import numpy as np
import pandas as pd
import pytest

from advisor.io.references import Registry
from advisor.physics.moisture import saturation_vapour_pressure_hpa

from .conftest import weather_table

# --------------------------------------------------------------------------- 1. the Sun

SUN_CASE_UTC = pd.Timestamp("2026-10-09T01:10:00Z")  # 19 N, 100 E: Sun 26 deg up, 0.3 deg from 3C 279


@pytest.fixture()
def low_latitude_site(demo_site):
    return replace(demo_site, latitude_deg=19.0, longitude_deg=100.0, time_zone="UTC")


def _astropy_sun_separation_deg(times, ra_deg, dec_deg):
    pytest.importorskip("astropy")
    from astropy.utils import iers

    iers.conf.auto_download = False
    iers.conf.auto_max_age = None
    iers.conf.iers_degraded_accuracy = "warn"
    import astropy.units as u
    from astropy.coordinates import GCRS, SkyCoord, get_sun
    from astropy.time import Time

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        t = Time(np.asarray(times, dtype="datetime64[s]"), scale="utc")
        src = SkyCoord(ra=np.asarray(ra_deg) * u.deg, dec=np.asarray(dec_deg) * u.deg, frame="icrs")
        return get_sun(t).separation(src.transform_to(GCRS(obstime=t))).deg


def _dry_day(end, **kw):
    return weather_table(end=end, air_temp_c=18.0, rel_humidity_pct=25.0, solar_wm2=300.0, temp_rate_c_per_h=0.0, **kw)


@pytest.mark.filterwarnings("ignore")
def test_a_calibrator_near_the_sun_is_never_chosen(call_for, low_latitude_site):
    """Before: "use the astronomical method on 3C 279" with the Sun 0.3 deg from it.  Now another
    calibrator is chosen, and astropy puts the Sun at least the site's 30 deg from it for the
    whole 45-min measurement."""
    call = call_for(_dry_day(SUN_CASE_UTC), at=SUN_CASE_UTC, registry=Registry.empty(), site=low_latitude_site)
    site = low_latitude_site
    cal = {c.name: c for c in site.calibrators}
    ref_3c279 = _astropy_sun_separation_deg(
        [SUN_CASE_UTC.tz_localize(None)], cal["3C 279"].ra_deg, cal["3C 279"].dec_deg
    )[0]
    assert ref_3c279 < 1.0  # astropy: the Sun is on top of 3C 279
    assert call.verdict == "astronomical", [r.message for r in call.reasons]
    chosen = cal[call.calibrator_name]
    assert chosen.name != "3C 279"
    during = pd.date_range(SUN_CASE_UTC, periods=46, freq="1min").tz_localize(None)
    ref = _astropy_sun_separation_deg(during, chosen.ra_deg, chosen.dec_deg)
    assert ref.min() >= site.astronomical.sun_avoidance_deg
    assert call.features["calibrator_sun_separation_deg"] == pytest.approx(ref.min(), abs=0.02)


@pytest.mark.filterwarnings("ignore")
def test_a_day_of_choices_at_19_north_keeps_clear_of_the_sun(demo_site, default_rules, low_latitude_site):
    """Over the day of closest approach, every 10 min: whatever is chosen stays 30 deg or more from
    the Sun by astropy, and 3C 279 (within 1 deg of the Sun all day) is never chosen."""
    from advisor.evaluation.evaluate import evaluate
    from advisor.io.feed import canonical_frame
    from advisor.io.site import FeedLayout

    times = pd.date_range("2026-10-08T12:00Z", "2026-10-09T12:00Z", freq="10min")
    feed = canonical_frame(_dry_day(times[-1], hours=26.0), FeedLayout(max_feed_age_min=15))
    decisions = evaluate(feed.frame, times, low_latitude_site, Registry.empty(), default_rules, 86.0)
    names = decisions.features["calibrator_name"].astype(str).to_numpy()
    assert "3C 279" not in set(names)
    cal = {c.name: c for c in low_latitude_site.calibrators}
    chosen = np.flatnonzero(names != "")
    assert chosen.size > 100
    seps = np.array(
        [
            _astropy_sun_separation_deg([times[i].tz_localize(None)], cal[names[i]].ra_deg, cal[names[i]].dec_deg)[0]
            for i in chosen[::6]
        ]
    )
    assert seps.min() >= 30.0 - 0.02


def test_no_calibrator_clear_of_the_sun_blocks_holography_naming_the_sun(call_for, low_latitude_site):
    """A site listing only the two quasars the Sun passes in October: holography is blocked by
    calibrators_near_sun, whose message names the Sun, the limit and the separation."""
    only_near = tuple(c for c in low_latitude_site.calibrators if c.name in ("3C 279", "3C 273"))
    site = replace(low_latitude_site, calibrators=only_near)
    call = call_for(_dry_day(SUN_CASE_UTC), at=SUN_CASE_UTC, registry=Registry.empty(), site=site)
    assert call.verdict != "astronomical"
    assert "calibrators_near_sun" in call.candidates["astronomical"]["blocked_by"]
    reason = next(r for r in call.reasons if r.rule == "calibrators_near_sun")
    assert "Sun" in reason.message and "30°" in reason.message
    assert f"{call.features['calibrators_sun_closest_deg']:.1f}°" in reason.message
    assert call.features["calibrators_sun_blocked"] >= 1


# --------------------------------------------------------------------------- 2. the atmosphere


def _night_of(pwv_mm, temp_c, site):
    """RH that gives this PWV with the site's scale height (inverse of rho = 216.7 e/T)."""
    rho = pwv_mm / site.atmosphere.water_scale_height_km
    return 100.0 * rho * (temp_c + 273.15) / 216.7 / saturation_vapour_pressure_hpa(temp_c)


def test_humid_and_dry_nights_at_116_ghz(call_for, demo_site):
    """Before: both nights gave "scan, eta 0.40".  Check values: itur
    gaseous_attenuation_slant_path(116 GHz, el 90, approx, V_t, h = 1.05 km) at the nights' surface
    states with the demo pressure (P.835 standard at 1050 m when the feed has no barometer):
    zenith opacities 0.57 (6 mm at +2 C) and 0.99 (35 mm at 22 C) nepers, within 2e-4.  The humid night needs about 6x the
    integration time of the dry reference (radiometer equation, T_sys* at 45 deg, 60 K receiver):
    the call is postpone with a reason naming PWV, opacity and the factor; the dry night is scanned."""
    itur = pytest.importorskip("itur")
    from itur.models.itu676 import gaseous_attenuation_slant_path

    del itur
    site = replace(demo_site, atmosphere=replace(demo_site.atmosphere, reference_pwv_mm=6.0, reference_air_temp_c=2.0))
    calls = {}
    for name, (pwv, temp) in {"dry": (6.0, 2.0), "humid": (35.0, 22.0)}.items():
        table = weather_table(air_temp_c=temp, rel_humidity_pct=_night_of(pwv, temp, site), temp_rate_c_per_h=0.0)
        calls[name] = call = call_for(table, freq_ghz=116.0, site=site)
        f = call.features
        assert f["pwv_mm"] == pytest.approx(pwv, rel=1e-3)
        rho, t_k = f["water_vapour_density_gm3"], temp + 273.15
        pressure = 893.327  # P.835 at 1050 m, as itur.models.itu835.standard_pressure gives it
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            ref_db = gaseous_attenuation_slant_path(
                116.0, 90.0, rho, pressure - rho * t_k / 216.7, t_k, V_t=f["pwv_mm"], h=1.05
            ).value
        assert f["zenith_opacity"] == pytest.approx(ref_db / (10.0 / np.log(10.0)), rel=2e-4)
    dry, humid = calls["dry"], calls["humid"]
    assert dry.features["zenith_opacity"] == pytest.approx(0.57, abs=0.01)
    assert humid.features["zenith_opacity"] == pytest.approx(0.99, abs=0.01)
    assert dry.features["integration_time_factor"] == pytest.approx(1.0, abs=1e-3)  # it is the reference
    assert 5.5 < humid.features["integration_time_factor"] < 7.0
    # a correction on the dry night (which one depends on the session: at 116 GHz holography's
    # better surface pays back its extra half hour within the demo's 4 h session)
    assert dry.verdict in ("scan", "astronomical"), [r.message for r in dry.reasons]
    assert humid.verdict == "postpone"
    for method in ("scan", "astronomical"):
        assert "atmosphere_too_costly" in humid.candidates[method]["blocked_by"]
    reason = next(r for r in humid.reasons if r.rule == "atmosphere_too_costly")
    for text in (
        "PWV 35.0 mm",
        f"{humid.features['zenith_opacity']:.2f} nepers",
        f"{humid.features['integration_time_factor']:.1f}×",
    ):
        assert text in reason.message, reason.message


def test_near_the_oxygen_line_even_a_dry_night_is_opaque(call_for, demo_site):
    """ITU-R P.676: at 118.75 GHz the oxygen line makes the zenith opacity about 10 nepers (itur,
    checked in test_physics_atmosphere.py); the transmission at 45 deg is nil and the call is
    postpone with the opaque-sky reason, however dry the air."""
    call = call_for(weather_table(air_temp_c=-5.0, rel_humidity_pct=40.0), freq_ghz=118.75)
    assert call.features["zenith_opacity"] > 9.0 and call.features["transmission"] < 1e-4
    assert call.verdict == "postpone"
    assert "atmosphere_opaque" in call.candidates["scan"]["blocked_by"]


# --------------------------------------------------------------------------- 3. frost


def test_frost_at_minus_15_with_air_saturated_over_ice(call_for):
    """Before: "scan", no moisture reason (RH 86 % never reaches the fog rule's 97 %).  Check
    value: psychrolib GetTDewPointFromVapPres (over ice below 0 C: a frost point) for the vapour
    pressure of RH_w 86 % at -15 C is -15.0 C within 0.1 C; RH over ice is then ~100 %.  The laser
    is blocked by frost on the surface (and the freezing-fog flag); the reason names the frost
    point spread and both humidities."""
    psychrolib = pytest.importorskip("psychrolib")
    psychrolib.SetUnitSystem(psychrolib.SI)
    call = call_for(weather_table(air_temp_c=-15.0, rel_humidity_pct=86.0, temp_rate_c_per_h=0.0))
    f = call.features
    e_pa = 86.0 * saturation_vapour_pressure_hpa(-15.0)  # RH over water x e_w (Pa)
    assert f["frost_point_c"] == pytest.approx(psychrolib.GetTDewPointFromVapPres(-15.0, e_pa), abs=0.1)
    assert f["frost_point_spread_c"] == pytest.approx(0.0, abs=0.15)
    assert f["rel_humidity_ice_pct"] == pytest.approx(100.0, abs=1.0)
    assert f["below_freezing"] and f["fog"]
    assert call.verdict != "scan"
    assert not call.candidates["scan"]["feasible"]
    assert "frost_on_surface" in call.candidates["scan"]["blocked_by"]
    reason = next(r for r in call.reasons if r.rule == "frost_on_surface")
    assert "saturation over ice" in reason.message and "86 % over water" in reason.message


def test_frost_risk_on_a_clear_cold_night_above_zero(call_for):
    """Air at +1.5 C with a dew point below 0 C a couple of degrees under it: panels radiating to a
    clear night sky run a few C below the air (common practice) and collect frost; a warning, not
    a block.  The frost point is below the air by less than 3 C (Magnus forms, Alduchov & Eskridge
    1996: definitions)."""
    call = call_for(weather_table(air_temp_c=1.5, rel_humidity_pct=82.0))
    assert 0.0 < call.features["frost_point_spread_c"] < 3.0
    assert any(r.rule == "frost_risk_clear_night" and r.effect == "warn" for r in call.reasons)


def test_fog_flag_reads_humidity_over_ice_below_zero(call_for, demo_site):
    """Below 0 C the fog test uses the frost-point spread and RH over ice with the site's thresholds
    (RH over water cannot reach 97 % there when the air is at ice saturation: 86 % at -15 C,
    WMO-No. 8 ch. 4); above 0 C, over water as before."""
    dry_cold = call_for(weather_table(air_temp_c=-15.0, rel_humidity_pct=70.0))
    assert not dry_cold.features["fog"]
    warm_humid = call_for(weather_table(air_temp_c=5.0, rel_humidity_pct=98.5))
    assert warm_humid.features["fog"] and not warm_humid.features["below_freezing"]
    assert "fog_blinds_laser" in warm_humid.candidates["scan"]["blocked_by"]


# --------------------------------------------------------------------------- 4. the polar sun


@pytest.fixture()
def arctic_site(demo_site):
    return replace(demo_site, latitude_deg=70.0, longitude_deg=-114.0, time_zone="UTC")


@pytest.mark.filterwarnings("ignore")
def test_polar_sunrise_at_70_north(call_for, arctic_site):
    """Before the physics fix hours_since_sunrise was 25.8 h (truth ~2.2 h).  Check value:
    astropy's sunrise (the Sun's centre crossing -0.833 deg, bisection to 1 s), within 1 min;
    the Sun is up, so is_night is false; hours since sunset is the night of about half an hour
    before."""
    from .test_physics_sun_polar import _astropy_crossings

    at = pd.Timestamp("2026-05-16T10:00:00Z")
    call = call_for(weather_table(end=at, solar_wm2=150.0), at=at, site=arctic_site)
    f = call.features
    guess = np.array(
        [np.datetime64(at.tz_localize(None)) - np.timedelta64(int(f["hours_since_sunrise"] * 3.6e6), "ms")]
    )
    ref, bracketed = _astropy_crossings(guess, True, 70.0, -114.0)
    assert bracketed.all()
    ref_hours = (np.datetime64(at.tz_localize(None), "ms") - ref[0]).astype(float) / 3.6e6
    assert f["hours_since_sunrise"] == pytest.approx(ref_hours, abs=1 / 60)
    assert 2.0 < f["hours_since_sunrise"] < 2.5
    assert f["is_night"] is False and f["sun_state"] == 1
    assert f["hours_since_sunset"] - f["hours_since_sunrise"] < 1.0


@pytest.mark.filterwarnings("ignore")
@pytest.mark.parametrize("when, state", [("2026-06-21T08:00:00Z", 2), ("2026-12-21T19:00:00Z", -2)])
def test_polar_day_and_polar_night(call_for, arctic_site, when, state):
    """Local midnight at midsummer and local noon at midwinter, 70 N: astropy puts the Sun above
    (below) -0.833 deg all day; our state is polar day (night), is_night follows the Sun, and the
    sun-transition term (sunrise and sunset deformation) does not fire on a day without either."""
    from .test_physics_sun_polar import _astropy_elevation_deg

    at = pd.Timestamp(when)
    day = pd.date_range(at - pd.Timedelta(hours=12), at + pd.Timedelta(hours=12), freq="30min").tz_localize(None)
    elevations = _astropy_elevation_deg(day.to_numpy(), 70.0, -114.0)
    assert (elevations > -0.833).all() if state == 2 else (elevations < -0.833).all()
    call = call_for(weather_table(end=at), at=at, site=arctic_site)
    assert call.features["sun_state"] == state
    assert call.features["is_night"] is (state < 0)
    assert not call.features["sun_transition"]
