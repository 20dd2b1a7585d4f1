"""Two inner kernels against slow references, interleaved, in one process: speed-ups, not budgets.

    python benchmarks/bench_kernels.py                 # both (the sun needs astropy, ~1 min)
    python benchmarks/bench_kernels.py --only rules --pairs 5

* ``rules``: the default rules evaluated vectorised (``RuleSet.evaluate``) vs a straightforward
  per-row loop (``evaluate_row``) over the same 20,000 rows of the invented one-year archive's
  features; target a speed-up of at least 20x with identical results.
* ``sun``: sun elevation for 525,600 instants vs astropy's ``get_sun`` -> ``AltAz`` (astropy is
  a test-only extra, never imported by the advisor); target a speed-up of at least 10x with a
  largest difference of at most 0.02 deg.

Each pair runs the fast side and then the reference (A B A B ..., after a warm-up pair); the
speed-up of each pair is reference / ours and the min / median / max over the pairs is printed.
These use the advisor's internal functions (unlike run.py, which drives the CLI), so they follow
its module layout.  Standard library timing only; nothing here is a test.
"""

from __future__ import annotations

import argparse
import statistics
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path.insert(0, str(ROOT))


def interleave(ours, reference, pairs: int, warmup: bool = True) -> tuple[list[float], list[float]]:
    """Wall times [s] of ``ours()`` and ``reference()``, alternating."""

    def timed(fn) -> float:
        t0 = time.perf_counter()
        fn()
        return time.perf_counter() - t0

    if warmup:
        ours(), reference()
    a, b = [], []
    for _ in range(pairs):
        a.append(timed(ours))
        b.append(timed(reference))
    return a, b


def report(name: str, a: list[float], b: list[float], target: float, extra: str, ok: bool) -> None:
    speedups = sorted(y / x for x, y in zip(a, b))
    med = statistics.median(speedups)
    print(
        f"- {name}: ours {statistics.median(a):.4f} s, reference {statistics.median(b):.3f} s (medians); "
        f"speed-up min/median/max {speedups[0]:.0f} / {med:.0f} / {speedups[-1]:.0f}x over {len(a)} pairs "
        f"(target >= {target:g}x): {'met' if med >= target and ok else 'MISSED'}; {extra}",
        flush=True,
    )


def bench_rules(pairs: int, rows: int = 20_000) -> None:
    import numpy as np
    import pandas as pd

    from advisor.commands.session import load_ruleset
    from advisor.features import columns_of, compute_features
    from advisor.io.feed import read_feed
    from advisor.io.references import read_registry
    from advisor.io.site import load_site
    from advisor.rules.condition import evaluate_row

    feed_path = HERE / ".data" / "larch_basin_year.csv"
    if not feed_path.exists():
        subprocess.run(
            [sys.executable, str(HERE / "make_archive.py"), "--years", "1", "--out", str(feed_path)], check=True
        )
    site = load_site(ROOT / "example_weather" / "larch_basin.yaml")
    rules = load_ruleset(site, ())
    frame = read_feed(feed_path, site.feed).frame.iloc[:rows]
    registry = read_registry(feed_path.with_name(f"{feed_path.stem}_references.csv"))
    features = compute_features(frame, pd.DatetimeIndex(frame["time"]), site, registry, 86.0)
    columns = columns_of(features)
    n = len(features)
    records = [dict(zip(columns, values)) for values in zip(*(columns[k].tolist() for k in columns))]

    def vectorised():
        return rules.evaluate(columns, n)

    def per_row():
        fired = {r.id: np.zeros(n, dtype=bool) for r in rules}
        for i, row in enumerate(records):
            for rule in rules:
                fired[rule.id][i] = bool(evaluate_row(rule.condition.ast, row))
        return fired

    same = all(np.array_equal(vectorised().fired[k], v) for k, v in per_row().items())
    a, b = interleave(vectorised, per_row, pairs, warmup=False)
    report(
        f"rules vectorised vs per-row loop ({len(rules)} rules x {n:,} rows)",
        a,
        b,
        20,
        "results identical" if same else "RESULTS DIFFER",
        same,
    )


def bench_sun(pairs: int) -> None:
    import numpy as np
    import pandas as pd

    from advisor.physics.sun import solar_position

    try:
        import astropy.units as u
        from astropy.coordinates import AltAz, EarthLocation, get_sun
        from astropy.time import Time
        from astropy.utils import iers
    except ImportError:
        print("- sun position vs astropy: skipped (astropy not installed; pip install '.[test]')")
        return
    iers.conf.auto_download = False
    iers.conf.auto_max_age = None
    times = pd.date_range("2026-01-01", periods=525_600, freq="1min", tz="UTC")
    lat, lon = 47.12, -114.0  # the invented demo site
    location = EarthLocation(lat=lat * u.deg, lon=lon * u.deg, height=1050 * u.m)

    def ours():
        return solar_position(times, lat, lon, refraction=False)

    def astropy_sun():
        t = Time(times.to_pydatetime())
        return get_sun(t).transform_to(AltAz(obstime=t, location=location))

    ours_el, _ = ours()
    diff = float(np.max(np.abs(ours_el - astropy_sun().alt.deg)))
    a, b = interleave(ours, astropy_sun, pairs, warmup=False)
    report(
        "sun elevation, 525,600 instants, vs astropy",
        a,
        b,
        10,
        f"max elevation difference {diff:.4f} deg",
        diff <= 0.02,
    )


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--only", choices=("rules", "sun"), action="append")
    parser.add_argument("--pairs", type=int, default=1, help="timed pairs (default 1; astropy takes ~1 min a run)")
    args = parser.parse_args(argv)
    for key in args.only or ("rules", "sun"):
        {"rules": bench_rules, "sun": bench_sun}[key](args.pairs)
    return 0


if __name__ == "__main__":
    sys.exit(main())
