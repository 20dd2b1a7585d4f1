"""Invented demo FORECAST for the fictional "Larch Basin Observatory" (see make_demo.py).

Nothing here is a forecast from any weather service: it is the demo generator's invented
weather, continued past the end of the demo week, sampled every 10 minutes and labelled as a
forecast issued at the demo week's last sample (2026-12-01T03:00Z, 20:00 local on 30 Nov)::

    python example_weather/make_forecast.py            # writes larch_basin_forecast.csv
    python example_weather/make_forecast.py --seed 7 --out /tmp/other.csv

The file is in the demo logger's format (same columns and units as larch_basin_mast.csv) plus
``kind`` (always ``forecast``) and ``issued`` (the forecast's issue time, ISO 8601 UTC).

The story, in local time (MST = UTC-7), from the issue time on:

* 20:00-23:00  the calm, dry, clear evening of the demo week goes on;
* 23:00-01:00  the valley cools towards the dew point (RH rising past 90 %);
* 01:00-10:00  **valley fog** (RH ~100 %, visibility a few hundred metres), lifting mid-morning;
* 12:00-16:00  **windy afternoon**: mean about 6-7 m/s, gusts about 8-10 m/s;
* evening and night of 1-2 Dec: calm again, clear and drier;
* 1 Dec 17:30-18:50  **no rows**: an invented dropout of the forecast feed, so the outlook
  shows how a gap looks (unknown, never good);
* the last rows lie beyond the site's forecast horizon (``forecast.horizon_h``) and are flagged.

How: ``make_demo.synth_mast`` with the demo week's scenario, extended by
``FORECAST_OVERRIDES`` (same mechanism, each override with its reason), passed as
``synth_mast(..., extra_overrides=FORECAST_OVERRIDES)``; the committed demo week is unaffected.
Seeded: same seed, byte-identical file.
"""

from __future__ import annotations

import argparse
import importlib.util
import sys
from pathlib import Path

import pandas as pd

HERE = Path(__file__).resolve().parent
FORECAST_FILE = "larch_basin_forecast.csv"
ISSUED_UTC = "2026-12-01T03:00:00Z"
FIRST_STEP_UTC = "2026-12-01T03:10:00Z"
LAST_STEP_UTC = "2026-12-02T15:00:00Z"
CADENCE_MIN = 10
#: Invented dropout of the forecast feed: rows in [start, end] are left out.
DROPOUT_UTC = ("2026-12-02T00:30:00Z", "2026-12-02T01:50:00Z")


