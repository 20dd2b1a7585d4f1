"""Invented weather archives of any length for the benchmarks, written in bounded memory.

    python benchmarks/make_archive.py --start 2025-12-01 --years 1 --out benchmarks/.data/year.csv
    python benchmarks/make_archive.py --start 2016-12-01 --years 10 --out benchmarks/.data/decade.csv
    python benchmarks/make_archive.py --start 2025-12-01 --days 14 --out /tmp/two_weeks.csv

Everything is made up: the rows come from the demo generator (``example_weather/make_demo.py``,
``synth_mast`` with no scenario), whose weather at an instant is a pure function of that instant
and the seed, so an archive written one chunk at a time is identical to one made in a single
call (checked on a slice by ``--verify``).  Each chunk (``--chunk-days``, default 31) is
appended to the CSV and freed, so memory stays near that of one chunk however long the archive;
ten years at 1 minute (5.26 million rows, about 330 MB) take well under a minute to write.

Beside ``NAME.csv`` goes ``NAME_references.csv``, the invented reference-scan registry made by
the same stated rule as ``example_weather/make_archive_sample.py``: one scan every third day
(counted from the archive's first midnight, UTC) at 01:00 UTC, with the archive's own air
temperature at that minute.  Both files are written under a temporary name and renamed at the
end, so an interrupted run never leaves a half-written archive behind.
"""

from __future__ import annotations

import argparse
import importlib.util
import os
import sys
from pathlib import Path

import numpy as np
import pandas as pd

ROOT = Path(__file__).resolve().parent.parent
MAKE_DEMO = ROOT / "example_weather" / "make_demo.py"
REFERENCE_EVERY_DAYS = 3  # the rule of example_weather/make_archive_sample.py
REFERENCE_HOUR_UTC = 1
REFERENCE_NOTE = "invented: after an astronomical correction"


def _make_demo():
    spec = importlib.util.spec_from_file_location("make_demo", MAKE_DEMO)
    module = importlib.util.module_from_spec(spec)
    sys.modules.setdefault("make_demo", module)
    spec.loader.exec_module(module)
    return module


def _utc(value) -> pd.Timestamp:
    ts = pd.Timestamp(value)
    return ts.tz_localize("UTC") if ts.tzinfo is None else ts.tz_convert("UTC")


def archive_end(start: pd.Timestamp, years: int | None, days: int | None) -> pd.Timestamp:
    """Last record time (included, like the demo generator): ``start`` plus whole years or days."""
    if (years is None) == (days is None):
        raise ValueError("give exactly one of years and days")
    return start + (pd.DateOffset(years=years) if years is not None else pd.Timedelta(days=days))


def reference_times(start: pd.Timestamp, end: pd.Timestamp) -> pd.DatetimeIndex:
    """Invented reference-scan instants: every third day from ``start``'s midnight, at 01:00 UTC."""
    days = pd.date_range(start.normalize(), end, freq=f"{REFERENCE_EVERY_DAYS}D", tz="UTC")
    at = days + pd.Timedelta(hours=REFERENCE_HOUR_UTC)
    return at[(at >= start) & (at <= end)]


