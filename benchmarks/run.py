"""The advisor's speed and memory targets, each measured interleaved with its reference.

    python benchmarks/run.py                     # every target (makes the archives on first use)
    python benchmarks/run.py --quick             # short archives, few runs: a smoke test, not results
    python benchmarks/run.py --only check --only first_replay
    python benchmarks/run.py --record            # also write benchmarks/RESULTS.json
    python benchmarks/run.py --markdown          # print the summary as a Markdown table

Targets (ratios and peak memory, so that they mean the same on any machine):

=============  =================================================================  ==================
check          ``advisor check`` (demo) vs ``python -c "import numpy, pandas"``    median ratio ≤ 1.2
first_replay   replay of one year at 1 min, ``--no-cache``, vs ``pandas.read_csv``  ≤ 2.0 whole process,
               of the same file                                                    ≤ 4 in-process
cached_replay  the same replay with the features cached vs ``pandas.read_csv``    ≤ 1.0 whole process
ten_years      replay of ten years at 1 min (``--no-cache``) vs one year           peak RSS ≤ 800 MB,
                                                                                   time ≤ 11×
rules_1000     cached replay of one year with 1000 extra rules                    peak RSS ≤ 1000 MB
=============  =================================================================  ==================

Method.  Each measurement alternates with its reference, A B A B ..., after one unmeasured pair
(warm-up: file cache, byte-compiled modules, the feature cache where the target wants it), so a
load spike on this shared machine hits both sides of a pair alike; the figure reported for a
target is the min / median / max of the per-pair ratios A/B, and a target is judged on the
median of the wall-time ratios.  "Whole process" starts each side as a fresh process
(``subprocess``) and takes its wall time, its CPU time (user + system) and its peak resident set
size (``ru_utime``, ``ru_stime``, ``ru_maxrss`` of that one child, from ``os.wait4``).
"In-process" runs both sides, alternating, in one Python process that imports everything first
(a worker started by this script): the advisor through its CLI entry function with the same
arguments, the reference as ``pandas.read_csv``; ``gc.collect()`` before each timed call.  The
CPU-time ratios are printed beside the wall-time ones: on a busy machine wall time stretches
with the load while CPU time barely moves, so a gap between the two is contention, not code.

The advisor runs from this checkout as ``python -m advisor`` with ``PYTHONPATH`` set to the
repository root, byte-compiled (``PYTHONDONTWRITEBYTECODE`` is removed from the children's
environment, as an installed package would be compiled at install), with a fresh feature cache
in a temporary ``ADVISOR_CACHE_DIR`` per target.  The archives are invented
(``benchmarks/make_archive.py``) and kept under ``benchmarks/.data/`` (not committed): one year
from 2025-12-01 (525,601 rows, 33 MB) and ten years from 2016-12-01 (5,258,881 rows, 331 MB);
``--quick`` uses 14 and 140 days instead.  Timing and memory use only the standard library
(the in-process worker imports pandas for its reference, the rule file comes from
``bench_rules.py``); nothing here is a test and nothing fails a build: the exit status is 1 only
when a command itself failed.
"""

from __future__ import annotations

import argparse
import contextlib
import datetime as dt
import gc
import importlib
import importlib.metadata
import io
import json
import os
import platform
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from dataclasses import asdict, dataclass, field
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
DATA = HERE / ".data"
RESULTS_JSON = HERE / "RESULTS.json"
SITE = ROOT / "example_weather" / "larch_basin.yaml"
PY = sys.executable

# ---------------------------------------------------------------------------------------------
# The command lines: the one place to adapt when the advisor's CLI changes.
# {site}, {feed}, {references} and {rules} are filled in per target.
# ---------------------------------------------------------------------------------------------
#: The advisor as a whole process, from the checkout (PYTHONPATH = repository root).
ADVISOR = [PY, "-m", "advisor"]
#: What ``python -m advisor`` calls, for in-process timing: (module, function), called with argv.
ADVISOR_ENTRY = ("advisor.commands.main", "main")
_REPLAY = ["replay", "--site", "{site}", "--feed", "{feed}", "--references", "{references}", "--json"]
COMMANDS: dict[str, list[str]] = {
    "replay_first": _REPLAY + ["--no-cache"],  # features computed, cache untouched
    "replay_cached": _REPLAY,  # features from the cache (warmed first)
    "replay_rules": _REPLAY + ["--rules", "{rules}"],  # extra rule file layered on the defaults
    "check": ["check"],  # the bundled demo site and feed
}
#: Exit statuses meaning "ran to the end" (check exits with its verdict: 0, 10, 11, 12).
OK_STATUS: dict[str, set[int]] = {"check": {0, 10, 11, 12}}
#: The references, as whole processes (in-process, the reference is pandas.read_csv(feed): see in_process_worker).
REFERENCES: dict[str, list[str]] = {
    "read_csv": [PY, "-c", "import sys, pandas; pandas.read_csv(sys.argv[1])", "{feed}"],
    "import_numpy_pandas": [PY, "-c", "import numpy, pandas"],
}
# ---------------------------------------------------------------------------------------------

