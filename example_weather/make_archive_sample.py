"""Invented archive for `advisor replay`: a committed two-month sample and, on demand, a full year.

Everything here is made up for the fictional demo site (see README.md in this folder).

    python example_weather/make_archive_sample.py sample
        writes larch_basin_archive_sample.csv (2026-01-01 → 2026-03-01 UTC, every 5 min) and
        larch_basin_archive_references.csv (reference scans for that period)
    python example_weather/make_archive_sample.py year --out /tmp/larch_basin_year.csv
        writes one year at 1-minute cadence (about 33 MB; not committed) and, beside it,
        <name>_references.csv for the same year

Reference scans are invented by a stated rule: one every third night, two hours after local
sunset would be (taken as 01:00 UTC, i.e. 18:00 local in winter), right after an imagined
astronomical correction, with the archive's own air temperature at that minute.
"""

from __future__ import annotations

import argparse
import importlib.util
import sys
from pathlib import Path

import numpy as np
import pandas as pd

HERE = Path(__file__).resolve().parent
SAMPLE_FILE = "larch_basin_archive_sample.csv"
SAMPLE_REFERENCES_FILE = "larch_basin_archive_references.csv"
SAMPLE_START_UTC, SAMPLE_END_UTC, SAMPLE_CADENCE_MIN = "2026-01-01T00:00:00Z", "2026-03-01T00:00:00Z", 5
REFERENCE_EVERY_DAYS = 3
REFERENCE_HOUR_UTC = 1


def _make_demo():
    spec = importlib.util.spec_from_file_location("make_demo", HERE / "make_demo.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules.setdefault("make_demo", module)
    spec.loader.exec_module(module)
    return module


def references_for(mast: pd.DataFrame) -> pd.DataFrame:
    """Invented reference scans every third night at 01:00 UTC, at the archive's air temperature."""
    times = pd.to_datetime(mast["timestamp"], utc=True, format="ISO8601")
    temp_c = (mast["temp_f"].to_numpy() - 32.0) * 5.0 / 9.0
    days = pd.date_range(times.iloc[0].normalize(), times.iloc[-1], freq=f"{REFERENCE_EVERY_DAYS}D", tz="UTC")
    at = days + pd.Timedelta(hours=REFERENCE_HOUR_UTC)
    at = at[(at >= times.iloc[0]) & (at <= times.iloc[-1])]
    pos = np.searchsorted(times.to_numpy(), at.to_numpy(), side="right") - 1
    return pd.DataFrame(
        {
            "time": at.strftime("%Y-%m-%dT%H:%M:%SZ"),
            "air_temp_c": np.round(temp_c[pos], 1),
            "note": "invented: after an astronomical correction",
        }
    )


def write(start: str, end: str, cadence_min: int, out: Path) -> list[Path]:
    md = _make_demo()
    mast = md.synth_mast(start, end, cadence_min=cadence_min, seed=md.DEFAULT_SEED, scenario=None)
    mast.to_csv(out, index=False, lineterminator="\n")
    refs_path = out.with_name(SAMPLE_REFERENCES_FILE if out.name == SAMPLE_FILE else f"{out.stem}_references.csv")
    references_for(mast).to_csv(refs_path, index=False, lineterminator="\n")
    return [out, refs_path]


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="make_archive_sample.py", description=__doc__.splitlines()[0])
    sub = parser.add_subparsers(dest="command", required=True)
    sub.add_parser("sample", help="write the committed two-month sample and its registry")
    year = sub.add_parser("year", help="write a one-year 1-minute archive (not committed)")
    year.add_argument("--out", type=Path, required=True)
    year.add_argument("--start", default="2025-12-01T00:00:00Z")
    args = parser.parse_args(argv)
    if args.command == "sample":
        paths = write(SAMPLE_START_UTC, SAMPLE_END_UTC, SAMPLE_CADENCE_MIN, HERE / SAMPLE_FILE)
    else:
        start = pd.Timestamp(args.start)
        start = start.tz_localize("UTC") if start.tzinfo is None else start.tz_convert("UTC")
        end = start + pd.DateOffset(years=1)
        paths = write(start.strftime("%Y-%m-%dT%H:%M:%SZ"), end.strftime("%Y-%m-%dT%H:%M:%SZ"), 1, args.out)
    for path in paths:
        print(f"wrote {path} ({path.stat().st_size} bytes)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
