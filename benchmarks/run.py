"""The advisor's speed targets, measured in one run and printed as ratios.

    python benchmarks/run.py            # all four (generates a one-year archive on first use)
    python benchmarks/run.py --quick    # fewer repetitions

Targets (ratios, not absolute times, so they mean the same on any machine):

1. ``advisor check`` on the bundled demo vs ``python -c "import numpy, pandas"``   ≤ 1.3×
2. replay of one year at 1 minute vs only reading that file with pandas             ≤ 2×
3. vectorised rule evaluation vs a straightforward per-row loop, same rules/rows     ≥ 20×
4. sun position for 525,600 instants vs astropy (max difference ≤ 0.02°)            ≥ 10×

Uses only the standard library's ``time``/``subprocess`` for timing; astropy (a test-only
extra) is needed for benchmark 4.  These are not tests: nothing here fails a build.
"""

from __future__ import annotations

import argparse
import os
import platform
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
DATA = Path(__file__).resolve().parent / ".data"
YEAR = DATA / "larch_basin_year.csv"
YEAR_REFERENCES = DATA / "larch_basin_year_references.csv"
SITE = ROOT / "example_weather" / "larch_basin.yaml"
sys.path.insert(0, str(ROOT))


def best_of(fn, repeat: int) -> tuple[float, float]:
    """(min, median) wall time of ``fn()`` over ``repeat`` runs [s]."""
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times), statistics.median(times)


def run_process(argv: list[str], cwd: Path = ROOT) -> None:
    subprocess.run(argv, check=False, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, cwd=cwd)


def bench_check(repeat: int) -> dict:
    # What a user runs: the installed console script (byte-compiled at install), started outside
    # the checkout; without an install, the checkout's sources via -m (slower: compiled each run
    # when PYTHONDONTWRITEBYTECODE is set).
    script = Path(sys.executable).with_name("advisor")
    installed = script.exists()
    check = [str(script), "check"] if installed else [sys.executable, "-m", "advisor", "check"]
    baseline = [sys.executable, "-c", "import numpy, pandas"]
    cwd = Path(tempfile.gettempdir()) if installed else ROOT
    run_process(check, cwd)  # warm the file cache
    c_times, b_times = [], []
    for _ in range(2 * repeat):  # interleaved, so drifting machine load hits both alike
        for argv, times in ((check, c_times), (baseline, b_times)):
            t0 = time.perf_counter()
            run_process(argv, cwd)
            times.append(time.perf_counter() - t0)
    c_min, c_med = min(c_times), statistics.median(c_times)
    b_min, b_med = min(b_times), statistics.median(b_times)
    return {"name": "check (demo) vs import numpy, pandas", "ours_s": c_med, "reference_s": b_med,
            "ratio": c_med / b_med, "target": "<= 1.3x", "ok": c_med / b_med <= 1.3,
            "note": f"best runs: {c_min:.3f} s vs {b_min:.3f} s = {c_min / b_min:.2f}x; "
                    + ("installed console script" if installed else "checkout sources via -m (not installed)")}


def ensure_year() -> None:
    if YEAR.exists() and YEAR_REFERENCES.exists():
        return
    DATA.mkdir(exist_ok=True)
    print(f"generating {YEAR} (invented one-year archive, ~33 MB) ...", flush=True)
    subprocess.run([sys.executable, str(ROOT / "example_weather" / "make_archive_sample.py"), "year",
                    "--out", str(YEAR)], check=True, cwd=ROOT)


def bench_replay(repeat: int) -> list[dict]:
    """`advisor replay --json` of the year, in-process: cold (features recomputed, --no-cache)
    and warm (a second replay of the same archive, features from the cache)."""
    import contextlib
    import io

    import pandas as pd

    from advisor.commands.main import main as advisor_main

    ensure_year()
    argv = ["replay", "--site", str(SITE), "--feed", str(YEAR), "--references", str(YEAR_REFERENCES), "--json"]
    cache = Path(tempfile.mkdtemp(prefix="advisor-bench-cache-"))
    os.environ["ADVISOR_CACHE_DIR"] = str(cache)

    def replay(extra):
        with contextlib.redirect_stdout(io.StringIO()):
            assert advisor_main(argv + extra) == 0

    c_min, c_med = best_of(lambda: replay(["--no-cache"]), repeat)
    replay([])  # fills the cache
    w_min, w_med = best_of(lambda: replay([]), repeat)
    p_min, p_med = best_of(lambda: pd.read_csv(YEAR), repeat)
    for entry in cache.glob("*"):
        entry.unlink()
    cache.rmdir()
    return [
        {"name": "replay one year @1 min, cold (--no-cache) vs pandas.read_csv of it", "ours_s": c_med,
         "reference_s": p_med, "ratio": c_med / p_med, "target": "<= 2x", "ok": c_med / p_med <= 2.0},
        {"name": "replay one year @1 min, again (features from the cache) vs pandas.read_csv of it",
         "ours_s": w_med, "reference_s": p_med, "ratio": w_med / p_med, "target": "<= 2x",
         "ok": w_med / p_med <= 2.0},
    ]


