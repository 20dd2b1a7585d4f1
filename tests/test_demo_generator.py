"""Tests of the invented demo weather generator, example_weather/make_demo.py.

The data are invented.  The checks compare them with the demo story the project asked for
(the invented "Larch Basin Observatory" of example_weather/README.md) and with physical sanity; no generated
number is used as an expected value.  Unit conversions and the dew point are computed here,
independently of the script, from the sources named beside them.
"""

from __future__ import annotations

import functools
import importlib.util
import subprocess
import sys
from pathlib import Path
from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd
import pytest

ROOT = Path(__file__).resolve().parents[1]
SCRIPT = ROOT / "example_weather" / "make_demo.py"


def _load_script():
    spec = importlib.util.spec_from_file_location("make_demo_under_test", SCRIPT)
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module
    spec.loader.exec_module(module)
    return module


md = _load_script()

# International nautical mile = 1852 m exactly (BIPM, The International System of Units,
# 9th ed. 2019, Table 8), so 1 kn = 1852/3600 m/s.
MS_PER_KN = 1852.0 / 3600.0
EXPECTED_COLUMNS = [
    "timestamp",
    "wind_avg_kn",
    "wind_max_kn",
    "temp_f",
    "rh_pct",
    "baro_hpa",
    "rain_mm_h",
    "vis_m",
    "solar_wm2",
]
SEEDS = [md.DEFAULT_SEED, 1, 2024]  # the story must not hang on one lucky seed


def to_si(frame: pd.DataFrame) -> pd.DataFrame:
    """Logger units -> SI with a UTC index, and the dew point.

    degF -> degC: t_c = (t_f - 32) * 5/9 (NIST SP 811, 2008, appendix B.8).
    Dew point: inverse Magnus form over water with Alduchov & Eskridge (1996) coefficients
    a = 17.625, b = 243.04 degC (J. Appl. Meteor. 35, 601-609).
    """
    time_utc = pd.DatetimeIndex(pd.to_datetime(frame["timestamp"], format="ISO8601", utc=True))
    temp_c = (frame["temp_f"].to_numpy() - 32.0) * 5.0 / 9.0
    rh = frame["rh_pct"].to_numpy()
    a, b = 17.625, 243.04
    gamma = np.log(np.clip(rh, 0.1, 100.0) / 100.0) + a * temp_c / (b + temp_c)
    dew_c = b * gamma / (a - gamma)
    return pd.DataFrame(
        {
            "wind_mean_ms": frame["wind_avg_kn"].to_numpy() * MS_PER_KN,
            "wind_gust_ms": frame["wind_max_kn"].to_numpy() * MS_PER_KN,
            "air_temp_c": temp_c,
            "rel_humidity_pct": rh,
            "pressure_hpa": frame["baro_hpa"].to_numpy(),
            "precip_mm_h": frame["rain_mm_h"].to_numpy(),
            "visibility_m": frame["vis_m"].to_numpy(),
            "solar_wm2": frame["solar_wm2"].to_numpy(),
            "dew_point_c": dew_c,
            "dew_point_spread_c": temp_c - dew_c,
        },
        index=time_utc,
    )


@functools.cache
def demo_week(seed: int = md.DEFAULT_SEED) -> pd.DataFrame:
    return md.synth_mast(seed=seed, scenario="demo_week")


@functools.cache
def generic_month() -> pd.DataFrame:
    # 15 Oct - 15 Nov 2026 crosses the end of US daylight saving time (1 Nov 2026)
    return md.synth_mast("2026-10-15T00:00", "2026-11-15T00:00", scenario=None)


@functools.cache
def generic_november(seed: int) -> pd.DataFrame:
    # local (MST/MDT) 1 Nov 00:00 to 30 Nov 23:59
    return md.synth_mast("2026-11-01T06:00", "2026-12-01T06:59", seed=seed)


