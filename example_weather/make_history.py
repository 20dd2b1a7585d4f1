"""An INVENTED history of past surface-measurement attempts at the fictional Larch Basin site.

Nothing here happened: the site, its staff, their attempts and the outcomes are made up, so
``advisor train`` has a history to learn from and the tests know the truth it should recover.
The weather comes from the demo generator (``make_demo.synth_mast``, no scenario) over the
year before the demo week; the features at each attempt are computed by the advisor's own
feed and feature code, as ``advisor check`` would compute them::

    make_history(seed=DEFAULT_SEED, n_attempts=420) -> DataFrame (one row per attempt)
    python example_weather/make_history.py            # writes larch_basin_history.csv

Who tried what, when (seeded, vectorised):

* candidate start times are drawn uniformly over the year at one-minute resolution; a
  candidate is kept always at night and with probability 0.35 in daylight (high-frequency
  work is mostly done at night); none while the mean wind exceeds 12 m/s (antenna stowed);
* the method is the laser scan with probability 0.6, otherwise the astronomical method.

Ground truth (:data:`GROUND_TRUTH`): the log-odds of a usable surface map are linear in three
terms of the weather at the attempt::

    logit p = b0 + b_gust * gust² + b_sat * max(0, 3 °C - dew-point spread) + b_drift * |dT/dt|

    laser scan:    b0 = 3.0, b_gust = -0.06 per (m/s)², b_sat = -1.2 per °C, b_drift =  0.0 per °C/h
    astronomical:  b0 = 2.5, b_gust = -0.03 per (m/s)², b_sat =  0.0 per °C, b_drift = -1.0 per °C/h

with gust the 10-minute maximum [m/s] and dT/dt the air-temperature change over the last hour
[°C/h].  So scan failures grow with gusts (vibration) and with fog or near-saturation;
astronomical failures with wind (pointing) and thermal drift, and not with fog.  The outcome
is a Bernoulli draw with that probability.  The measured residual ``residual_rms_um`` only
decorates it: 120-210 µm when usable, 225-450 µm when not, and blank for 40 % of the failures
(no map at all).

Columns written: ``time`` (UTC, ``Z``), ``method``, ``usable`` (yes/no), ``residual_rms_um``, and
the weather as recorded at the attempt in canonical SI names: ``wind_mean_ms`` and
``wind_gust_ms`` (10-minute mean and maximum), ``air_temp_c``, ``rel_humidity_pct``,
``pressure_hpa``, ``precip_mm_h``, ``visibility_m``, ``solar_wm2``, ``air_temp_rate_c_per_h``.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np
import pandas as pd

HERE = Path(__file__).resolve().parent
if str(HERE) not in sys.path:
    sys.path.insert(0, str(HERE))
if (HERE.parent / "advisor" / "__init__.py").exists() and str(HERE.parent) not in sys.path:
    sys.path.insert(0, str(HERE.parent))  # run from a checkout: use its advisor

import make_demo  # noqa: E402  (the demo weather generator beside this file)

DEFAULT_SEED = 20251124
DEFAULT_ATTEMPTS = 420
HISTORY_START_UTC = "2025-11-24T00:00:00Z"  # the year before the demo week
HISTORY_END_UTC = "2026-11-23T23:59:00Z"
WARMUP_H = 2  # weather before the first attempt, for 1-h rates
HISTORY_FILE = "larch_basin_history.csv"
DAYLIGHT_KEEP = 0.35
STOW_WIND_MS = 12.0
SCAN_SHARE = 0.6
SATURATION_KNOT_C = 3.0

#: The invented mechanism: log-odds of a usable result per term (see the module docstring).
GROUND_TRUTH = {
    "scan": {
        "intercept": 3.0,
        "wind_gust_ms_sq": -0.06,
        "dew_point_spread_c_shortfall_below_3": -1.2,
        "abs_air_temp_rate_c_per_h": 0.0,
    },
    "astronomical": {
        "intercept": 2.5,
        "wind_gust_ms_sq": -0.03,
        "dew_point_spread_c_shortfall_below_3": 0.0,
        "abs_air_temp_rate_c_per_h": -1.0,
    },
}
COLUMNS = (
    "time",
    "method",
    "usable",
    "residual_rms_um",
    "wind_mean_ms",
    "wind_gust_ms",
    "air_temp_c",
    "rel_humidity_pct",
    "pressure_hpa",
    "precip_mm_h",
    "visibility_m",
    "solar_wm2",
    "air_temp_rate_c_per_h",
)


def true_p_usable(method: str, wind_gust_ms, dew_point_spread_c, air_temp_rate_c_per_h) -> np.ndarray:
    """Ground-truth probability of a usable result [0..1] for arrays of conditions."""
    b = GROUND_TRUTH[method]
    gust = np.asarray(wind_gust_ms, dtype=float)
    shortfall = np.maximum(0.0, SATURATION_KNOT_C - np.asarray(dew_point_spread_c, dtype=float))
    logit = (
        b["intercept"]
        + b["wind_gust_ms_sq"] * gust**2
        + b["dew_point_spread_c_shortfall_below_3"] * shortfall
        + b["abs_air_temp_rate_c_per_h"] * np.abs(np.asarray(air_temp_rate_c_per_h, dtype=float))
    )
    return 1.0 / (1.0 + np.exp(-logit))


def year_of_weather(seed: int = make_demo.DEFAULT_SEED):
    """The demo generator's archive for the history year, read by the advisor's feed code."""
    from advisor.io.feed import canonical_frame
    from advisor.io.site import load_site

    site = load_site(None)
    start = pd.Timestamp(HISTORY_START_UTC) - pd.Timedelta(hours=WARMUP_H)
    mast = make_demo.synth_mast(start, HISTORY_END_UTC, cadence_min=1, seed=seed, scenario=None)
    return site, canonical_frame(mast, site.feed, source="make_demo archive").frame


def make_history(seed: int = DEFAULT_SEED, n_attempts: int = DEFAULT_ATTEMPTS, weather=None) -> pd.DataFrame:
    """The invented history: ``n_attempts`` rows, sorted by time (columns :data:`COLUMNS`).

    ``weather`` is ``(site, canonical frame)`` from :func:`year_of_weather`; computed if omitted.
    """
    from advisor.features import compute_features
    from advisor.io.references import Registry

    site, frame = weather if weather is not None else year_of_weather()
    rng = np.random.default_rng(seed)
    t0 = pd.Timestamp(HISTORY_START_UTC)
    span_min = int((pd.Timestamp(HISTORY_END_UTC) - t0).total_seconds() // 60)
    n_candidates = 6 * n_attempts
    offsets = rng.integers(0, span_min + 1, size=n_candidates)
    keep_draw = rng.random(n_candidates)
    method_draw = rng.random(n_candidates)
    outcome_draw = rng.random(n_candidates)
    rms_draw = rng.random(n_candidates)
    no_map_draw = rng.random(n_candidates)

    times = pd.DatetimeIndex(t0 + pd.to_timedelta(offsets, unit="min"))
    f = compute_features(frame, times, site, Registry.empty(), 86.0)
    night = f["is_night"].to_numpy()
    kept = (
        (night | (keep_draw < DAYLIGHT_KEEP))
        & (f["wind_mean_ms"].to_numpy() <= STOW_WIND_MS)
        & f["data_ok"].to_numpy()
        & ~pd.Index(offsets).duplicated()
    )
    chosen = np.flatnonzero(kept)[:n_attempts]
    if len(chosen) < n_attempts:
        raise ValueError(f"only {len(chosen)} attempt times found, asked for {n_attempts}")
    chosen = chosen[np.argsort(offsets[chosen], kind="stable")]
    f = f.iloc[chosen].reset_index(drop=True)
    method = np.where(method_draw[chosen] < SCAN_SHARE, "scan", "astronomical")

    gust, spread, rate = (f[c].to_numpy() for c in ("wind_gust_ms", "dew_point_spread_c", "air_temp_rate_c_per_h"))
    p = np.where(
        method == "scan", true_p_usable("scan", gust, spread, rate), true_p_usable("astronomical", gust, spread, rate)
    )
    usable = outcome_draw[chosen] < p
    rms = np.where(usable, 120.0 + 90.0 * rms_draw[chosen], 225.0 + 225.0 * rms_draw[chosen])
    rms = np.where(~usable & (no_map_draw[chosen] < 0.4), np.nan, np.round(rms))

    out = pd.DataFrame(
        {
            "time": pd.DatetimeIndex(f["time"]).strftime("%Y-%m-%dT%H:%M:%SZ"),
            "method": method,
            "usable": np.where(usable, "yes", "no"),
            "residual_rms_um": rms,
            "wind_mean_ms": f["wind_mean_ms"].round(2),
            "wind_gust_ms": f["wind_gust_ms"].round(2),
            "air_temp_c": f["air_temp_c"].round(2),
            "rel_humidity_pct": f["rel_humidity_pct"].round(1),
            "pressure_hpa": f["pressure_hpa"].round(1),
            "precip_mm_h": f["precip_mm_h"].round(1),
            "visibility_m": f["visibility_m"].round(0),
            "solar_wm2": f["solar_wm2"].round(0),
            "air_temp_rate_c_per_h": f["air_temp_rate_c_per_h"].round(2),
        },
        columns=list(COLUMNS),
    )
    return out


def write_history(out: Path, seed: int = DEFAULT_SEED, n_attempts: int = DEFAULT_ATTEMPTS) -> int:
    """Write the history CSV; return its size [bytes]."""
    frame = make_history(seed, n_attempts)
    out = Path(out)
    out.parent.mkdir(parents=True, exist_ok=True)
    frame.to_csv(out, index=False, lineterminator="\n", float_format="%.10g")
    return out.stat().st_size


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(
        prog="make_history.py", description="Write an INVENTED history of attempts for the fictional Larch Basin site."
    )
    parser.add_argument(
        "--out", type=Path, default=HERE / HISTORY_FILE, help=f"output CSV (default: {HISTORY_FILE} here)"
    )
    parser.add_argument("--seed", type=int, default=DEFAULT_SEED, help="seed of the attempts and outcomes")
    parser.add_argument("--attempts", type=int, default=DEFAULT_ATTEMPTS, help="number of attempts")
    args = parser.parse_args(argv)
    try:
        size = write_history(args.out, args.seed, args.attempts)
    except ValueError as exc:
        print(f"make_history.py: error: {exc}", file=sys.stderr)
        return 2
    print(f"wrote {args.out} ({size} bytes, {args.attempts} invented attempts)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