#: Archives: name -> (first record UTC, years, days); the last record is included.
ARCHIVES = {
    "year": ("2025-12-01", 1, None),
    "decade": ("2016-12-01", 10, None),
    "quick_base": ("2025-12-01", None, 14),
    "quick_long": ("2025-12-01", None, 140),
}
TARGETS = ("check", "first_replay", "cached_replay", "ten_years", "rules_1000")
#: Timed pairs per target: (full, --quick).
PAIRS = {"check": (21, 5), "first_replay": (9, 3), "cached_replay": (9, 3), "ten_years": (3, 2), "rules_1000": (3, 2)}
EXTRA_RULES = 1000
LIBRARIES = ("numpy", "pandas", "scikit-learn", "rich", "pyyaml")
MB = 1e6  # peak RSS is reported in MB of 10^6 bytes


# --------------------------------------------------------------------------- measurement
@dataclass
class Sample:
    wall_s: float
    cpu_s: float  # user + system CPU time of the process (all its threads)
    peak_rss_mb: float | None = None


@dataclass
class Measurement:
    """One interleaved series: ours and the reference, pair by pair."""

    mode: str  # "whole process" or "in-process"
    ours: str  # what was run, as text
    reference: str
    ours_s: list[float]  # wall time of each run [s]
    reference_s: list[float]
    ours_cpu_s: list[float]  # CPU time of each run [s]
    reference_cpu_s: list[float]
    ours_peak_rss_mb: list[float] = field(default_factory=list)
    reference_peak_rss_mb: list[float] = field(default_factory=list)

    @property
    def ratios(self) -> list[float]:
        return [a / b for a, b in zip(self.ours_s, self.reference_s)]

    def summary(self) -> dict:
        r = self.ratios
        out = {
            "pairs": len(r),
            "ratio_min": min(r),
            "ratio_median": statistics.median(r),
            "ratio_max": max(r),
            "ours_median_s": statistics.median(self.ours_s),
            "reference_median_s": statistics.median(self.reference_s),
            "cpu_ratio_median": statistics.median(a / b for a, b in zip(self.ours_cpu_s, self.reference_cpu_s)),
        }
        if self.ours_peak_rss_mb:
            out["ours_peak_rss_mb_max"] = max(self.ours_peak_rss_mb)
            out["reference_peak_rss_mb_max"] = max(self.reference_peak_rss_mb)
        return out


@dataclass
class Check:
    """``value <= limit``; ``mode`` names the measurement it comes from (None: none)."""

    what: str
    value: float
    limit: float
    unit: str = "x"
    mode: str | None = "whole process"

    @property
    def met(self) -> bool:
        return self.value <= self.limit


@dataclass
class Result:
    key: str
    title: str
    commands: dict[str, str] = field(default_factory=dict)
    measurements: list[Measurement] = field(default_factory=list)
    checks: list[Check] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    error: str | None = None
    load_average: tuple[float, float] | None = None  # 1-minute load average before and after
    elapsed_s: float | None = None  # the whole target, generation included


class CommandFailed(RuntimeError):
    pass


def child_env(cache_dir: Path) -> dict[str, str]:
    """The environment of every child: the checkout importable, a private feature cache, bytecode."""
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join(p for p in (str(ROOT), env.get("PYTHONPATH")) if p)
    env["ADVISOR_CACHE_DIR"] = str(cache_dir)
    env.pop("PYTHONDONTWRITEBYTECODE", None)
    return env


