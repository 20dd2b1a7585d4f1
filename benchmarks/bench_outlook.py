"""Outlook speed: a 14-day forecast at 10-minute steps (2016 steps) evaluated and rendered.

    python benchmarks/bench_outlook.py            # best of 5
    python benchmarks/bench_outlook.py --repeat 2

Target: the whole outlook — every step through the same rules and decision as ``check``, the
windows for both methods, and the rich panel (coloured strip, windows table) rendered to text —
in well under one second.  Prints each part's time and the total as a ratio of that 1 s budget.
The forecast is the demo generator's invented weather (make_demo.synth_mast, no scenario).
Only the standard library's ``time.perf_counter`` is used for timing; this is not a test.
"""

from __future__ import annotations

import argparse
import importlib.util
import io
import json
import platform
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

BUDGET_S = 1.0
START_UTC = "2026-12-01T03:00:00Z"
DAYS = 14
STEP_MIN = 10


def _make_demo():
    spec = importlib.util.spec_from_file_location("make_demo", ROOT / "example_weather" / "make_demo.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules["make_demo"] = module
    spec.loader.exec_module(module)
    return module


def best(fn, repeat: int):
    """(best wall time [s], last result) of ``fn()`` over ``repeat`` runs."""
    times, result = [], None
    for _ in range(repeat):
        t0 = time.perf_counter()
        result = fn()
        times.append(time.perf_counter() - t0)
    return min(times), result


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=5)
    args = parser.parse_args(argv)

    import pandas as pd
    from rich.console import Console

    from advisor.commands.session import load_ruleset
    from advisor.evaluation.outlook import compute_outlook
    from advisor.io.feed import canonical_frame
    from advisor.io.references import read_registry
    from advisor.io.site import load_site
    from advisor.views.context import Context
    from advisor.views.outlook_data import outlook_csv_frame, outlook_json
    from advisor.views.outlook_plain import render_plain_outlook
    from advisor.views.outlook_rich import outlook_renderable

    md = _make_demo()
    site = load_site(None)
    start = pd.Timestamp(START_UTC)
    end = start + pd.Timedelta(days=DAYS) - pd.Timedelta(minutes=STEP_MIN)
    table = md.synth_mast(start, end, cadence_min=STEP_MIN)
    table["kind"] = "forecast"
    frame = canonical_frame(table, site.feed).frame
    frame["issued_utc"] = start
    registry = read_registry(site.references_path)
    rules = load_ruleset(site, ())
    ctx = Context(site_name=site.name, time_zone=site.time_zone, feed_source="benchmark", is_demo=True, data_quality={})

    t_eval, outlook = best(lambda: compute_outlook(frame, start, DAYS * 24.0, site, registry, rules, 86.0), args.repeat)

    def rich_text():
        console = Console(file=io.StringIO(), width=120, force_terminal=True, color_system="truecolor")
        console.print(outlook_renderable(outlook, ctx, 120))
        return console.file.getvalue()

    t_rich, text = best(rich_text, args.repeat)
    t_plain, plain = best(lambda: render_plain_outlook(outlook, ctx, 100), args.repeat)
    t_json, _ = best(lambda: json.dumps(outlook_json(outlook, ctx)), args.repeat)
    t_csv, _ = best(lambda: outlook_csv_frame(outlook).to_csv(index=False), args.repeat)

    n = len(outlook.steps)
    windows = sum(len(w) for w in outlook.windows.values())
    total = t_eval + t_rich
    print(
        f"outlook benchmark · {DAYS} days at {STEP_MIN}-min steps = {n} steps, {windows} windows · "
        f"python {platform.python_version()} · best of {args.repeat}"
    )
    print(f"  evaluate every step + windows   {t_eval * 1000:8.1f} ms")
    print(f"  render rich panel (120 cols)    {t_rich * 1000:8.1f} ms  ({len(text.splitlines())} lines)")
    print(f"  render plain text (100 cols)    {t_plain * 1000:8.1f} ms  ({len(plain.splitlines())} lines)")
    print(f"  JSON export                     {t_json * 1000:8.1f} ms")
    print(f"  CSV export                      {t_csv * 1000:8.1f} ms")
    ok = total < BUDGET_S
    print(
        f"  evaluate + rich render          {total * 1000:8.1f} ms = {total / BUDGET_S:.2f} x the {BUDGET_S:g} s "
        f"budget ({'ok' if ok else 'TOO SLOW'})"
    )
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