# --- format, units, ranges ---------------------------------------------------------------
@pytest.mark.parametrize("which", ["demo_week", "generic_month"])
def test_columns_units_and_physical_ranges(which):
    frame = demo_week() if which == "demo_week" else generic_month()
    assert list(frame.columns) == EXPECTED_COLUMNS
    si = to_si(frame)
    assert (si["wind_mean_ms"] >= 0).all()
    assert si["wind_gust_ms"].max() < 35.0
    assert si["air_temp_c"].between(-40.0, 40.0).all()
    assert si["rel_humidity_pct"].between(0.0, 100.0).all()
    assert si["pressure_hpa"].between(880.0, 910.0).all()  # station at 1050 m
    assert (si["precip_mm_h"] >= 0).all()
    assert si["visibility_m"].between(10, 50_000).all()
    # clear-sky GHI at this latitude stays well below ~1100 W/m2 (Haurwitz 1945 model scale)
    assert si["solar_wm2"].between(0, 1100).all()
    # logger resolution: 0.1 kn, 0.1 degF, 0.1 %, 0.1 hPa, 0.1 mm/h, 10 m, 1 W/m2
    for column in ("wind_avg_kn", "wind_max_kn", "temp_f", "rh_pct", "baro_hpa", "rain_mm_h"):
        tenths = frame[column].to_numpy() * 10.0
        assert np.allclose(tenths, np.round(tenths), atol=1e-6), column
    assert (frame["vis_m"] % 10 == 0).all()
    assert frame["solar_wm2"].dtype.kind == "i"


@pytest.mark.parametrize("which", ["demo_week", "generic_month"])
def test_gust_is_never_below_mean_and_gust_factor_is_plausible(which):
    frame = demo_week() if which == "demo_week" else generic_month()
    assert (frame["wind_max_kn"] >= frame["wind_avg_kn"]).all()
    si = to_si(frame)
    windy = si[si["wind_mean_ms"] >= 2.0]
    factor = windy["wind_gust_ms"] / windy["wind_mean_ms"]
    # 1-min gust factors of about 1.2-1.9 over land: common practice (WMO-No. 8 discusses
    # gust factors; exact values from memory)
    assert factor.between(1.15, 1.95).all()


