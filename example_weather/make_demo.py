"""Invented weather-mast data for the fictional "Larch Basin Observatory" demo site.

Nothing here is a measurement: the site, the mast and every number are made up so the
advisor has something realistic-looking to read.  The mast logs once a minute in its own
(non-SI) units, which exercises the feed's unit mapping::

    synth_mast(start_utc, end_utc, cadence_min=1, seed=DEFAULT_SEED, scenario=None)
        -> DataFrame: timestamp (local ISO 8601 with offset), wind_avg_kn, wind_max_kn,
           temp_f, rh_pct, baro_hpa, rain_mm_h, vis_m, solar_wm2
    reference_scans(mast)  -> DataFrame: time (UTC, "Z"), air_temp_c, note
    python example_weather/make_demo.py demo                  # the committed demo files
    python example_weather/make_demo.py archive --start 2025-12-01 --end 2026-12-01 --out F

How the weather is made (all vectorised, no loop over rows):

* Every random ingredient is a pure function of absolute time and the seed: slow
  "synoptic" fields are sums of sinusoids with seeded periods and phases, per-day choices
  (afternoon windiness, rain spells) come from a counter-based hash of the day number, and
  minute-scale noise from the same hash of the minute number.  So the weather at an instant
  does not depend on the requested range: a slice of a one-year archive equals a short run
  over the same minutes.
* The random weather is first expressed as a handful of slowly varying *drivers* (cloud
  fraction, slow wind, dew-point deficit, ...).  The ``demo_week`` scenario then overwrites
  some drivers in named time windows (``DEMO_WEEK_OVERRIDES``), each with a stated reason,
  and the logged quantities are derived from the drivers by the same code in both modes.

Both ends of ``[start_utc, end_utc]`` are included when they fall on the cadence grid.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import NamedTuple
from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd

# --- the invented site -------------------------------------------------------------------
SITE_NAME = "Larch Basin Observatory (fictional)"
SITE_LAT_DEG = 47.120
SITE_LON_DEG = -114.000  # east positive
SITE_ELEVATION_M = 1050.0
SITE_TZ = "America/Denver"

DEFAULT_SEED = 47120
DEMO_START_UTC = "2026-11-24T03:00:00Z"
DEMO_END_UTC = "2026-12-01T03:00:00Z"

COLUMNS = (
    "timestamp",
    "wind_avg_kn",
    "wind_max_kn",
    "temp_f",
    "rh_pct",
    "baro_hpa",
    "rain_mm_h",
    "vis_m",
    "solar_wm2",
)
KN_PER_MS = 3600.0 / 1852.0  # international nautical mile = 1852 m
VIS_CAP_M = 50_000

HERE = Path(__file__).resolve().parent
DEMO_MAST_FILE = "larch_basin_mast.csv"
DEMO_REFERENCES_FILE = "references.csv"

_MASK64 = (1 << 64) - 1


# --- counter-based randomness (pure functions of an integer counter) ---------------------
def _splitmix64_int(x: int) -> int:
    """SplitMix64 finaliser on a Python int (used for scalar keys)."""
    x = (x + 0x9E3779B97F4A7C15) & _MASK64
    x = ((x ^ (x >> 30)) * 0xBF58476D1CE4E5B9) & _MASK64
    x = ((x ^ (x >> 27)) * 0x94D049BB133111EB) & _MASK64
    return x ^ (x >> 31)


def _hash_uniform(counter: np.ndarray, seed: int, stream: int) -> np.ndarray:
    """Uniform (0, 1) numbers, one per integer counter, fixed by (seed, stream).

    A SplitMix64 mix of ``counter * golden + key``; uint64 arithmetic wraps by design.
    """
    key = np.uint64(_splitmix64_int(_splitmix64_int(seed & _MASK64) ^ (stream & _MASK64)))
    x = np.asarray(counter, dtype=np.int64).astype(np.uint64)
    x = x * np.uint64(0x9E3779B97F4A7C15) + key
    x = (x ^ (x >> np.uint64(30))) * np.uint64(0xBF58476D1CE4E5B9)
    x = (x ^ (x >> np.uint64(27))) * np.uint64(0x94D049BB133111EB)
    x = x ^ (x >> np.uint64(31))
    return ((x >> np.uint64(11)).astype(np.float64) + 0.5) * 2.0**-53


def _hash_normal(counter: np.ndarray, seed: int, stream: int) -> np.ndarray:
    """Standard normal numbers per counter (Box-Muller on two hash streams)."""
    u1 = _hash_uniform(counter, seed, stream)
    u2 = _hash_uniform(counter, seed, stream + 100_003)
    return np.sqrt(-2.0 * np.log(u1)) * np.cos(2.0 * np.pi * u2)


def _sinusoid_field(
    t: np.ndarray, seed: int, stream: int, period_lo: float, period_hi: float, n: int = 12, slope: float = 0.5
) -> np.ndarray:
    """Smooth random field with unit standard deviation: a sum of ``n`` sinusoids.

    Periods are log-uniform in [period_lo, period_hi] (same unit as ``t``), amplitudes grow
    as period**slope (red spectrum), phases are uniform; all fixed by (seed, stream).
    """
    rng = np.random.default_rng([seed & _MASK64, stream])
    periods = np.exp(rng.uniform(np.log(period_lo), np.log(period_hi), n))
    phases = rng.uniform(0.0, 2.0 * np.pi, n)
    amps = periods**slope * rng.uniform(0.5, 1.0, n)
    amps = amps / np.sqrt(0.5 * np.sum(amps**2))
    out = np.zeros(np.shape(t))
    for amp, period, phase in zip(amps, periods, phases):  # over components, not rows
        out += amp * np.cos(2.0 * np.pi * t / period + phase)
    return out


def _smoothstep(x: np.ndarray) -> np.ndarray:
    x = np.clip(x, 0.0, 1.0)
    return x * x * (3.0 - 2.0 * x)


def _box(t_min: np.ndarray, start_min, end_min, ramp_min) -> np.ndarray:
    """Weight 1 on [start, end], smooth 0→1 / 1→0 ramps of ``ramp_min`` outside it."""
    ramp = np.maximum(ramp_min, 1e-9)
    return _smoothstep((t_min - (start_min - ramp)) / ramp) * _smoothstep(((end_min + ramp) - t_min) / ramp)


def _value_noise(day: np.ndarray, seed: int, stream: int) -> np.ndarray:
    """Smooth 0..1 noise: one hashed value per whole day, smoothstep-interpolated."""
    d0 = np.floor(day)
    w = _smoothstep(day - d0)
    u0 = _hash_uniform(d0.astype(np.int64), seed, stream)
    u1 = _hash_uniform(d0.astype(np.int64) + 1, seed, stream)
    return u0 + (u1 - u0) * w


# --- compact sun geometry (approximate; fine for invented data) --------------------------
def _sun(t_min: np.ndarray, lat_deg: float, lon_deg: float) -> dict[str, np.ndarray]:
    """Approximate sun elevation and local solar time.

    Fractional-year Fourier series for declination and equation of time (Spencer 1971, as
    used by the NOAA "general solar position" notes); accuracy ~0.1-0.2 deg, no refraction.

    Returns elevation [deg], solar hour [h, 0-24], solar day number [-], declination [rad].
    """
    when = t_min.astype("datetime64[m]")
    year0 = when.astype("datetime64[Y]").astype("datetime64[m]")
    day_of_year0 = (when - year0).astype(np.float64) / 1440.0  # 0 at 1 Jan 00:00 UTC
    g = 2.0 * np.pi / 365.0 * (day_of_year0 - 0.5)
    eqtime_min = 229.18 * (
        0.000075 + 0.001868 * np.cos(g) - 0.032077 * np.sin(g) - 0.014615 * np.cos(2 * g) - 0.040849 * np.sin(2 * g)
    )
    decl = (
        0.006918
        - 0.399912 * np.cos(g)
        + 0.070257 * np.sin(g)
        - 0.006758 * np.cos(2 * g)
        + 0.000907 * np.sin(2 * g)
        - 0.002697 * np.cos(3 * g)
        + 0.00148 * np.sin(3 * g)
    )
    solar_min = t_min.astype(np.float64) + eqtime_min + 4.0 * lon_deg  # apparent solar time
    solar_hour = np.mod(solar_min / 60.0, 24.0)
    solar_day = np.floor(solar_min / 1440.0)
    lat = np.radians(lat_deg)
    hour_angle = np.radians(15.0 * (solar_hour - 12.0))
    sin_el = np.sin(lat) * np.sin(decl) + np.cos(lat) * np.cos(decl) * np.cos(hour_angle)
    elevation_deg = np.degrees(np.arcsin(np.clip(sin_el, -1.0, 1.0)))
    return {"elevation_deg": elevation_deg, "solar_hour": solar_hour, "solar_day": solar_day, "decl_rad": decl}


def _day_length_h(decl: np.ndarray, lat_deg: float) -> np.ndarray:
    """Day length [h] with the usual -0.833 deg sunrise/sunset elevation."""
    lat = np.radians(lat_deg)
    cos_h0 = (np.sin(np.radians(-0.833)) - np.sin(lat) * np.sin(decl)) / (np.cos(lat) * np.cos(decl))
    return 2.0 * np.degrees(np.arccos(np.clip(cos_h0, -1.0, 1.0))) / 15.0


def _diurnal_temperature_shape(h: np.ndarray, day_len_h: np.ndarray) -> np.ndarray:
    """0..1 diurnal temperature shape over solar hour ``h``.

    0 half an hour after sunrise, a half-cosine rise to 1 in mid-afternoon
    (13.0 + 0.12 * day length, solar time), then a smooth decay
    ``(1 + k u) exp(-k u)`` (k = 0.3 /h) back to 0 by the next morning: fastest cooling
    around sunset, slower through the night.  Continuous with a continuous slope.
    """
    hour_coldest = 12.0 - day_len_h / 2.0 + 0.5
    hour_warmest = 13.0 + 0.12 * day_len_h
    rise = hour_warmest - hour_coldest
    u_rise = h - hour_coldest
    f_rise = 0.5 - 0.5 * np.cos(np.pi * np.clip(u_rise, 0.0, None) / rise)
    k = 0.3
    u = np.mod(h - hour_warmest, 24.0)
    span = 24.0 - rise

    def g(x):
        return (1.0 + k * x) * np.exp(-k * x)

    f_fall = (g(u) - g(span)) / (1.0 - g(span))
    return np.where((u_rise >= 0.0) & (u_rise < rise), f_rise, np.clip(f_fall, 0.0, 1.0))


def _afternoon_wind_shape(h: np.ndarray, day_len_h: np.ndarray) -> np.ndarray:
    """0..1 bump for daytime mixing: from 1 h after sunrise, peak mid-afternoon, gone 1.5 h after sunset."""
    start = 12.0 - day_len_h / 2.0 + 1.0
    peak = 13.5 + 0.12 * day_len_h
    end = 12.0 + day_len_h / 2.0 + 1.5
    up = np.sin(0.5 * np.pi * np.clip((h - start) / (peak - start), 0.0, 1.0)) ** 2
    down = np.cos(0.5 * np.pi * np.clip((h - peak) / (end - peak), 0.0, 1.0)) ** 2
    return np.where(h < peak, up, down)


def _sat_vapour_hpa(temp_c: np.ndarray) -> np.ndarray:
    """Saturation vapour pressure over water [hPa], Magnus form, Alduchov & Eskridge (1996)."""
    return 6.1094 * np.exp(17.625 * temp_c / (temp_c + 243.04))


# --- the scenario: explicit overrides of the drivers -------------------------------------
class Override(NamedTuple):
    """Set driver ``field`` to ``value`` on [start, end] (UTC), blending over ``ramp_min``.

    With ``value_end`` the target moves linearly from ``value`` at start to ``value_end``
    at end (and stays at the end values on the ramps).
    """

    field: str
    start_utc: str
    end_utc: str
    ramp_min: float
    value: float
    why: str
    value_end: float | None = None


# Applied in order: x <- x * (1 - w) + value * w, w from _box().  Times are UTC.
# ``random_rain`` scales the seeded rain spells before the other drivers are built from
# them; every other field is one of the drivers listed in ``synth_mast``.
DEMO_WEEK_OVERRIDES: tuple[Override, ...] = (
    # the whole week: the story has exactly one rain spell, so the random ones are switched off
    Override(
        "random_rain",
        "2026-11-23T00:00",
        "2026-12-02T00:00",
        0,
        0.0,
        "no random rain spells (nor their cloud, wind and cooling) in the demo week",
    ),
    # 26-27 Nov: a weak front; mild air ahead of it, pressure trough, a morning of rain on 27 Nov
    Override(
        "temp_offset_c",
        "2026-11-26T12:00",
        "2026-11-27T21:00",
        360,
        3.5,
        "mild air ahead of the front (rain, not snow)",
    ),
    Override(
        "pressure_anom_hpa", "2026-11-27T12:00", "2026-11-27T20:00", 1080, -5.0, "pressure trough of the passing front"
    ),
    Override("cloud_frac", "2026-11-27T12:00", "2026-11-27T22:30", 150, 1.0, "overcast around the rain"),
    Override(
        "rain_mm_h", "2026-11-27T16:00", "2026-11-27T20:30", 30, 1.6, "rain spell 09:00-13:30 local, about 1-3 mm/h"
    ),
    Override(
        "rain_moist",
        "2026-11-27T15:30",
        "2026-11-27T21:30",
        90,
        1.0,
        "air near saturation while it rains (RH 95-100 %), drying slowly after",
    ),
    Override("wind_slow_ms", "2026-11-27T15:00", "2026-11-27T21:00", 90, 3.2, "moderate breeze with the front"),
    # 29-30 Nov night: clear and calm in the valley, so it cools to the dew point
    Override(
        "cloud_frac",
        "2026-11-29T20:00",
        "2026-12-01T06:00",
        120,
        0.05,
        "clear sky from the night before the fog to the end of the week",
    ),
    Override(
        "wind_slow_ms",
        "2026-11-29T23:00",
        "2026-11-30T17:00",
        90,
        0.8,
        "calm valley night and morning (radiation fog needs calm)",
    ),
    Override("turb_rel", "2026-11-29T23:00", "2026-11-30T17:00", 90, 0.25, "light, meandering wind"),
    # 30 Nov 06:00-10:00 local (13:00-17:00 UTC): valley fog
    Override(
        "fog_hold",
        "2026-11-30T13:00",
        "2026-11-30T17:00",
        45,
        1.0,
        "valley fog: air saturated, morning warming held back until the fog lifts",
    ),
    # 30 Nov 12:00-16:00 local (19:00-23:00 UTC): windy afternoon
    Override("wind_slow_ms", "2026-11-30T19:00", "2026-11-30T23:00", 30, 7.4, "windy afternoon: mean about 7.4 m/s"),
    Override(
        "turb_rel",
        "2026-11-30T19:00",
        "2026-11-30T23:00",
        30,
        0.06,
        "steady strong wind: 1-min means stay within about 6-9 m/s",
    ),
    Override("gust_base", "2026-11-30T19:00", "2026-11-30T23:00", 30, 1.40, "gust factor about 1.4: gusts 10-14 m/s"),
    # 30 Nov evening (after sunset ~23:40 UTC): calm, dry, clear, slowly cooling
    Override("wind_slow_ms", "2026-11-30T23:40", "2026-12-01T06:00", 40, 0.9, "wind dies at sunset: calm evening"),
    Override(
        "turb_rel", "2026-11-30T23:40", "2026-12-01T06:00", 40, 0.15, "calm evening: little minute-to-minute variation"
    ),
    Override(
        "gust_base", "2026-11-30T23:40", "2026-12-01T06:00", 40, 1.45, "calm evening: gusts stay below about 2.5 m/s"
    ),
    Override(
        "dew_deficit_c",
        "2026-11-30T18:00",
        "2026-12-01T00:00",
        120,
        -0.8,
        "dew point a little above the coming night's minimum: RH 60-80 % in the evening",
    ),
    Override(
        "dew_deficit_c",
        "2026-12-01T00:00",
        "2026-12-01T06:00",
        120,
        -0.8,
        "dew point falls slowly (~0.1 degC/h) as dew and frost form",
        value_end=-0.2,
    ),
    Override(
        "temp_amp_scale",
        "2026-11-30T00:00",
        "2026-12-01T06:00",
        240,
        0.80,
        "modest day-night range on 30 Nov: the evening cools gently (< 1.5 degC/h)",
    ),
    Override(
        "temp_synoptic_c",
        "2026-11-29T12:00",
        "2026-12-01T06:00",
        720,
        0.0,
        "steady air mass through the fog, wind and evening: no synoptic warming/cooling",
    ),
)


def _to_utc(value) -> pd.Timestamp:
    ts = pd.Timestamp(value)
    return ts.tz_localize("UTC") if ts.tzinfo is None else ts.tz_convert("UTC")


def _minutes_since_epoch(value) -> int:
    ts = _to_utc(value)
    if ts.second or ts.microsecond or ts.nanosecond:
        raise ValueError(f"time {value!r} is not on a whole minute")
    return int((ts - pd.Timestamp(0, tz="UTC")) // pd.Timedelta(minutes=1))


def _apply_overrides(drivers: dict[str, np.ndarray], t_min: np.ndarray, overrides: tuple[Override, ...]) -> None:
    for ov in overrides:
        if ov.field not in drivers:
            raise KeyError(f"override names unknown driver {ov.field!r}")
        start, end = _minutes_since_epoch(ov.start_utc), _minutes_since_epoch(ov.end_utc)
        w = _box(t_min, start, end, ov.ramp_min)
        target = ov.value
        if ov.value_end is not None:
            frac = np.clip((t_min - start) / max(end - start, 1), 0.0, 1.0)
            target = ov.value + (ov.value_end - ov.value) * frac
        drivers[ov.field] = drivers[ov.field] * (1.0 - w) + target * w


# --- the generator -----------------------------------------------------------------------
def _rain_spells(
    solar_day: np.ndarray, t_min: np.ndarray, seed: int, z_pressure_at
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Random rain spells, at most one starting per solar day.

    A day gets a spell with probability 0.15 (+ up to 0.3 more under low pressure); it starts
    at a random hour, lasts 2-8 h and peaks at 0.3-4 mm/h.  Returns the slow rain rate
    [mm/h], a 0..1 weight for the spell itself and a wider 0..1 weight for its cloud.
    """
    rate = np.zeros(t_min.shape)
    spell = np.zeros(t_min.shape)
    cloud = np.zeros(t_min.shape)
    days, inverse = np.unique(solar_day.astype(np.int64), return_inverse=True)
    for lag in (0, 1):  # a spell may run past midnight into the next day
        d = days - lag
        day_start_min = d * 1440.0 - 4.0 * SITE_LON_DEG  # mean solar midnight in UTC minutes
        z_p = z_pressure_at(day_start_min + 720.0)
        p_rain = 0.15 + 0.2 * np.clip(-z_p, 0.0, 1.5)
        has = _hash_uniform(d, seed, 501) < p_rain
        start = day_start_min + 1440.0 * _hash_uniform(d, seed, 502)
        dur = 60.0 * (2.0 + 6.0 * _hash_uniform(d, seed, 503))
        peak = 0.3 + 3.7 * _hash_uniform(d, seed, 504) ** 2
        s0, s1 = start[inverse], (start + dur)[inverse]
        w = _box(t_min, s0, s1, 30.0) * has[inverse]
        shape = 0.7 + 0.3 * np.sin(np.pi * np.clip((t_min - s0) / (s1 - s0), 0.0, 1.0))
        rate = rate + peak[inverse] * w * shape
        spell = np.maximum(spell, _box(t_min, s0 - 15.0, s1 + 15.0, 45.0) * has[inverse])
        cloud = np.maximum(cloud, _box(t_min, s0 - 60.0, s1 + 60.0, 150.0) * has[inverse])
    return rate, spell, cloud


