"""How long a correction holds: the structure's temperature over time and the surface it leaves.

    t_s = structure_temperature_c(rows, times_utc, site)          # T_struct at each time [°C]
    limit = holding_limit_um(sigma0_um, freq_ghz, required_um, max_loss)
    k = first_exceedance(t_struct_after, sigma0_um, limit_um, drift_um_per_c)
    holds = correction_holds(frame, at_utc, call.candidates, call.features, site)   # for ``check``

The structure follows the air (plus a sunshine heating term) with a first-order lag
(:mod:`advisor.physics.thermal`); a correction finished at ``t₀`` leaves
σ(t) = √(σ₀² + (k·|T_s(t) − T_s(t₀)|)²).  It **holds** while σ(t) stays within the larger of
the site's requirement λ/N and the surface at which the efficiency has fallen by the site's
``structure.max_efficiency_loss`` from what the correction gave.

The weather after the instant comes from the forecast rows when the frame has them, otherwise
from the present trend: the air temperature keeps its rate of the last hour and the sky keeps
its clearness (measured irradiance over the clear-sky value, a clear sky where there is no
sensor or no sun), so a night-time check still sees the sunrise coming.
"""

from __future__ import annotations

from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd

from advisor import fmt
from advisor.io.site import Site
from advisor.io.times import utc_ns as _ns
from advisor.physics.aperture import wavelength_mm
from advisor.physics.sun import solar_position
from advisor.physics.thermal import (
    clear_sky_irradiance_wm2,
    drifted_surface_rms_um,
    equilibrium_temperature_c,
    first_order_lag,
)
from advisor.vocabulary import METHODS

__all__ = [
    "LOOKBACK_H",
    "STEP_MIN",
    "TREND_HORIZON_H",
    "FORECAST_HORIZON_H",
    "structure_temperature_c",
    "holding_limit_um",
    "first_exceedance",
    "trend_rows",
    "correction_holds",
    "holds_text",
    "duration_text",
]

#: Weather history read before the first time, so the lag has settled (six time constants of 1 h).
LOOKBACK_H = 6.0
#: Spacing of the times at which a correction's surface is followed. [min]
STEP_MIN = 10.0
#: How far the present trend is followed when there is no forecast [h].
TREND_HORIZON_H = 6.0
#: How far the forecast is followed [h].
FORECAST_HORIZON_H = 12.0
#: How a correction by each method is called in a sentence.
_CORRECTION = {"scan": "A laser correction", "astronomical": "A holography correction"}
#: Clearness (measured / clear-sky irradiance) is not trusted with the sun this low [deg].
_MIN_SUN_FOR_CLEARNESS_DEG = 5.0


def _irradiance_wm2(rows: pd.DataFrame, site: Site) -> np.ndarray:
    """The rows' irradiance; where the feed has none, the clear-sky value (the pessimistic case)."""
    measured = rows["solar_wm2"].to_numpy(dtype=float) if "solar_wm2" in rows else np.full(len(rows), np.nan)
    missing = ~np.isfinite(measured)
    if missing.any():
        times = pd.DatetimeIndex(rows["time"].to_numpy()[missing])
        elevation, _ = solar_position(times, site.latitude_deg, site.longitude_deg)
        measured = measured.copy()
        measured[missing] = clear_sky_irradiance_wm2(np.atleast_1d(elevation))
    return measured


def structure_temperature_c(rows: pd.DataFrame, times_utc, site: Site) -> np.ndarray:
    """The structure's temperature at ``times_utc`` from the good rows of a canonical frame [°C].

    ``rows`` are the rows that may be used (observations, then forecast rows after them), sorted
    by time; the lag starts settled at the first good row at most :data:`LOOKBACK_H` before the
    first time.  NaN before the first good row.
    """
    t = _ns(times_utc)
    if len(t) == 0:
        return np.array([])
    good = rows[rows["good"].to_numpy(dtype=bool)] if "good" in rows else rows
    good = good[np.isfinite(good["air_temp_c"].to_numpy(dtype=float))]
    row_ns = _ns(good["time"])
    lo = np.searchsorted(row_ns, t.min() - int(LOOKBACK_H * 3.6e12), side="left")
    hi = np.searchsorted(row_ns, t.max(), side="right") + 1  # one row past the last time
    good, row_ns = good.iloc[lo:hi], row_ns[lo:hi]
    if len(good) == 0:
        return np.full(len(t), np.nan)
    figures = site.structure
    t_eq = equilibrium_temperature_c(
        good["air_temp_c"].to_numpy(dtype=float), _irradiance_wm2(good, site), figures.sun_heating_c_per_kwm2
    )
    hours = (row_ns - row_ns[0]) / 3.6e12
    t_struct = first_order_lag(hours, np.asarray(t_eq, dtype=float), figures.time_constant_h)
    out = np.interp(t, row_ns, t_struct)
    out[t < row_ns[0]] = np.nan
    return out