def write_archive(
    start, end, out: Path, cadence_min: int = 1, chunk_days: int = 31, seed: int | None = None
) -> tuple[Path, Path, int]:
    """Write the archive ``[start, end]`` (both included) and its registry; return paths and rows.

    The generator runs on ``chunk_days`` at a time; chunk boundaries lie on the cadence grid, so
    every record of the whole range is written exactly once.
    """
    md = _make_demo()
    seed = md.DEFAULT_SEED if seed is None else seed
    start, end = _utc(start), _utc(end)
    step = pd.Timedelta(minutes=cadence_min).as_unit("ns")
    chunk = pd.Timedelta(days=chunk_days)
    refs_at = reference_times(start, end)
    refs_ns = refs_at.as_unit("ns").asi8
    ref_temp_f = np.full(len(refs_at), np.nan)
    out = Path(out)
    out.parent.mkdir(parents=True, exist_ok=True)
    refs_path = out.with_name(f"{out.stem}_references.csv")
    tmp_out, tmp_refs = out.with_name(out.name + ".part"), refs_path.with_name(refs_path.name + ".part")
    rows = 0
    try:
        with tmp_out.open("w", encoding="utf-8", newline="") as fh:
            lo = start
            while lo <= end:
                hi = min(lo + chunk - step, end)
                mast = md.synth_mast(lo, hi, cadence_min=cadence_min, seed=seed, scenario=None)
                mast.to_csv(fh, header=rows == 0, index=False, lineterminator="\n")
                rows += len(mast)
                # the registry's temperature: the record at or before each scan in this chunk
                lo_ns, hi_ns = lo.as_unit("ns").value, (lo + chunk).as_unit("ns").value
                mine = (refs_ns >= lo_ns) & (refs_ns < hi_ns)
                if mine.any():
                    times = lo_ns + np.arange(len(mast), dtype=np.int64) * step.value  # the records' instants
                    pos = np.searchsorted(times, refs_ns[mine], side="right") - 1
                    ref_temp_f[mine] = mast["temp_f"].to_numpy()[pos]
                del mast
                lo = lo + chunk
        pd.DataFrame(
            {
                "time": refs_at.strftime("%Y-%m-%dT%H:%M:%SZ"),
                "air_temp_c": np.round((ref_temp_f - 32.0) * 5.0 / 9.0, 1),
                "note": REFERENCE_NOTE,
            }
        ).to_csv(tmp_refs, index=False, lineterminator="\n")
        os.replace(tmp_refs, refs_path)
        os.replace(tmp_out, out)
    finally:
        for tmp in (tmp_out, tmp_refs):
            tmp.unlink(missing_ok=True)
    return out, refs_path, rows


def verify_chunking(start, cadence_min: int = 1, days: int = 9, chunk_days: int = 2) -> bool:
    """True when ``days`` written in ``chunk_days`` pieces equal one call of the generator."""
    import tempfile

    md = _make_demo()
    start = _utc(start)
    end = start + pd.Timedelta(days=days)
    whole = md.synth_mast(start, end, cadence_min=cadence_min, seed=md.DEFAULT_SEED, scenario=None)
    with tempfile.TemporaryDirectory() as tmp:
        path, _, _ = write_archive(start, end, Path(tmp) / "v.csv", cadence_min, chunk_days)
        return path.read_text(encoding="utf-8") == whole.to_csv(index=False, lineterminator="\n")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="make_archive.py", description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, help="archive CSV to write (the registry goes beside it)")
    parser.add_argument("--start", default="2025-12-01", help="first record, UTC (default 2025-12-01)")
    length = parser.add_mutually_exclusive_group()
    length.add_argument("--years", type=int, help="length in whole years (last record included)")
    length.add_argument("--days", type=int, help="length in days (last record included)")
    parser.add_argument("--cadence-min", type=int, default=1, help="record spacing [min] (default 1)")
    parser.add_argument("--chunk-days", type=int, default=31, help="days generated at a time (default 31)")
    parser.add_argument(
        "--verify", action="store_true", help="only check that chunked writing equals one call of the generator"
    )
    args = parser.parse_args(argv)
    if args.verify:
        same = verify_chunking(args.start, args.cadence_min)
        print("chunked archive equals the generator's single call" if same else "CHUNKED ARCHIVE DIFFERS")
        return 0 if same else 1
    if args.out is None or (args.years is None and args.days is None):
        parser.error("--out and one of --years/--days are required")
    start = _utc(args.start)
    path, refs, rows = write_archive(
        start, archive_end(start, args.years, args.days), args.out, args.cadence_min, args.chunk_days
    )
    for p in (path, refs):
        print(f"wrote {p} ({p.stat().st_size:,} bytes)")
    print(f"{rows:,} records")
    return 0


if __name__ == "__main__":
    sys.exit(main())