def synth_mast(
    start_utc=None,
    end_utc=None,
    cadence_min: int = 1,
    seed: int = DEFAULT_SEED,
    scenario: str | None = None,
    extra_overrides: tuple = (),
) -> pd.DataFrame:
    """Invented one-minute mast records for the fictional Larch Basin site.

    Parameters
    ----------
    start_utc, end_utc : str, datetime or pandas.Timestamp
        First and last record time (both included); naive values are read as UTC.  May be
        omitted with ``scenario="demo_week"`` (then 2026-11-24T03:00Z .. 2026-12-01T03:00Z).
    cadence_min : int
        Record spacing [min].
    seed : int
        Seed of all the random weather; same seed, same numbers.
    scenario : {None, "demo_week"}
        ``None`` gives the seeded random weather only; ``"demo_week"`` applies
        ``DEMO_WEEK_OVERRIDES`` on top (rain on 27 Nov, fog then wind on 30 Nov, calm evening).
    extra_overrides : tuple of Override, default ()
        Further named overrides applied after the scenario's (used by make_forecast.py).

    Returns
    -------
    pandas.DataFrame
        Columns ``COLUMNS`` in logger units: ``timestamp`` local ISO 8601 text with UTC
        offset (America/Denver, DST-aware), wind 1-min mean and max [kn], temperature [degF],
        relative humidity [%], station pressure [hPa], rain rate [mm/h], visibility [m,
        capped at 50000], global horizontal irradiance [W/m2].
    """
    if scenario not in (None, "demo_week"):
        raise ValueError(f"unknown scenario {scenario!r} (use None or 'demo_week')")
    if scenario == "demo_week":
        start_utc = DEMO_START_UTC if start_utc is None else start_utc
        end_utc = DEMO_END_UTC if end_utc is None else end_utc
    if start_utc is None or end_utc is None:
        raise ValueError("start_utc and end_utc are required without a scenario")
    if int(cadence_min) != cadence_min or cadence_min < 1:
        raise ValueError(f"cadence_min must be a whole number of minutes >= 1, got {cadence_min!r}")
    cadence_min = int(cadence_min)
    m0, m1 = _minutes_since_epoch(start_utc), _minutes_since_epoch(end_utc)
    if m1 < m0:
        raise ValueError(f"end_utc {end_utc!r} is before start_utc {start_utc!r}")
    t_min = np.arange(m0, m1 + 1, cadence_min, dtype=np.int64)
    tf = t_min.astype(np.float64)
    t_h = tf / 60.0
    t_day = tf / 1440.0

    sun = _sun(t_min, SITE_LAT_DEG, SITE_LON_DEG)
    h = sun["solar_hour"]
    day_len_h = _day_length_h(sun["decl_rad"], SITE_LAT_DEG)
    solar_day = sun["solar_day"]
    season = np.cos(2.0 * np.pi * (t_day - 200.0) / 365.2422)  # +1 late July, -1 late January

    # slow random fields, unit standard deviation
    def z_pressure_at(minutes: np.ndarray) -> np.ndarray:  # also sampled once per day below
        return _sinusoid_field(minutes / 60.0, seed, 1, 40.0, 400.0)

    z_p = z_pressure_at(tf)
    z_t = _sinusoid_field(t_h, seed, 2, 48.0, 500.0)
    z_m = _sinusoid_field(t_h, seed, 3, 30.0, 240.0)
    z_c = _sinusoid_field(t_h, seed, 4, 8.0, 120.0)
    z_w = _sinusoid_field(t_h, seed, 5, 10.0, 150.0)
    z_v = _sinusoid_field(t_h, seed, 6, 12.0, 200.0)
    # fast fields (minutes), unit standard deviation
    z_turb = 0.8 * _sinusoid_field(tf, seed, 11, 3.0, 60.0, slope=0.3) + 0.6 * _hash_normal(t_min, seed, 12)
    z_cloud_fast = _sinusoid_field(tf, seed, 13, 4.0, 90.0, slope=0.3)
    z_temp_fast = _sinusoid_field(tf, seed, 14, 8.0, 40.0, slope=0.3)

    overrides = (DEMO_WEEK_OVERRIDES if scenario == "demo_week" else ()) + tuple(extra_overrides)
    events = {"random_rain": np.ones_like(tf)}  # 1 keeps the seeded rain spells
    _apply_overrides(events, tf, tuple(o for o in overrides if o.field in events))
    rain_rate, rain_spell, rain_cloud = (
        x * events["random_rain"] for x in _rain_spells(solar_day, tf, seed, z_pressure_at)
    )
    windiness = 0.8 + 6.5 * _hash_uniform(solar_day.astype(np.int64), seed, 21) ** 2.5
    s_conv = _afternoon_wind_shape(h, day_len_h)
    wind_night = 0.7 + 1.3 * _value_noise(t_day, seed, 22)
    wind_syn = 3.5 * np.tanh(np.maximum(0.0, z_w - 1.0))  # occasional synoptic wind, <= 3.5 m/s
    wind_slow = wind_night + windiness * s_conv + wind_syn + 1.5 * rain_spell

    cloud = 1.0 / (1.0 + np.exp(-(1.8 * (-0.75 * z_p + 0.66 * z_c) - 0.4)))
    drivers: dict[str, np.ndarray] = {
        "cloud_frac": np.maximum(cloud, rain_cloud),  # [-] 0..1
        "rain_mm_h": rain_rate,  # [mm/h] slow rate
        "rain_moist": rain_spell,  # [-] pull Td up to T in rain
        "fog_hold": np.zeros_like(tf),  # [-] imposed saturation (fog)
        "wind_slow_ms": wind_slow,  # [m/s] wind before turbulence
        "turb_rel": 0.12 + 0.08 * s_conv + 0.15 * np.clip((2.5 - wind_slow) / 2.5, 0.0, 1.0),
        "gust_base": 1.30 + 0.25 * s_conv + 0.15 * np.clip((3.0 - wind_slow) / 3.0, 0.0, 1.0),
        "dew_deficit_c": 1.5 + 1.5 * season + 2.0 * z_m,  # [degC] below clear-night minimum
        "temp_amp_scale": 0.85 + 0.25 * _value_noise(t_day, seed, 23),
        "temp_synoptic_c": 3.0 * z_t,  # [degC] air-mass anomaly
        "temp_offset_c": -1.5 * rain_spell,  # [degC] rain-cooled air
        "pressure_anom_hpa": np.zeros_like(tf),  # [hPa]
    }
    _apply_overrides(drivers, tf, tuple(o for o in overrides if o.field not in events))
    d = drivers

    # temperature: seasonal + synoptic mean, diurnal cycle damped by cloud (and fog)
    amp_clear = (13.0 + 3.5 * season) * d["temp_amp_scale"]  # clear-day range [degC]
    amp = amp_clear * (1.0 - 0.55 * d["cloud_frac"])
    shape = _diurnal_temperature_shape(h, day_len_h) * (1.0 - 0.7 * d["fog_hold"])
    temp_mean = 6.5 + 12.5 * season + d["temp_synoptic_c"] + d["temp_offset_c"]
    temp_c = (
        temp_mean + amp * (shape - 0.45) + (0.06 + 0.2 * s_conv) * z_temp_fast + 0.04 * _hash_normal(t_min, seed, 31)
    )

    # dew point: slow; clear calm nights reach it, rain and fog pull it up to the air temperature
    dew_free = temp_mean - 0.45 * amp_clear - d["dew_deficit_c"]
    rain_spread = 0.1 + 0.35 * _value_noise(t_h / 2.0, seed, 32)
    dew_free = dew_free * (1.0 - d["rain_moist"]) + (temp_c - rain_spread) * d["rain_moist"]
    dew_free = dew_free * (1.0 - d["fog_hold"]) + (temp_c + 0.3) * d["fog_hold"]
    soft = 0.25
    spread_c = soft * np.logaddexp(0.0, (temp_c - dew_free) / soft)  # >= 0, smooth near 0
    dew_c = temp_c - spread_c
    rh_true = 100.0 * _sat_vapour_hpa(dew_c) / _sat_vapour_hpa(temp_c)
    rh_pct = np.clip(rh_true + 0.3 * _hash_normal(t_min, seed, 33), 0.0, 100.0)

    # wind: slow wind x lognormal minute turbulence; gust = mean x gust factor + noise
    turb = d["turb_rel"]
    wind_ms = d["wind_slow_ms"] * np.exp(turb * z_turb - 0.5 * turb**2)
    gust_factor = np.clip(d["gust_base"] + 0.05 * _hash_normal(t_min, seed, 41), 1.2, 1.9)
    gust_ms = wind_ms * gust_factor + 0.05 * np.abs(_hash_normal(t_min, seed, 42))

    # rain, fog and visibility (extinction coefficients add: 1/V sums)
    rain_mm_h = np.maximum(d["rain_mm_h"], 0.0) * np.exp(0.35 * _hash_normal(t_min, seed, 51) - 0.06)
    calm = np.clip((3.0 - d["wind_slow_ms"]) / 1.5, 0.0, 1.0)
    no_rain = np.clip(1.0 - d["rain_mm_h"] / 0.3, 0.0, 1.0)
    fog = np.clip((0.9 - spread_c) / 0.6, 0.0, 1.0) * calm * no_rain  # 0..1 fog intensity
    vis_clear_m = 38_000.0 + 12_000.0 * np.tanh(z_v)
    haze = np.minimum(1.0, (np.clip(100.5 - rh_true, 0.1, None) / 40.0) ** 0.6)
    fog_vis_m = 150.0 + 200.0 * _value_noise(t_h, seed, 52)
    inv_vis = 1.0 / (vis_clear_m * haze) + rain_mm_h**0.7 / 12_000.0 + fog**2 / fog_vis_m
    vis_m = np.minimum(1.0 / inv_vis, VIS_CAP_M)

    # solar: clear sky (Haurwitz 1945, +4 % for the site's altitude) x cloud/fog transmittance
    sin_el = np.sin(np.radians(sun["elevation_deg"]))
    up = sin_el > 0.0
    clear_wm2 = np.where(up, 1.04 * 1098.0 * sin_el * np.exp(-0.057 / np.where(up, sin_el, 1.0)), 0.0)
    c = d["cloud_frac"]
    trans = (
        (1.0 - 0.75 * c**3.4)
        * (1.0 + 0.5 * c * (1.0 - c) * z_cloud_fast)
        * (1.0 - 0.85 * fog)
        * (1.0 - 0.4 * (1.0 - no_rain))
    )
    solar_wm2 = clear_wm2 * np.clip(trans, 0.05, 1.1) * (1.0 + 0.005 * _hash_normal(t_min, seed, 61))

    # station pressure: ~894 hPa at 1050 m, synoptic drift, semi-diurnal tide
    baro_hpa = (
        894.5
        + 2.6 * z_p
        + 0.5 * np.cos(2.0 * np.pi * (h - 10.0) / 12.0)
        + d["pressure_anom_hpa"]
        + 0.03 * _hash_normal(t_min, seed, 71)
    )

    # logger units and resolution
    out = pd.DataFrame(
        {
            "timestamp": _local_iso(t_min),
            "wind_avg_kn": np.round(wind_ms * KN_PER_MS, 1),
            "wind_max_kn": np.round(gust_ms * KN_PER_MS, 1),
            "temp_f": np.round(temp_c * 9.0 / 5.0 + 32.0, 1),
            "rh_pct": np.round(rh_pct, 1),
            "baro_hpa": np.round(baro_hpa, 1),
            "rain_mm_h": np.round(rain_mm_h, 1),
            "vis_m": (np.round(vis_m / 10.0) * 10).astype(np.int64),
            "solar_wm2": np.round(np.maximum(solar_wm2, 0.0)).astype(np.int64),
        },
        columns=list(COLUMNS),
    )
    return out