def run_process(argv: list[str], env: dict[str, str], ok: set[int] = frozenset({0})) -> Sample:
    """Run ``argv`` to completion; its wall time and its own peak RSS (``os.wait4``)."""
    with tempfile.TemporaryFile() as out, tempfile.TemporaryFile() as err:
        t0 = time.perf_counter()
        proc = subprocess.Popen(argv, stdin=subprocess.DEVNULL, stdout=out, stderr=err, env=env, cwd=ROOT)
        _, status, usage = os.wait4(proc.pid, 0)
        wall = time.perf_counter() - t0
        proc.returncode = os.waitstatus_to_exitcode(status)
        if proc.returncode not in ok:
            err.seek(0)
            tail = err.read().decode("utf-8", "replace").strip().splitlines()[-5:]
            raise CommandFailed(f"exit status {proc.returncode}: {shell_text(argv)}\n    " + "\n    ".join(tail))
    return Sample(wall, usage.ru_utime + usage.ru_stime, usage.ru_maxrss * 1024 / MB)  # maxrss: KiB on Linux


def interleave_processes(
    ours: list[str], ref: list[str], pairs: int, env: dict[str, str], ok_ours: set[int] = frozenset({0})
) -> Measurement:
    """A B A B ...: one unmeasured warm-up pair, then ``pairs`` timed pairs."""
    run_process(ours, env, ok_ours)
    run_process(ref, env)
    a, b = [], []
    for _ in range(pairs):
        a.append(run_process(ours, env, ok_ours))
        b.append(run_process(ref, env))
    return Measurement(
        "whole process",
        shell_text(ours),
        shell_text(ref),
        [s.wall_s for s in a],
        [s.wall_s for s in b],
        [s.cpu_s for s in a],
        [s.cpu_s for s in b],
        [s.peak_rss_mb for s in a],
        [s.peak_rss_mb for s in b],
    )


def interleave_in_process(argv: list[str], feed: Path, pairs: int, env: dict[str, str]) -> Measurement:
    """Both sides alternating in one worker process: the advisor's entry function vs read_csv."""
    with tempfile.TemporaryDirectory(prefix="advisor-bench-") as tmp:
        spec, out = Path(tmp) / "spec.json", Path(tmp) / "out.json"
        spec.write_text(json.dumps({"argv": argv, "feed": str(feed), "pairs": pairs, "out": str(out)}))
        run_process([PY, str(Path(__file__).resolve()), "--in-process-worker", str(spec)], env)
        got = json.loads(out.read_text())
    return Measurement(
        "in-process",
        f"{ADVISOR_ENTRY[0]}.{ADVISOR_ENTRY[1]}({[relative(a) for a in argv]!r})",
        f"pandas.read_csv({relative(str(feed))!r})",
        got["ours_s"],
        got["reference_s"],
        got["ours_cpu_s"],
        got["reference_cpu_s"],
    )


def in_process_worker(spec_path: str) -> int:
    """Entry of the worker process: time the advisor and read_csv alternately, write JSON."""
    spec = json.loads(Path(spec_path).read_text())
    import pandas

    entry = getattr(importlib.import_module(ADVISOR_ENTRY[0]), ADVISOR_ENTRY[1])

    def ours():
        with contextlib.redirect_stdout(io.StringIO()):
            status = entry(spec["argv"])
        if status != 0:
            raise CommandFailed(f"in-process advisor returned {status}")

    def reference():
        pandas.read_csv(spec["feed"])

    def timed(fn) -> tuple[float, float]:
        gc.collect()
        t0, c0 = time.perf_counter(), time.process_time()
        fn()
        return time.perf_counter() - t0, time.process_time() - c0

    ours(), reference()  # warm-up pair
    a, b = [], []
    for _ in range(spec["pairs"]):
        a.append(timed(ours))
        b.append(timed(reference))
    Path(spec["out"]).write_text(
        json.dumps(
            {
                "ours_s": [w for w, _ in a],
                "reference_s": [w for w, _ in b],
                "ours_cpu_s": [c for _, c in a],
                "reference_cpu_s": [c for _, c in b],
            }
        )
    )
    return 0


def relative(arg: str) -> str:
    """``arg`` relative to the repository root when it is a path inside it."""
    return os.path.relpath(arg, ROOT) if arg.startswith(str(ROOT) + os.sep) else arg