def holding_limit_um(surface_rms_um, freq_ghz: float, required_surface_rms_um: float, max_efficiency_loss: float):
    """The surface rms up to which a correction holds [µm].

    The larger of the requirement λ/N and √(σ₀² + δ²), δ = (λ/4π)·√(−ln(1 − loss)): by Ruze,
    adding δ in quadrature multiplies the efficiency by exp(−(4πδ/λ)²) = 1 − loss.
    """
    wavelength_um = float(wavelength_mm(freq_ghz)) * 1e3
    tolerance_um = wavelength_um / (4.0 * np.pi) * np.sqrt(-np.log1p(-float(max_efficiency_loss)))
    return np.maximum(float(required_surface_rms_um), np.hypot(np.asarray(surface_rms_um, dtype=float), tolerance_um))


def first_exceedance(structure_change_c: np.ndarray, surface_rms_um, limit_um, drift_um_per_c: float) -> np.ndarray:
    """Index of the first time whose drifted surface exceeds the limit, per row of a matrix.

    ``structure_change_c`` has shape (corrections, times): T_s(t) − T_s(t₀) after each
    correction (NaN where not applicable); ``surface_rms_um`` and ``limit_um`` broadcast per
    correction.  Returns the first column index over the limit, or the number of columns where it
    never is.
    """
    change = np.atleast_2d(structure_change_c)
    sigma = drifted_surface_rms_um(np.asarray(surface_rms_um, dtype=float).reshape(-1, 1), drift_um_per_c, change)
    over = np.asarray(sigma, dtype=float) > np.asarray(limit_um, dtype=float).reshape(-1, 1)
    return np.where(over.any(axis=1), over.argmax(axis=1), change.shape[1])


def trend_rows(at_utc: pd.Timestamp, features: dict, site: Site, hours: float = TREND_HORIZON_H) -> pd.DataFrame:
    """Rows after ``at_utc`` that continue the present trend (no forecast at hand).

    The air temperature keeps its rate of the last hour (``air_temp_rate_c_per_h``; 0 when
    unknown) and the sky its clearness: measured over clear-sky irradiance at ``at_utc``, clipped
    to 0..1, and 1 (clear) with the sun below 5° or no sensor.
    """
    times = pd.date_range(
        at_utc + pd.Timedelta(minutes=STEP_MIN),
        periods=int(round(hours * 60 / STEP_MIN)),
        freq=pd.Timedelta(minutes=STEP_MIN),
    )
    rate = features.get("air_temp_rate_c_per_h")
    rate = float(rate) if rate is not None and np.isfinite(rate) else 0.0
    temp = float(features.get("air_temp_c", np.nan))
    elevation_now = float(
        np.atleast_1d(solar_position(pd.DatetimeIndex([at_utc]), site.latitude_deg, site.longitude_deg)[0])[0]
    )
    measured = features.get("solar_wm2")
    clearness = 1.0
    if measured is not None and np.isfinite(measured) and elevation_now >= _MIN_SUN_FOR_CLEARNESS_DEG:
        clearness = float(np.clip(measured / clear_sky_irradiance_wm2(elevation_now), 0.0, 1.0))
    elevation, _ = solar_position(times, site.latitude_deg, site.longitude_deg)
    hours_ahead = (times - at_utc).total_seconds().to_numpy() / 3600.0
    return pd.DataFrame(
        {
            "time": times,
            "air_temp_c": temp + rate * hours_ahead,
            "solar_wm2": clearness * np.asarray(clear_sky_irradiance_wm2(elevation)),
            "good": True,
            "kind": "trend",
        }
    )


def duration_text(minutes: float) -> str:
    """'about 1 h 40 min', 'about 50 min' (to the nearest 10 min)."""
    if minutes < 5:
        return "less than 10 min"
    return "about " + fmt.duration_text(max(int(round(minutes / 10.0) * 10), 10))