def _load_make_demo():
    """Import make_demo.py from this folder (it is a script, not a package module)."""
    name = "make_demo"
    if name in sys.modules:
        return sys.modules[name]
    spec = importlib.util.spec_from_file_location(name, HERE / "make_demo.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules[name] = module
    spec.loader.exec_module(module)
    return module


md = _load_make_demo()
Override = md.Override

# Applied after the demo week's overrides (which end at 2026-12-01T06:00Z).  Times are UTC.
FORECAST_OVERRIDES: tuple = (
    Override(
        "random_rain",
        "2026-12-01T00:00",
        "2026-12-03T00:00",
        0,
        0.0,
        "no rain in the forecast: the story is fog and wind",
    ),
    Override(
        "cloud_frac",
        "2026-12-01T00:00",
        "2026-12-03T00:00",
        120,
        0.05,
        "clear sky throughout (radiation fog at night, sunshine by day)",
    ),
    Override(
        "temp_synoptic_c",
        "2026-12-01T00:00",
        "2026-12-03T00:00",
        720,
        0.0,
        "steady air mass: no synoptic warming or cooling",
    ),
    Override(
        "temp_amp_scale",
        "2026-12-01T00:00",
        "2026-12-03T00:00",
        240,
        0.80,
        "the same modest day-night range as on 30 Nov",
    ),
    # the night turns foggy
    Override(
        "wind_slow_ms",
        "2026-12-01T06:00",
        "2026-12-01T18:00",
        60,
        0.8,
        "calm valley night and morning (radiation fog needs calm)",
    ),
    Override("turb_rel", "2026-12-01T06:00", "2026-12-01T18:00", 60, 0.2, "light, meandering wind"),
    Override("gust_base", "2026-12-01T06:00", "2026-12-01T18:00", 60, 1.45, "gusts stay low in the calm"),
    Override(
        "dew_deficit_c",
        "2026-12-01T06:00",
        "2026-12-01T10:00",
        60,
        -0.2,
        "dew point close to the night's minimum: the air nears saturation",
        value_end=-1.5,
    ),
    Override(
        "fog_hold",
        "2026-12-01T10:00",
        "2026-12-01T16:30",
        40,
        1.0,
        "valley fog until about 09:30 local: air saturated, morning warming held back",
    ),
    Override("dew_deficit_c", "2026-12-01T16:30", "2026-12-03T00:00", 180, 1.0, "drier air after the fog lifts"),
    # windy afternoon
    Override("wind_slow_ms", "2026-12-01T19:00", "2026-12-01T23:00", 30, 6.4, "windy afternoon: mean about 6-7 m/s"),
    Override("turb_rel", "2026-12-01T19:00", "2026-12-01T23:00", 30, 0.06, "steady strong wind"),
    Override("gust_base", "2026-12-01T19:00", "2026-12-01T23:00", 30, 1.40, "gust factor about 1.4"),
    # calm evening and night of 1-2 Dec
    Override(
        "wind_slow_ms", "2026-12-01T23:40", "2026-12-03T00:00", 40, 1.0, "wind dies at sunset: calm evening and night"
    ),
    Override("turb_rel", "2026-12-01T23:40", "2026-12-03T00:00", 40, 0.15, "calm: little minute-to-minute variation"),
    Override("gust_base", "2026-12-01T23:40", "2026-12-03T00:00", 40, 1.45, "calm: gusts stay low"),
)


def synth_forecast(seed: int = md.DEFAULT_SEED) -> pd.DataFrame:
    """The invented demo forecast in the logger's format, plus ``kind`` and ``issued``.

    Returns
    -------
    pandas.DataFrame
        ``make_demo.COLUMNS`` (logger units, local ISO 8601 timestamps with offset) every
        ``CADENCE_MIN`` minutes from ``FIRST_STEP_UTC`` to ``LAST_STEP_UTC``, without the rows of
        ``DROPOUT_UTC``; ``kind`` = ``forecast``; ``issued`` = ``ISSUED_UTC``.
    """
    frame = md.synth_mast(
        FIRST_STEP_UTC,
        LAST_STEP_UTC,
        cadence_min=CADENCE_MIN,
        seed=seed,
        scenario="demo_week",
        extra_overrides=FORECAST_OVERRIDES,
    )
    utc = pd.to_datetime(frame["timestamp"], format="ISO8601", utc=True)
    lo, hi = (pd.Timestamp(t) for t in DROPOUT_UTC)
    keep = ~((utc >= lo) & (utc <= hi)).to_numpy()
    frame = frame[keep].reset_index(drop=True)
    frame["kind"] = "forecast"
    frame["issued"] = pd.Timestamp(ISSUED_UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
    return frame


def write_forecast(out: Path = HERE / FORECAST_FILE, seed: int = md.DEFAULT_SEED) -> int:
    """Write the demo forecast CSV; return its size [bytes]."""
    return md._write_csv(synth_forecast(seed), Path(out))


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(
        prog="make_forecast.py", description=f"Write the invented demo forecast for the {md.SITE_NAME}."
    )
    parser.add_argument(
        "--out",
        type=Path,
        default=HERE / FORECAST_FILE,
        help=f"output CSV (default: {FORECAST_FILE} next to this script)",
    )
    parser.add_argument("--seed", type=int, default=md.DEFAULT_SEED)
    args = parser.parse_args(argv)
    size = write_forecast(args.out, args.seed)
    print(f"wrote {args.out} ({size} bytes)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