def shell_text(argv: list[str]) -> str:
    """A command line as text, with this interpreter shown as ``python`` and paths relative to the root."""

    def show(arg: str) -> str:
        if arg == PY:
            return "python"
        arg = relative(arg)
        return f"'{arg}'" if any(c in arg for c in ' ;"') else arg

    return " ".join(show(a) for a in argv)


def fill(argv: list[str], **values) -> list[str]:
    return [a.format(**{k: str(v) for k, v in values.items()}) for a in argv]


# --------------------------------------------------------------------------- inputs
def archive(name: str) -> tuple[Path, Path]:
    """The invented archive ``name`` and its reference registry, generated on first use."""
    start, years, days = ARCHIVES[name]
    feed = DATA / ("larch_basin_year.csv" if name == "year" else f"larch_basin_{name}.csv")
    refs = feed.with_name(f"{feed.stem}_references.csv")
    if not (feed.exists() and refs.exists()):
        length = ["--years", str(years)] if years is not None else ["--days", str(days)]
        print(f"generating {feed.relative_to(ROOT)} (invented, {length[1]} {length[0][2:]} at 1 min) ...", flush=True)
        subprocess.run(
            [PY, str(HERE / "make_archive.py"), "--start", start, *length, "--out", str(feed)],
            check=True,
            stdout=subprocess.DEVNULL,
        )
    return feed, refs


def rules_file(count: int) -> Path:
    """A rule file with ``count`` generated rules (bench_rules.py's templates)."""
    sys.path.insert(0, str(HERE))
    try:
        from bench_rules import site_rules_yaml
    finally:
        sys.path.remove(str(HERE))
    path = DATA / f"bench_rules_{count}.yaml"
    text = site_rules_yaml(count)
    if not path.exists() or path.read_text(encoding="utf-8") != text:
        DATA.mkdir(exist_ok=True)
        path.write_text(text, encoding="utf-8")
    return path


def dir_bytes(path: Path) -> int:
    return sum(p.stat().st_size for p in path.rglob("*") if p.is_file())


# --------------------------------------------------------------------------- targets
def target_check(res: Result, pairs: int, quick: bool, cache: Path) -> None:
    env = child_env(cache)
    ours, ref = ADVISOR + COMMANDS["check"], REFERENCES["import_numpy_pandas"]
    res.commands = {"ours": shell_text(ours), "reference": shell_text(ref)}
    m = interleave_processes(ours, ref, pairs, env, OK_STATUS["check"])
    res.measurements.append(m)
    res.checks.append(Check("median ratio", m.summary()["ratio_median"], 1.2))


def _replay_argv(key: str, feed: Path, refs: Path, **extra) -> list[str]:
    return fill(COMMANDS[key], site=SITE, feed=feed, references=refs, **extra)


def target_first_replay(res: Result, pairs: int, quick: bool, cache: Path) -> None:
    env = child_env(cache)
    feed, refs = archive("quick_base" if quick else "year")
    argv = _replay_argv("replay_first", feed, refs)
    ours, ref = ADVISOR + argv, fill(REFERENCES["read_csv"], feed=feed)
    res.commands = {"ours": shell_text(ours), "reference": shell_text(ref)}
    m = interleave_processes(ours, ref, pairs, env)
    res.measurements.append(m)
    res.checks.append(Check("median ratio", m.summary()["ratio_median"], 2.0))
    m = interleave_in_process(argv, feed, pairs, env)
    res.measurements.append(m)
    res.checks.append(Check("median ratio", m.summary()["ratio_median"], 4.0, mode="in-process"))


def target_cached_replay(res: Result, pairs: int, quick: bool, cache: Path) -> None:
    env = child_env(cache)
    feed, refs = archive("quick_base" if quick else "year")
    argv = _replay_argv("replay_cached", feed, refs)
    ours, ref = ADVISOR + argv, fill(REFERENCES["read_csv"], feed=feed)
    res.commands = {"ours": shell_text(ours), "reference": shell_text(ref)}
    run_process(ours, env)  # fills the cache
    cache_mb, csv_mb = dir_bytes(cache / "replay") / MB, feed.stat().st_size / MB
    m = interleave_processes(ours, ref, pairs, env)
    res.measurements.append(m)
    res.checks.append(Check("median ratio", m.summary()["ratio_median"], 1.0))
    res.checks.append(Check("feature cache size / CSV size", cache_mb / csv_mb, 1.0, mode=None))
    res.notes.append(f"feature cache {cache_mb:.0f} MB for a {csv_mb:.0f} MB CSV")
    res.measurements.append(interleave_in_process(argv, feed, pairs, env))  # no target: for the record