def _local_iso(t_min: np.ndarray) -> np.ndarray:
    """ISO 8601 local time with offset (``2026-11-30T20:00:00-07:00``) for UTC minutes."""
    utc = pd.DatetimeIndex(t_min.astype("datetime64[m]").astype("datetime64[ns]"), tz="UTC")
    local_naive = utc.tz_convert(ZoneInfo(SITE_TZ)).tz_localize(None)
    offset_min = np.round((local_naive - utc.tz_localize(None)).total_seconds() / 60.0).astype(np.int64)
    text = np.datetime_as_string(local_naive.values.astype("datetime64[s]"), unit="s")
    uniq, inv = np.unique(offset_min, return_inverse=True)
    suffix = np.array([f"{'+' if o >= 0 else '-'}{abs(o) // 60:02d}:{abs(o) % 60:02d}" for o in uniq])
    return np.char.add(text.astype("U19"), suffix[inv.reshape(-1)])


# --- reference-scan registry -------------------------------------------------------------
# Invented entries: each reference scan follows an invented astronomical correction
# (out-of-focus holography on a bright calibrator) on a calm evening or night.
DEMO_REFERENCE_SCANS: tuple[tuple[str, str], ...] = (
    ("2026-11-24T04:40:00Z", "invented: after astronomical correction (out-of-focus holography)"),
    ("2026-11-25T05:10:00Z", "invented: after astronomical correction; light breeze"),
    ("2026-11-27T02:20:00Z", "invented: after astronomical correction; mild evening before the front"),
    ("2026-11-29T03:30:00Z", "invented: after astronomical correction; cold night"),
    ("2026-12-01T01:30:00Z", "invented: after astronomical correction; calm clear evening"),
)


