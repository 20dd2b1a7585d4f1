"""Rule evaluation speed: 50 rules over 525,600 rows (a year at one minute) against a 1 s budget.

    python benchmarks/bench_rules.py            # 5 repetitions
    python benchmarks/bench_rules.py --repeat 9

The 20 default rules plus 30 generated site rules (thresholds with units, abs/min/max,
missing(), flags, add_error expressions) are loaded the way every command loads them (lint,
then compile once), then ``RuleSet.evaluate`` runs over synthetic feature columns.  Prints
the median time and its ratio to the budget (below 1 means within it).  Timing uses only the
standard library's ``timeit``; this is a measurement, not a test, and fails nothing.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import tempfile
import time
import timeit
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

ROWS = 525_600
RULES = 50
BUDGET_S = 1.0

#: Condition and effect templates for the generated rules; {t} is a threshold that varies.
TEMPLATES = (
    ("wind_gust_ms > {t} kn and not fog", "warn", None),
    ("wind_mean_ms > {t} m/s or gust_factor > 2.5", "block", None),
    ("abs(air_temp_rate_c_per_h) > {t} degC/h and is_night", "add_error", "5 + 2 * abs(air_temp_rate_c_per_h)"),
    ("dew_point_spread_c < {t} degF and rel_humidity_pct >= 85 %", "warn", None),
    ("-6 deg <= sun_elevation_deg <= {t} deg", "add_error", "{t}"),
    ("solar_wm2 > {t}0 W/m2 or (missing(solar_wm2) and sun_elevation_deg > 30)", "add_error", "20"),
    ("reference_age_h > {t} h and reference_temp_delta_c > 2 degC", "block", None),
    ("max(wind_gust_ms, wind_mean_ms * 1.5) > {t} m/s", "add_error", "3 * (gust_factor - 1)"),
    ("visibility_m < {t} km and not precipitation", "warn", None),
    ("calibrator_available and calibrator_elevation_deg < 2{t} deg", "warn", None),
)


def site_rules_yaml(count: int) -> str:
    """``count`` generated rules as a rule file (also used by run.py's 1000-rule replay)."""
    lines = ["rules:"]
    for i in range(count):
        cond, effect, error = TEMPLATES[i % len(TEMPLATES)]
        t = 3 + i // len(TEMPLATES)
        lines += [
            f"  - id: bench_{i:02d}",
            "    applies_to: both",
            f"    condition: {cond.format(t=t)}",
            f"    effect: {effect}",
        ]
        if error is not None:
            lines.append(f'    error_um: "{error.format(t=t)}"')
        lines.append('    message: "bench rule {wind_gust_ms:.1f}"')
    return "\n".join(lines) + "\n"


def feature_columns(n: int, seed: int = 1) -> dict[str, np.ndarray]:
    """Synthetic columns for every feature: numbers with some NaN, flags as booleans."""
    from advisor.features import FEATURES

    rng = np.random.default_rng(seed)
    columns = {}
    for spec in FEATURES:
        if spec.unit == "flag":
            columns[spec.name] = rng.random(n) < 0.3
        else:
            values = rng.normal(5.0, 10.0, n)
            values[rng.random(n) < 0.02] = np.nan
            columns[spec.name] = values
    return columns


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=5, help="timed repetitions (default 5)")
    args = parser.parse_args(argv)
    from advisor.features import CATALOGUE
    from advisor.rules.loader import default_rule_files, load_rules

    defaults = [(p, "default") for p in default_rule_files()]
    with tempfile.TemporaryDirectory() as tmp:
        base = load_rules(defaults, CATALOGUE)
        extra = Path(tmp) / "bench_rules.yaml"
        extra.write_text(site_rules_yaml(RULES - len(base)), encoding="utf-8")
        t0 = time.perf_counter()
        ruleset = load_rules(defaults + [(extra, "site")], CATALOGUE)
        load_s = time.perf_counter() - t0
    columns = feature_columns(ROWS)
    result = ruleset.evaluate(columns, ROWS)  # warm-up, and a sanity check of the output
    assert all(mask.shape == (ROWS,) for mask in result.fired.values())
    times = timeit.repeat(lambda: ruleset.evaluate(columns, ROWS), number=1, repeat=args.repeat)
    median = statistics.median(times)
    fired = sum(int(m.sum()) for m in result.fired.values())
    print(
        f"rules: {len(ruleset)} ({len(base)} default + {len(ruleset) - len(base)} generated), "
        f"rows: {ROWS:,}; lint + compile: {load_s:.3f} s"
    )
    print(f"evaluate: median {median:.3f} s, best {min(times):.3f} s over {args.repeat} runs ({fired:,} rule firings)")
    print(f"ratio to the {BUDGET_S:g} s budget: {median / BUDGET_S:.2f} (below 1 is within budget)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