def correction_holds(frame: pd.DataFrame, at_utc: pd.Timestamp, candidates: dict, features: dict, site: Site) -> dict:
    """How long each method's correction would hold if started at ``at_utc`` (``check``).

    ``frame`` is the canonical frame the call was made on (with forecast rows when the site has a
    forecast); ``candidates`` the call's candidate dicts (``surface_rms_um``, ``duration_min``);
    ``features`` the call's features (row and target: ``air_temp_c``, ``solar_wm2``,
    ``air_temp_rate_c_per_h``, ``freq_ghz``, ``required_surface_rms_um``).
    Returns ``{method: {...} or None}`` with ``holds_min`` (from the end of the correction; None
    when it holds past the horizon), ``until_utc``, ``horizon_utc``, ``basis`` (``forecast`` or
    ``trend``), ``limit_um``, ``limited_by`` (``requirement`` or ``efficiency_loss``) and
    ``structure_rate_c_per_h`` over the first hour after the correction.
    """
    at_ns = int(_ns(pd.DatetimeIndex([at_utc]))[0])
    t_all = _ns(frame["time"])
    is_fc = (frame["kind"] == "forecast").to_numpy()
    observed = ~is_fc & (t_all <= at_ns)
    last_observed = int(t_all[~is_fc].max()) if (~is_fc).any() else at_ns
    ahead = is_fc & (t_all > max(at_ns, last_observed)) & (t_all <= at_ns + int(FORECAST_HORIZON_H * 3.6e12))
    columns = ["time", "air_temp_c", "solar_wm2", "good"]
    past = frame.loc[observed, [c for c in columns if c in frame]]
    if int(ahead.sum()) >= 2:
        basis, future = "forecast", frame.loc[ahead, [c for c in columns if c in frame]]
    else:
        basis, future = "trend", trend_rows(at_utc, features, site)
    rows = pd.concat([past, future[[c for c in columns if c in future]]], ignore_index=True)
    rows["good"] = rows["good"].astype(bool)
    horizon_ns = int(_ns(pd.DatetimeIndex([future["time"].iloc[-1]]))[0]) if len(future) else at_ns
    figures = site.structure
    out: dict = {}
    for method in METHODS:
        c = candidates.get(method) or {}
        sigma0 = c.get("surface_rms_um")
        if sigma0 is None or not np.isfinite(sigma0):
            out[method] = None
            continue
        end_ns = at_ns + int(round(c["duration_min"] * 6e10))
        grid = np.arange(end_ns, max(horizon_ns, end_ns) + 1, int(STEP_MIN * 6e10), dtype=np.int64)
        t_struct = structure_temperature_c(
            rows, pd.DatetimeIndex(grid.astype("datetime64[ns]")).tz_localize("UTC"), site
        )
        limit = float(
            holding_limit_um(
                sigma0, features["freq_ghz"], features["required_surface_rms_um"], figures.max_efficiency_loss
            )
        )
        loss_limit = float(holding_limit_um(sigma0, features["freq_ghz"], 0.0, figures.max_efficiency_loss))
        change = t_struct - t_struct[0]
        k = int(first_exceedance(change[None, :], sigma0, limit, figures.drift_um_per_c)[0])
        until_ns = holds = None
        if k < len(grid):
            # the crossing, interpolated between the last time within the limit and the first past it
            needed_c = np.sqrt(max(limit**2 - sigma0**2, 0.0)) / max(figures.drift_um_per_c, 1e-12)
            a, b = abs(change[k - 1]), abs(change[k])
            frac = float(np.clip((needed_c - a) / (b - a), 0.0, 1.0)) if b > a else 1.0
            until_ns = int(grid[k - 1] + frac * (grid[k] - grid[k - 1]))
            holds = (until_ns - end_ns) / 6e10
        hour = min(int(60 / STEP_MIN), len(t_struct) - 1)
        rate = (t_struct[hour] - t_struct[0]) / (hour * STEP_MIN / 60.0) if hour > 0 else np.nan
        out[method] = {
            "holds_min": None if holds is None else round(holds, 1),
            "until_utc": None if until_ns is None else pd.Timestamp(until_ns, tz="UTC").strftime("%Y-%m-%dT%H:%M:%SZ"),
            "horizon_utc": pd.Timestamp(max(horizon_ns, end_ns), tz="UTC").strftime("%Y-%m-%dT%H:%M:%SZ"),
            "basis": basis,
            "limit_um": round(limit, 1),
            "limited_by": "requirement" if limit > loss_limit + 1e-9 else "efficiency_loss",
            "structure_rate_c_per_h": round(float(rate), 2) if np.isfinite(rate) else None,
        }
    return out


def holds_text(method: str, holds: dict, features: dict, site: Site) -> str:
    """One sentence: how long ``method``'s correction holds, on what basis, and what ends it."""
    label = _CORRECTION[method]
    zone = ZoneInfo(site.time_zone)
    rate = features.get("air_temp_rate_c_per_h")
    if holds["basis"] == "forecast":
        basis = "by the forecast"
    elif rate is not None and np.isfinite(rate):
        basis = f"at the present trend ({rate:+.1f} °C/h in the air, the sky as now)"
    else:
        basis = "at the present trend (the sky as now)"
    if holds["holds_min"] is None:
        end = pd.Timestamp(holds["horizon_utc"]).tz_convert(zone)
        reach = "the forecast's end" if holds["basis"] == "forecast" else "the next hours"
        return (
            f"{label} made now would hold past {reach} ({end:%H:%M %Z}) {basis}: the structure's "
            "temperature changes too little to spoil it."
        )
    until = pd.Timestamp(holds["until_utc"]).tz_convert(zone)
    if holds["limited_by"] == "requirement":
        why = (
            f"then thermal drift takes the surface past λ/{features['surface_requirement_fraction']:g} = "
            f"{features['required_surface_rms_um']:.0f} µm"
        )
    else:
        why = (
            f"then thermal drift has cost {site.structure.max_efficiency_loss:.0%} of the efficiency "
            "the correction gave"
        )
    return f"{label} made now would hold {duration_text(holds['holds_min'])} (until {until:%H:%M %Z}) {basis}: {why}."