def reference_scans(mast: pd.DataFrame) -> pd.DataFrame:
    """Invented reference-scan registry whose air temperatures come from ``mast``.

    Returns columns ``time`` (ISO 8601 UTC with ``Z``), ``air_temp_c`` [degC, 0.1] and
    ``note``; each time must be a record time of ``mast``.
    """
    mast_utc = pd.to_datetime(mast["timestamp"], format="ISO8601", utc=True)
    temp_by_time = pd.Series(mast["temp_f"].to_numpy(), index=pd.DatetimeIndex(mast_utc))
    times = pd.DatetimeIndex([pd.Timestamp(t) for t, _ in DEMO_REFERENCE_SCANS])
    missing = times.difference(temp_by_time.index)
    if len(missing):
        raise ValueError(f"reference times not in the mast records: {list(missing)}")
    temp_f = temp_by_time.loc[times].to_numpy()
    return pd.DataFrame(
        {
            "time": times.strftime("%Y-%m-%dT%H:%M:%SZ"),
            "air_temp_c": np.round((temp_f - 32.0) * 5.0 / 9.0, 1),
            "note": [note for _, note in DEMO_REFERENCE_SCANS],
        }
    )


# --- files and CLI -----------------------------------------------------------------------
def _write_csv(frame: pd.DataFrame, path: Path) -> int:
    path.parent.mkdir(parents=True, exist_ok=True)
    frame.to_csv(path, index=False, lineterminator="\n")
    return path.stat().st_size


