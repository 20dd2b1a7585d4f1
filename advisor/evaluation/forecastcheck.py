"""The forecast against the latest observation: say when they disagree, and trust the observation.

    d = compare_with_forecast(frame, site)      # None: nothing to compare, or they agree
    d.text(), d.as_dict(), d.worse              # quantities observed worse than forecast + margin
    rows = trust_observation(rows, d, site)     # forecast rows pulled towards the observation

The latest good observation is compared with the forecast at its time (interpolated between
forecast rows, or the first forecast row when it lies less than one forecast step later):
the 10-minute mean wind and highest gust, and the dew point.  They **disagree** when the
observation lies outside the forecast widened by the site's margins
(``forecast.wind_margin_pct``, ``forecast.dew_point_margin_c``) plus a measurement tolerance.

When the observation is *worse* (windier, or a higher dew point: fog sooner) the forecast rows
after it are raised by the difference, fading as exp(−Δt/τ) with τ = ``forecast.trust_observation_h``
(an observation beats a forecast for the next hours; common practice in nowcasting).  When it
is *better*, the forecast is kept as it is (a forecast is never made more optimistic) and the
disagreement is only reported.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from advisor.io.site import Site
from advisor.io.times import utc_ns as _ns
from advisor.physics.moisture import relative_humidity_pct

__all__ = [
    "WIND_TOLERANCE_MS",
    "DEW_POINT_TOLERANCE_C",
    "QUANTITIES",
    "Disagreement",
    "compare_with_forecast",
    "trust_observation",
]

#: Below these differences a mast and a forecast are not told apart (measurement uncertainty of a
#: cup anemometer at light winds, and of a dew point derived from RH; figures from memory).
WIND_TOLERANCE_MS = 0.5
DEW_POINT_TOLERANCE_C = 0.5
#: Compared quantity → (words, unit, tolerance).
QUANTITIES = {
    "wind_mean_ms": ("mean wind", "m/s", WIND_TOLERANCE_MS),
    "wind_gust_ms": ("gusts", "m/s", WIND_TOLERANCE_MS),
    "dew_point_c": ("dew point", "°C", DEW_POINT_TOLERANCE_C),
}
_WIND_WINDOW_NS = 10 * 60 * 1_000_000_000


@dataclass(frozen=True)
class Disagreement:
    """The latest observation against the forecast for its time."""

    time_utc: pd.Timestamp
    observed: dict[str, float]
    forecast: dict[str, float]
    worse: dict[str, float]  # quantity → observed − forecast, where the observation is worse beyond the margin
    better: dict[str, float]  # quantity → observed − forecast, where it is better beyond the margin
    margins: tuple[float, float]  # (wind %, dew point °C)
    trust_observation_h: float

    def text(self) -> str:
        """One sentence for the notes and the reasons."""
        bits = [
            f"{QUANTITIES[q][0]} {self.observed[q]:.1f} {QUANTITIES[q][1]} observed against "
            f"{self.forecast[q]:.1f} {QUANTITIES[q][1]} forecast"
            for q in {**self.worse, **self.better}
        ]
        wind_pct, dew_c = self.margins
        head = (
            f"The latest observation ({self.time_utc:%Y-%m-%d %H:%M} UTC) disagrees with the forecast beyond "
            f"the site's margins (wind {wind_pct:g} %, dew point {dew_c:g} °C): " + "; ".join(bits)
        )
        if self.worse:
            return (
                head + f". Trusting the observation: the forecast is pulled towards it, the pull fading "
                f"over about {self.trust_observation_h:g} h."
            )
        return (
            head
            + ". The observation is the better of the two; the forecast is kept as it is (never made more optimistic)."
        )

    def as_dict(self) -> dict:
        return {
            "time_utc": self.time_utc.strftime("%Y-%m-%dT%H:%M:%SZ"),
            "observed": {k: round(v, 2) for k, v in self.observed.items()},
            "forecast": {k: round(v, 2) for k, v in self.forecast.items()},
            "worse": sorted(self.worse),
            "better": sorted(self.better),
            "forecast_adjusted": bool(self.worse),
            "trust_observation_h": self.trust_observation_h,
        }


def compare_with_forecast(frame: pd.DataFrame, site: Site) -> Disagreement | None:
    """The latest good observation of ``frame`` against its forecast rows; None when they agree.

    ``frame`` is a combined canonical frame (``kind`` observed/forecast) *before* observations
    supersede forecasts, so forecast rows for the observed hours are still there.  None also when
    there is nothing to compare (no observation, or no forecast row within a forecast step).
    """
    kind = frame["kind"].to_numpy()
    good = frame["good"].to_numpy(dtype=bool)
    t = _ns(frame["time"])
    obs = good & (kind != "forecast")
    fc = good & (kind == "forecast")
    if not obs.any() or int(fc.sum()) < 1:
        return None
    t_obs = int(t[obs].max())
    fc_t = t[fc]
    step = int(np.median(np.diff(fc_t))) if len(fc_t) >= 2 else _WIND_WINDOW_NS
    if not (fc_t[0] - step <= t_obs <= fc_t[-1]):
        return None
    recent = obs & (t > t_obs - _WIND_WINDOW_NS) & (t <= t_obs)
    last = obs & (t == t_obs)
    observed = {
        "wind_mean_ms": float(np.nanmean(frame.loc[recent, "wind_mean_ms"].to_numpy(dtype=float))),
        "wind_gust_ms": float(np.nanmax(frame.loc[recent, "wind_gust_ms"].to_numpy(dtype=float))),
        "dew_point_c": float(frame.loc[last, "dew_point_c"].to_numpy(dtype=float)[-1]),
    }
    forecast = {q: float(np.interp(t_obs, fc_t, frame.loc[fc, q].to_numpy(dtype=float))) for q in QUANTITIES}
    fs = site.forecast
    factor = 1.0 + fs.wind_margin_pct / 100.0
    worse, better = {}, {}
    for q, (_, _, tol) in QUANTITIES.items():
        o, f = observed[q], forecast[q]
        if not (np.isfinite(o) and np.isfinite(f)):
            continue
        high, low = (
            (f * factor, f / factor) if q != "dew_point_c" else (f + fs.dew_point_margin_c, f - fs.dew_point_margin_c)
        )
        if o > high + tol:
            worse[q] = o - f
        elif o < low - tol:
            better[q] = o - f
    if not worse and not better:
        return None
    return Disagreement(
        pd.Timestamp(t_obs, tz="UTC"),
        observed,
        forecast,
        worse,
        better,
        (fs.wind_margin_pct, fs.dew_point_margin_c),
        fs.trust_observation_h,
    )


def trust_observation(rows: pd.DataFrame, disagreement: Disagreement | None) -> pd.DataFrame:
    """Forecast rows after the observation raised towards it where it was worse (a copy).

    Each quantity the observation found worse gets ``(observed − forecast)·exp(−Δt/τ)`` added;
    the dew point stays at or below the air temperature and the relative humidity follows it
    (RH = 100 e_s(T_d)/e_s(T), Magnus form, Alduchov & Eskridge 1996).  Observed rows are untouched.
    """
    if disagreement is None or not disagreement.worse:
        return rows
    t = _ns(rows["time"])
    t_obs = int(_ns(pd.DatetimeIndex([disagreement.time_utc]))[0])
    after = (rows["kind"] == "forecast").to_numpy() & (t > t_obs)
    if not after.any():
        return rows
    weight = np.exp(-(t[after] - t_obs) / (disagreement.trust_observation_h * 3.6e12))
    out = rows.copy()
    for q, bias in disagreement.worse.items():
        col = out[q].to_numpy(dtype=float).copy()
        col[after] = col[after] + bias * weight
        out[q] = col
    gust = out["wind_gust_ms"].to_numpy(dtype=float).copy()
    gust[after] = np.maximum(gust[after], out["wind_mean_ms"].to_numpy(dtype=float)[after])
    out["wind_gust_ms"] = gust
    if "dew_point_c" in disagreement.worse:
        temp = out["air_temp_c"].to_numpy(dtype=float)
        dew = out["dew_point_c"].to_numpy(dtype=float).copy()
        dew[after] = np.minimum(dew[after], temp[after])
        rh = out["rel_humidity_pct"].to_numpy(dtype=float).copy()
        rh[after] = np.minimum(relative_humidity_pct(temp[after], dew[after]), 100.0)
        out["dew_point_c"] = dew
        out["rel_humidity_pct"] = rh
    return out