def bench_rules_vs_loop(repeat: int, rows: int = 20_000) -> dict:
    import numpy as np
    import pandas as pd

    from advisor.commands.session import load_ruleset
    from advisor.features import columns_of, compute_features
    from advisor.io.feed import read_feed
    from advisor.io.references import read_registry
    from advisor.rules.condition import evaluate_row
    from advisor.io.site import load_site

    ensure_year()
    site = load_site(SITE)
    rules = load_ruleset(site, None)
    feed = read_feed(YEAR, site.feed)
    frame = feed.frame.iloc[:rows]
    features = compute_features(frame, pd.DatetimeIndex(frame["time"]), site, read_registry(YEAR_REFERENCES), 86.0)
    columns = columns_of(features)
    n = len(features)

    def vectorised():
        return rules.evaluate(columns, n)

    records = [dict(zip(columns, values)) for values in zip(*(columns[k].tolist() for k in columns))]

    def per_row():
        fired = {r.id: np.zeros(n, dtype=bool) for r in rules}
        for i, row in enumerate(records):
            for rule in rules:
                fired[rule.id][i] = bool(evaluate_row(rule.condition.ast, row))
        return fired

    v_min, v_med = best_of(vectorised, repeat)
    l_min, l_med = best_of(per_row, 1)
    same = all(np.array_equal(vectorised().fired[k], v) for k, v in per_row().items())
    return {"name": f"rules vectorised vs per-row loop ({len(rules)} rules x {n} rows)", "ours_s": v_med,
            "reference_s": l_med, "ratio": l_med / v_med, "target": ">= 20x (speed-up)",
            "ok": l_med / v_med >= 20 and same, "note": "results identical" if same else "RESULTS DIFFER"}


def bench_sun(repeat: int) -> dict:
    import numpy as np
    import pandas as pd

    from advisor.physics.sun import solar_position

    times = pd.date_range("2026-01-01", periods=525_600, freq="1min", tz="UTC")
    lat, lon = 47.12, -114.0
    o_min, o_med = best_of(lambda: solar_position(times, lat, lon, refraction=False), repeat)
    try:
        import astropy.units as u
        from astropy.coordinates import AltAz, EarthLocation, get_sun
        from astropy.time import Time
        from astropy.utils import iers
    except ImportError:
        return {"name": "sun position vs astropy", "ok": None, "note": "astropy not installed (pip install '.[test]')"}
    iers.conf.auto_download = False
    iers.conf.auto_max_age = None
    location = EarthLocation(lat=lat * u.deg, lon=lon * u.deg, height=1050 * u.m)

    def astropy_sun():
        t = Time(times.to_pydatetime())
        return get_sun(t).transform_to(AltAz(obstime=t, location=location))

    t0 = time.perf_counter()
    altaz = astropy_sun()
    a_s = time.perf_counter() - t0
    ours_el, _ = solar_position(times, lat, lon, refraction=False)
    diff = float(np.max(np.abs(ours_el - altaz.alt.deg)))
    return {"name": "sun position, 525,600 instants, vs astropy", "ours_s": o_med, "reference_s": a_s,
            "ratio": a_s / o_med, "target": ">= 10x (speed-up), max diff <= 0.02 deg",
            "ok": a_s / o_med >= 10 and diff <= 0.02, "note": f"max elevation difference {diff:.4f} deg"}


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer repetitions")
    parser.add_argument("--only", choices=("check", "replay", "rules", "sun"), action="append")
    args = parser.parse_args()
    repeat = 5 if args.quick else 11
    benches = {"check": lambda: bench_check(repeat), "replay": lambda: bench_replay(max(2, repeat // 3)),
               "rules": lambda: bench_rules_vs_loop(max(2, repeat // 2)), "sun": lambda: bench_sun(repeat)}
    print(f"machine: {platform.machine()}, {os.cpu_count()} cores, Python {platform.python_version()}, "
          f"{platform.system()} {platform.release()}")
    for key in args.only or benches:
        results = benches[key]()
        for result in results if isinstance(results, list) else [results]:
            _report(result)
    return 0


def _report(result: dict) -> None:
    if result.get("ours_s") is None:
        print(f"- {result['name']}: skipped ({result['note']})")
        return
    status = "meets target" if result["ok"] else "MISSES target"
    print(f"- {result['name']}: ours {result['ours_s']:.3f} s, reference {result['reference_s']:.3f} s, "
          f"ratio {result['ratio']:.2f}x (target {result['target']}): {status}"
          + (f"; {result['note']}" if result.get("note") else ""), flush=True)


if __name__ == "__main__":
    sys.exit(main())