def target_ten_years(res: Result, pairs: int, quick: bool, cache: Path) -> None:
    env = child_env(cache)
    long_feed, long_refs = archive("quick_long" if quick else "decade")
    feed, refs = archive("quick_base" if quick else "year")
    ours, ref = (
        ADVISOR + _replay_argv("replay_first", long_feed, long_refs),
        ADVISOR + _replay_argv("replay_first", feed, refs),
    )
    res.commands = {"ours": shell_text(ours), "reference": shell_text(ref)}
    m = interleave_processes(ours, ref, pairs, env)
    res.measurements.append(m)
    s = m.summary()
    res.checks.append(Check("median time ratio", s["ratio_median"], 11.0))
    res.checks.append(Check("peak RSS (largest run)", s["ours_peak_rss_mb_max"], 800.0, "MB"))


def target_rules_1000(res: Result, pairs: int, quick: bool, cache: Path) -> None:
    env = child_env(cache)
    feed, refs = archive("quick_base" if quick else "year")
    rules = rules_file(EXTRA_RULES)
    ours = ADVISOR + _replay_argv("replay_rules", feed, refs, rules=rules)
    ref = ADVISOR + _replay_argv("replay_cached", feed, refs)
    res.commands = {"ours": shell_text(ours), "reference": shell_text(ref)}
    run_process(ref, env)  # fills the cache (its key does not depend on the rules)
    m = interleave_processes(ours, ref, pairs, env)
    res.measurements.append(m)
    res.checks.append(Check("peak RSS (largest run)", m.summary()["ours_peak_rss_mb_max"], 1000.0, "MB"))
    res.notes.append(
        f"{EXTRA_RULES} generated rules (benchmarks/bench_rules.py templates) on top of the "
        "default and site rules; reference: the same cached replay with those alone"
    )


TARGET_INFO = {
    "check": (target_check, "advisor check (demo) vs python -c 'import numpy, pandas'"),
    "first_replay": (target_first_replay, "first replay of {base} at 1 min (--no-cache) vs pandas.read_csv of it"),
    "cached_replay": (target_cached_replay, "replay of {base} at 1 min, features cached, vs pandas.read_csv of it"),
    "ten_years": (target_ten_years, "replay of {long} at 1 min (--no-cache) vs the same of {base}"),
    "rules_1000": (target_rules_1000, "cached replay of {base} with 1000 extra rules vs the same without them"),
}


# --------------------------------------------------------------------------- environment record
def machine() -> dict:
    info = {
        "cores": os.cpu_count(),
        "cores_usable": len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else None,
        "cpu": platform.processor() or platform.machine(),
        "arch": platform.machine(),
        "system": f"{platform.system()} {platform.release()}",
        "memory_gib": None,
    }
    with contextlib.suppress(OSError):
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                info["cpu"] = line.split(":", 1)[1].strip()
                break
    with contextlib.suppress(OSError, ValueError, IndexError):
        for line in Path("/proc/meminfo").read_text().splitlines():
            if line.startswith("MemTotal:"):
                info["memory_gib"] = round(int(line.split()[1]) / 2**20, 1)
    return info


def versions() -> dict:
    out = {"python": f"{platform.python_implementation()} {platform.python_version()}"}
    for name in LIBRARIES:
        try:
            out[name] = importlib.metadata.version(name)
        except importlib.metadata.PackageNotFoundError:
            out[name] = None
    return out


def repository() -> dict:
    def git(*args) -> str | None:
        try:
            return subprocess.run(["git", *args], cwd=ROOT, capture_output=True, text=True, check=True).stdout.strip()
        except (OSError, subprocess.CalledProcessError):
            return None

    status = git("status", "--porcelain", "--untracked-files=no")
    return {
        "commit": git("rev-parse", "--short", "HEAD"),
        "branch": git("rev-parse", "--abbrev-ref", "HEAD"),
        "modified": bool(status) if status is not None else None,
    }


# --------------------------------------------------------------------------- reporting
def fmt_ratio(s: dict) -> str:
    return f"{s['ratio_min']:.2f} / {s['ratio_median']:.2f} / {s['ratio_max']:.2f}"