def test_timestamps_are_local_iso8601_with_offset():
    frame = demo_week()
    assert frame["timestamp"].str.fullmatch(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d[+-]\d\d:\d\d").all()
    assert frame["timestamp"].iloc[-1] == "2026-11-30T20:00:00-07:00"
    summer = md.synth_mast("2026-07-01T18:00", "2026-07-01T18:02")
    assert summer["timestamp"].tolist() == [
        "2026-07-01T12:00:00-06:00",
        "2026-07-01T12:01:00-06:00",
        "2026-07-01T12:02:00-06:00",
    ]


def test_generic_month_is_continuous_at_one_minute_across_dst_end():
    frame = generic_month()
    assert not frame["timestamp"].duplicated().any()
    time_utc = pd.DatetimeIndex(pd.to_datetime(frame["timestamp"], format="ISO8601", utc=True))
    assert time_utc[0] == pd.Timestamp("2026-10-15T00:00Z")
    assert time_utc[-1] == pd.Timestamp("2026-11-15T00:00Z")
    assert ((time_utc[1:] - time_utc[:-1]) == pd.Timedelta(minutes=1)).all()
    assert len(frame) == 31 * 1440 + 1
    # Offsets agree with the IANA tz database (via the standard library's zoneinfo) on a
    # sample of rows, including the repeated local hour of 1 Nov 2026.
    tz = ZoneInfo("America/Denver")
    sample = np.r_[np.arange(0, len(frame), 997), np.flatnonzero(frame["timestamp"].str.startswith("2026-11-01T01:"))]
    for i in sample:
        utc = time_utc[i].to_pydatetime()
        assert utc.tzinfo is not None and utc.utcoffset().total_seconds() == 0
        assert frame["timestamp"].iloc[i] == utc.astimezone(tz).isoformat()
    repeated = frame["timestamp"].str.startswith("2026-11-01T01:30:00")
    assert sorted(frame.loc[repeated, "timestamp"]) == ["2026-11-01T01:30:00-06:00", "2026-11-01T01:30:00-07:00"]


def test_generic_weather_does_not_depend_on_the_requested_range_or_cadence():
    month = generic_month()
    inner = md.synth_mast("2026-11-03T05:00", "2026-11-04T05:00")
    start = month.index[month["timestamp"] == "2026-11-02T22:00:00-07:00"][0]
    pd.testing.assert_frame_equal(month.iloc[start : start + len(inner)].reset_index(drop=True), inner)
    coarse = md.synth_mast("2026-11-03T05:00", "2026-11-04T05:00", cadence_min=10)
    pd.testing.assert_frame_equal(coarse, inner.iloc[::10].reset_index(drop=True))


# --- determinism -------------------------------------------------------------------------
def test_same_seed_gives_byte_identical_files_and_another_seed_does_not(tmp_path):
    for folder, seed in (("a", md.DEFAULT_SEED), ("b", md.DEFAULT_SEED), ("c", 1)):
        md.write_demo(tmp_path / folder, seed=seed)
    for name in (md.DEMO_MAST_FILE, md.DEMO_REFERENCES_FILE):
        assert (tmp_path / "a" / name).read_bytes() == (tmp_path / "b" / name).read_bytes()
    assert (tmp_path / "a" / md.DEMO_MAST_FILE).read_bytes() != (tmp_path / "c" / md.DEMO_MAST_FILE).read_bytes()


def test_committed_demo_files_match_the_generator(tmp_path):
    md.write_demo(tmp_path)
    for name in (md.DEMO_MAST_FILE, md.DEMO_REFERENCES_FILE):
        committed = SCRIPT.parent / name
        assert committed.exists(), f"{committed} missing: run make_demo.py demo"
        ours, fresh = pd.read_csv(committed), pd.read_csv(tmp_path / name)
        # Equal up to one logger rounding step: another numpy/libm build may round a last digit
        # the other way; anything larger means the committed file is stale.
        assert list(ours.columns) == list(fresh.columns) and len(ours) == len(fresh), (
            f"{name} is stale: run python example_weather/make_demo.py demo"
        )
        for col in ours.columns:
            if pd.api.types.is_numeric_dtype(ours[col]):
                levels = np.unique(ours[col].dropna().to_numpy())
                step = np.diff(levels).min() if len(levels) > 1 else 0.0
                diff = (ours[col] - fresh[col]).abs().fillna(0.0)
                assert (diff <= step * 1.01).all() and (diff > 0).mean() < 0.001, (
                    f"{name}:{col} is stale: run python example_weather/make_demo.py demo"
                )
            else:
                assert (ours[col] == fresh[col]).all(), f"{name}:{col} is stale"


# --- generic physical behaviour ----------------------------------------------------------
@pytest.mark.parametrize("seed", SEEDS)
def test_late_autumn_diurnal_cycle_and_valley_winds(seed):
    """Diurnal cycle and winds of a generic November.

    Minimum near sunrise, maximum mid-afternoon, clear-day range of roughly 8-12 degC and
    light nocturnal winds are textbook valley climatology (e.g. Oke, *Boundary Layer
    Climates*, 2nd ed. 1987, ch. 2 and 5; values from memory, common practice).
    """
    local = to_si(generic_november(seed)).tz_convert("America/Denver")
    by_day = local["air_temp_c"].groupby(local.index.date)
    daily_range = by_day.max() - by_day.min()
    assert 8.0 <= daily_range.median() <= 12.0
    hour_min = by_day.idxmin().map(lambda t: t.hour + t.minute / 60.0)
    hour_max = by_day.idxmax().map(lambda t: t.hour + t.minute / 60.0)
    assert 6.0 <= hour_min.median() <= 9.5  # sunrise about 07:00-07:45 MST in November
    assert 13.0 <= hour_max.median() <= 16.0
    assert (by_day.min() < 0.5).sum() >= 15  # cold nights near or below 0 degC
    hour = local.index.hour
    night = local.loc[hour < 5, "wind_mean_ms"]
    afternoon = local.loc[(hour >= 12) & (hour < 16), "wind_mean_ms"]
    assert 0.5 <= night.median() <= 2.5
    assert afternoon.median() > night.median()
    assert afternoon.quantile(0.95) >= 5.0


def test_solar_irradiance_follows_the_sun_from_astropy():
    """GHI is zero with the sun below the horizon and positive well above it.

    Sun altitude from astropy (reference library, test-only), offline: no IERS download.
    """
    from astropy import units as u
    from astropy.coordinates import AltAz, EarthLocation, get_sun
    from astropy.time import Time
    from astropy.utils import iers

    si = to_si(demo_week()).iloc[::10]
    site = EarthLocation(lat=47.120 * u.deg, lon=-114.000 * u.deg, height=1050.0 * u.m)
    with (
        iers.conf.set_temp("auto_download", False),
        iers.conf.set_temp("auto_max_age", None),
        iers.conf.set_temp("iers_degraded_accuracy", "ignore"),
    ):
        when = Time(si.index.tz_convert(None).to_pydatetime(), scale="utc")
        alt_deg = get_sun(when).transform_to(AltAz(obstime=when, location=site)).alt.deg
    solar = si["solar_wm2"].to_numpy()
    assert (solar[alt_deg < -0.5] == 0).all()
    assert (solar[alt_deg > 8.0] > 0).all()
    # never above ~1.1 x a clear sky (Haurwitz 1945: 1098 cos z exp(-0.057 / cos z))
    sin_alt = np.sin(np.radians(np.clip(alt_deg, 0.5, 90.0)))
    clear_sky = 1098.0 * sin_alt * np.exp(-0.057 / sin_alt)
    assert (solar <= 1.15 * clear_sky + 5.0).all()


# --- the demo-week story -----------------------------------------------------------------
def test_demo_week_is_seven_days_ending_at_0300z():
    si = to_si(demo_week())
    assert si.index[0] == pd.Timestamp("2026-11-24T03:00Z")
    assert si.index[-1] == pd.Timestamp("2026-12-01T03:00Z")
    assert len(si) == 7 * 1440 + 1


@pytest.mark.parametrize("seed", SEEDS)
def test_demo_week_has_one_rain_spell_of_a_few_hours(seed):
    si = to_si(demo_week(seed))
    raining = si[si["precip_mm_h"] > 0]
    local_days = set(raining.index.tz_convert("America/Denver").date)
    assert len(local_days) == 1
    span_h = (raining.index[-1] - raining.index[0]) / pd.Timedelta(hours=1)
    assert 2.0 <= span_h <= 8.0
    assert len(raining) >= 0.9 * 60 * span_h  # one spell, not scattered showers
    assert (raining["rel_humidity_pct"] >= 95.0).all()
    assert raining["visibility_m"].between(1_000, 10_000).all()  # "a few km" in rain
    # solar reduced: daytime rain minutes get < 40 % of the week's best at that clock time
    best = si["solar_wm2"].groupby(si.index.hour * 60 + si.index.minute).max()
    best_at_rain = best.reindex(raining.index.hour * 60 + raining.index.minute).to_numpy()
    lit = best_at_rain > 50.0
    assert lit.sum() > 60
    assert raining["solar_wm2"].to_numpy()[lit].sum() < 0.4 * best_at_rain[lit].sum()


@pytest.mark.parametrize("seed", SEEDS)
def test_foggy_valley_morning_on_30_november(seed):
    """Fog: visibility below 1 km (WMO definition), RH >= 97 %, spread < 1 degC."""
    fog = to_si(demo_week(seed)).loc["2026-11-30T13:00Z":"2026-11-30T17:00Z"]
    assert len(fog) == 241
    assert (fog["rel_humidity_pct"] >= 97.0).all()
    assert (fog["dew_point_spread_c"] < 1.0).all()
    assert (fog["visibility_m"] < 1_000).all()
    assert (fog["wind_mean_ms"] < 2.5).all()  # radiation fog needs calm air


@pytest.mark.parametrize("seed", SEEDS)
def test_windy_afternoon_on_30_november(seed):
    windy = to_si(demo_week(seed)).loc["2026-11-30T19:00Z":"2026-11-30T23:00Z"]
    assert 6.0 <= windy["wind_mean_ms"].mean() <= 9.0
    assert windy["wind_mean_ms"].between(5.0, 10.0).all()
    assert 10.0 <= windy["wind_gust_ms"].median() <= 14.0
    assert windy["wind_gust_ms"].max() <= 14.0


@pytest.mark.parametrize("seed", SEEDS)
def test_calm_dry_clear_evening_at_the_end(seed):
    si = to_si(demo_week(seed))
    evening = si.loc["2026-12-01T00:00Z":"2026-12-01T03:00Z"]
    assert len(evening) == 181
    assert (evening["wind_mean_ms"] < 2.0).all()
    assert (evening["wind_gust_ms"] < 3.5).all()
    assert (evening["precip_mm_h"] == 0).all()
    assert evening["rel_humidity_pct"].between(60.0, 80.0).all()
    assert (evening["dew_point_spread_c"] > 3.0).all()
    assert (evening["visibility_m"] >= 10_000).all()
    temp = evening["air_temp_c"]
    hourly_change = (temp - temp.shift(60)).dropna()
    assert hourly_change.between(-1.5, 0.0).all()  # falling, gently
    hours = (evening.index - evening.index[0]) / pd.Timedelta(hours=1)
    slope_c_per_h = np.polyfit(hours, temp.to_numpy(), 1)[0]
    assert -1.5 < slope_c_per_h < -0.2
    sunset_side = si.loc["2026-11-30T23:40Z":"2026-12-01T03:00Z", "solar_wm2"]
    assert (sunset_side == 0).all()  # after sunset


def test_reference_registry_matches_the_demo_feed():
    frame = demo_week()
    refs = md.reference_scans(frame)
    assert list(refs.columns) == ["time", "air_temp_c", "note"]
    assert 4 <= len(refs) <= 6
    assert refs["time"].str.fullmatch(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\dZ").all()
    when = pd.DatetimeIndex(pd.to_datetime(refs["time"], utc=True))
    assert when.is_monotonic_increasing and when.is_unique
    assert when[-1] == pd.Timestamp("2026-12-01T01:30:00Z")
    assert when[0] >= pd.Timestamp(md.DEMO_START_UTC)
    si = to_si(frame)
    expected_c = np.round(si.loc[when, "air_temp_c"].to_numpy(), 1)
    np.testing.assert_allclose(refs["air_temp_c"].to_numpy(), expected_c, atol=1e-9)
    assert refs["note"].str.contains("astronomical correction").all()


# --- API errors and CLI ------------------------------------------------------------------
def test_bad_arguments_are_rejected():
    with pytest.raises(ValueError, match="scenario"):
        md.synth_mast("2026-01-01", "2026-01-02", scenario="storm")
    with pytest.raises(ValueError, match="required"):
        md.synth_mast()
    with pytest.raises(ValueError, match="before"):
        md.synth_mast("2026-01-02", "2026-01-01")
    with pytest.raises(ValueError, match="cadence"):
        md.synth_mast("2026-01-01", "2026-01-02", cadence_min=0)
    with pytest.raises(ValueError, match="whole minute"):
        md.synth_mast("2026-01-01T00:00:30", "2026-01-02")


def test_cli_writes_demo_files_under_one_megabyte_and_an_archive(tmp_path, capsys):
    demo = subprocess.run(
        [sys.executable, str(SCRIPT), "demo", "--outdir", str(tmp_path)], capture_output=True, text=True, check=False
    )
    assert demo.returncode == 0, demo.stderr
    mast = tmp_path / md.DEMO_MAST_FILE
    assert mast.stat().st_size < 1_000_000
    assert (tmp_path / md.DEMO_REFERENCES_FILE).exists()
    out = tmp_path / "archive.csv"  # the same CLI, called in-process to keep the test fast
    assert md.main(["archive", "--start", "2026-03-07", "--end", "2026-03-09", "--out", str(out)]) == 0
    written = pd.read_csv(out)
    assert list(written.columns) == EXPECTED_COLUMNS
    assert len(written) == 2 * 1440 + 1
    # spring forward on 8 Mar 2026 (IANA tz database): MST before, MDT after
    assert written["timestamp"].iloc[0].endswith("-07:00")
    assert written["timestamp"].iloc[-1].endswith("-06:00")
    assert md.main(["archive", "--start", "2026-03-09", "--end", "2026-03-07", "--out", str(tmp_path / "bad.csv")]) == 2
    assert "error" in capsys.readouterr().err