def write_demo(outdir: Path = HERE, seed: int = DEFAULT_SEED) -> dict[str, int]:
    """Write the demo-week mast file and the reference registry; return {path: bytes}."""
    outdir = Path(outdir)
    mast = synth_mast(seed=seed, scenario="demo_week")
    refs = reference_scans(mast)
    sizes = {}
    for name, frame in ((DEMO_MAST_FILE, mast), (DEMO_REFERENCES_FILE, refs)):
        sizes[str(outdir / name)] = _write_csv(frame, outdir / name)
    return sizes


def write_archive(start_utc, end_utc, out: Path, seed: int = DEFAULT_SEED, cadence_min: int = 1) -> dict[str, int]:
    """Write a long generic archive (no scenario); return {path: bytes}."""
    frame = synth_mast(start_utc, end_utc, cadence_min=cadence_min, seed=seed, scenario=None)
    return {str(out): _write_csv(frame, Path(out))}


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(
        prog="make_demo.py", description=f"Write invented weather-mast data for the {SITE_NAME}."
    )
    sub = parser.add_subparsers(dest="command", required=True)
    p_demo = sub.add_parser("demo", help="write the demo week and the reference registry")
    p_demo.add_argument("--outdir", type=Path, default=HERE, help="output folder (default: next to this script)")
    p_demo.add_argument("--seed", type=int, default=DEFAULT_SEED)
    p_arch = sub.add_parser("archive", help="write a long generic archive (no scenario)")
    p_arch.add_argument("--start", required=True, help="first record, UTC (e.g. 2025-12-01)")
    p_arch.add_argument("--end", required=True, help="last record, UTC, included (e.g. 2026-12-01)")
    p_arch.add_argument("--out", required=True, type=Path, help="output CSV file")
    p_arch.add_argument("--seed", type=int, default=DEFAULT_SEED)
    p_arch.add_argument("--cadence-min", type=int, default=1, help="record spacing [min]")
    args = parser.parse_args(argv)
    try:
        if args.command == "demo":
            sizes = write_demo(args.outdir, args.seed)
        else:
            sizes = write_archive(args.start, args.end, args.out, args.seed, args.cadence_min)
    except ValueError as exc:
        print(f"make_demo.py: error: {exc}", file=sys.stderr)
        return 2
    for path, size in sizes.items():
        print(f"wrote {path} ({size} bytes)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