def fmt_check(c: Check) -> str:
    value = f"{c.value:.0f} MB" if c.unit == "MB" else f"{c.value:.2f}x"
    limit = f"{c.limit:.0f} MB" if c.unit == "MB" else f"{c.limit:g}x"
    where = f"{c.mode}, " if c.mode else ""
    return f"{where}{c.what}: {value} (target <= {limit}) {'met' if c.met else 'MISSED'}"


def print_result(res: Result) -> None:
    print(f"\n{res.key}: {res.title}")
    for role, text in res.commands.items():
        print(f"  {role:<9} {text}")
    if res.error:
        print(f"  ERROR {res.error}")
        return
    for m in res.measurements:
        s = m.summary()
        rss = (
            f"; peak RSS {s['ours_peak_rss_mb_max']:.0f} / {s['reference_peak_rss_mb_max']:.0f} MB"
            if "ours_peak_rss_mb_max" in s
            else ""
        )
        print(
            f"  {m.mode:<14} ours {s['ours_median_s']:.3f} s, reference {s['reference_median_s']:.3f} s "
            f"(medians); ratio min/median/max {fmt_ratio(s)} over {s['pairs']} pairs; CPU-time ratio median "
            f"{s['cpu_ratio_median']:.2f}{rss}"
        )
    for c in res.checks:
        print(f"  -> {fmt_check(c)}")
    for note in res.notes:
        print(f"  note: {note}")
    print(
        f"  load average (1 min) {res.load_average[0]:.2f} before, {res.load_average[1]:.2f} after; "
        f"took {res.elapsed_s:.0f} s"
    )


SUMMARY_HEADER = (
    "target",
    "mode",
    "ours (median)",
    "reference (median)",
    "wall-time ratio min / median / max",
    "CPU-time ratio (median)",
    "peak RSS ours / ref",
    "target",
    "",
)


def summary_rows(results: list[Result], missed: str = "MISSED") -> list[tuple[str, ...]]:
    """One row per measurement (with the checks made on it) and one per check on no measurement."""

    def target_text(checks: list[Check]) -> tuple[str, str]:
        if not checks:
            return "-", "(for the record)"
        return (
            "; ".join(f"{c.what} <= {c.limit:g}{' MB' if c.unit == 'MB' else 'x'}" for c in checks),
            ", ".join("met" if c.met else missed for c in checks),
        )

    rows = []
    for res in results:
        if res.error:
            rows.append((res.key, "ERROR", "", "", "", "", "", "", "command failed"))
            continue
        for m in res.measurements:
            s = m.summary()
            rss = (
                f"{s['ours_peak_rss_mb_max']:.0f} / {s['reference_peak_rss_mb_max']:.0f} MB"
                if "ours_peak_rss_mb_max" in s
                else "-"
            )
            target, verdict = target_text([c for c in res.checks if c.mode == m.mode])
            rows.append(
                (
                    res.key,
                    m.mode,
                    f"{s['ours_median_s']:.3f} s",
                    f"{s['reference_median_s']:.3f} s",
                    f"{fmt_ratio(s)} ({s['pairs']} pairs)",
                    f"{s['cpu_ratio_median']:.2f}",
                    rss,
                    target,
                    verdict,
                )
            )
        for c in res.checks:
            if c.mode is None:
                rows.append(
                    (res.key, c.what, "", "", f"{c.value:.2f}", "", "", f"<= {c.limit:g}", "met" if c.met else missed)
                )
    return rows


def plain_table(rows: list[tuple[str, ...]]) -> str:
    widths = [max(len(r[i]) for r in [SUMMARY_HEADER, *rows]) for i in range(len(SUMMARY_HEADER))]
    return "\n".join("  ".join(cell.ljust(w) for cell, w in zip(r, widths)).rstrip() for r in [SUMMARY_HEADER, *rows])


def markdown_table(rows: list[tuple[str, ...]]) -> str:
    lines = ["| " + " | ".join(SUMMARY_HEADER) + " |", "|" + "---|" * len(SUMMARY_HEADER)]
    return "\n".join(lines + ["| " + " | ".join(r) + " |" for r in rows])


def record(results: list[Result], header: dict) -> None:
    """Write (or, with --only, update) benchmarks/RESULTS.json."""
    old = {}
    if RESULTS_JSON.exists():
        with contextlib.suppress(ValueError, KeyError):
            old = {t["key"]: t for t in json.loads(RESULTS_JSON.read_text())["targets"]}
    for res in results:
        if res.error:
            continue
        entry = asdict(res)
        for m_dict, m in zip(entry["measurements"], res.measurements):
            m_dict["summary"] = m.summary()
            m_dict["ratios"] = m.ratios
        for c_dict, c in zip(entry["checks"], res.checks):
            c_dict["met"] = c.met
        entry.update(measured_utc=header["date_utc"], commit=header["repository"]["commit"])
        old[res.key] = entry
    doc = dict(header, targets=[old[k] for k in TARGETS if k in old])
    RESULTS_JSON.write_text(json.dumps(doc, indent=2) + "\n", encoding="utf-8")
    print(f"\nrecorded {RESULTS_JSON.relative_to(ROOT)}")


# --------------------------------------------------------------------------- main
def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="14- and 140-day archives, few pairs (a smoke test)")
    parser.add_argument(
        "--only",
        choices=TARGETS,
        action="append",
        metavar="TARGET",
        help=f"run only this target (repeatable): {', '.join(TARGETS)}",
    )
    parser.add_argument("--pairs", type=int, help="timed pairs per target (default: per target, fewer with --quick)")
    parser.add_argument("--record", action="store_true", help=f"write {RESULTS_JSON.name} next to RESULTS.md")
    parser.add_argument("--markdown", action="store_true", help="print the summary table as Markdown")
    parser.add_argument("--in-process-worker", metavar="SPEC", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.in_process_worker:
        return in_process_worker(args.in_process_worker)
    if args.record and args.quick:
        parser.error("--quick figures are a smoke test and are not recorded; drop --quick to record")
    if args.pairs is not None and args.pairs < 1:
        parser.error("--pairs must be at least 1")

    names = {"base": "14 days" if args.quick else "one year", "long": "140 days" if args.quick else "ten years"}
    header = {
        "schema_version": 1,
        "date_utc": dt.datetime.now(dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ"),
        "quick": args.quick,
        "machine": machine(),
        "versions": versions(),
        "repository": repository(),
        "load_average_start": [round(x, 2) for x in os.getloadavg()],
        "advisor": {
            "whole_process": shell_text(ADVISOR) + " (PYTHONPATH=<repository root>, byte-compiled)",
            "in_process": f"{ADVISOR_ENTRY[0]}.{ADVISOR_ENTRY[1]}(argv)",
        },
    }
    mach, ver = header["machine"], header["versions"]
    print(f"{header['date_utc']}  {mach['cpu']}, {mach['cores']} cores, {mach['memory_gib']} GiB, {mach['system']}")
    print(
        "  "
        + ", ".join(f"{k} {v}" for k, v in ver.items())
        + f"; commit {header['repository']['commit']}"
        + (" (modified)" if header["repository"]["modified"] else "")
        + f"; load average {header['load_average_start'][0]:.2f}"
        + ("; QUICK (smoke test)" if args.quick else "")
    )

    results, failed = [], False
    with tempfile.TemporaryDirectory(prefix="advisor-bench-cache-") as tmp:
        for key in [t for t in TARGETS if t in (args.only or TARGETS)]:
            fn, title = TARGET_INFO[key]
            res = Result(key, title.format(**names))
            cache = Path(tmp) / key
            cache.mkdir()
            pairs = args.pairs or PAIRS[key][1 if args.quick else 0]
            load_before, t0 = os.getloadavg()[0], time.perf_counter()
            try:
                fn(res, pairs, args.quick, cache)
            except CommandFailed as exc:
                res.error, failed = str(exc), True
            res.load_average = (round(load_before, 2), round(os.getloadavg()[0], 2))
            res.elapsed_s = round(time.perf_counter() - t0, 1)
            shutil.rmtree(cache, ignore_errors=True)
            results.append(res)
            print_result(res)
    header["load_average_end"] = [round(x, 2) for x in os.getloadavg()]
    print(f"\nload average at the end {header['load_average_end'][0]:.2f}")
    rows = summary_rows(results, "**missed**" if args.markdown else "MISSED")
    print("\n" + (markdown_table(rows) if args.markdown else plain_table(rows)))
    if args.record:
        record(results, header)
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
