"""The ``advisor`` command line: argument parsing, file loading and output (the imperative shell).

Every :class:`advisor.errors.AdvisorError` becomes one line on stderr and exit status 2
(12 for insufficient data); anything else is an internal error, exit 1.
"""

from __future__ import annotations

import argparse
import json
import os
import re
import sys
from dataclasses import dataclass, replace
from pathlib import Path

import pandas as pd

from advisor import __version__

from advisor.commands import replay as cli_replay
from advisor.decision import EXIT_CODES, explain
from advisor.commands.helpformat import HelpFormatter
from advisor.errors import AdvisorError, FeedError, InsufficientData, UsageError
from advisor.features import CATALOGUE
from advisor.io.feed import CHECK_TAIL_BYTES, Feed, read_feed
from advisor.evaluation.evaluate import evaluate
from advisor.io.references import append_reference, parse_time_utc, read_registry
from advisor.rules.ruleset import RuleSet, RulesRejected, default_rule_files, load_rules
from advisor.io.site import Site, is_demo_file, load_site

EXIT_HELP = """exit status:
  0   scan            take a laser scan now
  10  astronomical    use the astronomical method (holography on a calibrator)
  11  postpone        neither method is worth doing now
  12  undetermined    data missing, stale or implausible (never "scan")
  2   bad input or usage
  1   internal error

Advisory only - not a safety system. Stow at the site's wind limits regardless; follow the
site's laser-safety procedure; defer to the site's responsible staff."""

_FREQ = re.compile(r"^\s*([0-9]*\.?[0-9]+(?:[eE][-+]?\d+)?)\s*([A-Za-zµ]*)\s*$")
_FREQ_UNITS_GHZ = {"": 1.0, "ghz": 1.0, "mhz": 1e-3, "thz": 1e3}
_WAVE_UNITS_MM = {"mm": 1.0, "cm": 10.0, "um": 1e-3, "µm": 1e-3, "m": 1000.0}
FREQ_RANGE_GHZ = (1.0, 1000.0)
FUTURE_TOLERANCE = pd.Timedelta(minutes=5)  # logger clocks may run a little fast


def parse_frequency_ghz(text: str) -> float:
    """``86``, ``86GHz``, ``86 GHz`` or a wavelength like ``3.5mm`` → frequency [GHz]."""
    m = _FREQ.match(str(text))
    if not m:
        raise UsageError(f"cannot read frequency {text!r}", field="--freq",
                         hint="write e.g. 86, 86GHz or a wavelength like 3.5mm")
    value, unit = float(m.group(1)), m.group(2)
    key = unit.lower() if unit != "µm" else unit
    if key in _FREQ_UNITS_GHZ:
        ghz = value * _FREQ_UNITS_GHZ[key]
    elif key in _WAVE_UNITS_MM:
        mm = value * _WAVE_UNITS_MM[key]
        if mm <= 0:
            raise UsageError(f"wavelength {text!r} must be positive", field="--freq")
        ghz = 299_792_458.0 / (mm * 1e-3) / 1e9
    else:
        raise UsageError(f"unknown unit {unit!r} in frequency {text!r}", field="--freq",
                         hint="use GHz, MHz, THz, or a wavelength in mm/cm")
    lo, hi = FREQ_RANGE_GHZ
    if not lo <= ghz <= hi:
        raise UsageError(f"frequency {ghz:g} GHz is outside {lo:g}..{hi:g} GHz", field="--freq",
                         hint="give the observing frequency, e.g. 86")
    return ghz


def parse_at(text: str | None) -> pd.Timestamp | None:
    """``--at``: ISO 8601 with offset or Z, or ``now``; ``None`` stays None."""
    if text is None:
        return None
    if text.strip().lower() == "now":
        return pd.Timestamp.now(tz="UTC")
    try:
        return parse_time_utc(text)
    except ValueError as exc:
        raise UsageError(f"cannot read time {text!r}", field="--at",
                         hint="write ISO 8601 with Z or an offset, e.g. 2026-01-15T09:00:00Z") from None
    except Exception:  # pandas raises several types for garbage
        raise UsageError(f"cannot read time {text!r}", field="--at",
                         hint="write ISO 8601 with Z or an offset, e.g. 2026-01-15T09:00:00Z") from None


@dataclass(frozen=True)
class Inputs:
    """Everything loaded for one evaluation."""

    site: Site
    feed: Feed | None             # None when loaded with read_feed=False (see feed_path)
    rules: RuleSet
    registry_path: Path | None
    freq_ghz: float
    is_demo: bool                 # the demo site, feed or registry is in use (however named): show the banner
    notes: tuple[str, ...]
    model: object = None          # advisor.model.inference.SiteModel, or None: rules and error budget only
    feed_path: Path | None = None
    feed_layout: object = None    # advisor.io.site.FeedLayout used to read feed_path
    demo_feed: bool = False       # the feed is the bundled demo feed: evaluate at its last sample by default

    @property
    def odds(self):
        """The site model's odds function for :func:`advisor.evaluation.evaluate.evaluate`, or None (rules only)."""
        return self.model.odds if self.model is not None else None


def load_ruleset(site: Site, extra: list[str] | None) -> RuleSet:
    files = [(p, "default") for p in default_rule_files()]
    files += [(p, "site") for p in site.rule_paths]
    files += [(Path(p), "command line") for p in (extra or [])]
    return load_rules(files, CATALOGUE)


def load_inputs(args: argparse.Namespace, tail_bytes: int | None = None, read: bool = True) -> Inputs:
    """Site, feed, rules and registry for check-like commands (``read=False``: the feed is only located)."""
    freq = parse_frequency_ghz(args.freq)
    site = load_site(args.site)
    notes = []
    if args.feed is not None:
        feed_path = Path(args.feed)
        if args.site is None:
            notes.append("No --site given: using the demo site's location and figures.")
    elif site.feed.path is not None:
        feed_path = site.feed.path
    else:
        raise UsageError("no feed given and the site file names none", field="--feed",
                         hint="pass --feed FILE or set feed.path in the site file")
    registry_path = Path(args.references) if args.references else site.references_path
    demo_feed = is_demo_file(feed_path)
    is_demo = site.is_demo or demo_feed or is_demo_file(registry_path)
    layout = site.feed
    if site.is_demo and not demo_feed:
        # The demo logger's local time zone must not be guessed onto someone else's feed.
        layout = replace(layout, time_zone=None)
    feed = read_feed(feed_path, layout, tail_bytes=tail_bytes,
                     issue_time_column=site.forecast.issue_time_column) if read else None
    rules = load_ruleset(site, args.rules)
    from advisor.commands.model import model_for_check
    model = model_for_check(getattr(args, "model", None), site, notes,
                            demo_model_on_other_feed=site.is_demo and not demo_feed)
    return Inputs(site, feed, rules, registry_path, freq, is_demo, tuple(notes), model, feed_path, layout, demo_feed)


def _evaluation_time(args, inputs: Inputs) -> pd.Timestamp:
    at = parse_at(args.at)
    if at is not None:
        return at
    if inputs.demo_feed:
        observed = inputs.feed.frame[inputs.feed.frame["kind"] == "observed"]
        return observed["time"].iloc[-1]
    now = pd.Timestamp.now(tz="UTC")
    frame = inputs.feed.frame
    observed = frame["time"][frame["kind"] == "observed"]
    if len(observed) and observed.iloc[-1] > now + FUTURE_TOLERANCE:
        raise FeedError(f"observed rows run until {observed.iloc[-1]:%Y-%m-%dT%H:%M}Z, after the current time",
                        source=inputs.feed.source,
                        hint="check the logger clock and time zone, or pass --at for a past instant")
    return now


def _want_color(stream) -> bool:
    return stream.isatty() and "NO_COLOR" not in os.environ


@dataclass(frozen=True)
class CheckResult:
    """One evaluated instant: the call, its rendering context and exit status."""

    call: object
    ctx: object
    status: int
    inputs: Inputs


def run_check(args: argparse.Namespace) -> CheckResult:
    """Load inputs, evaluate at ``--at`` and explain; shared by ``check`` and other commands."""
    from advisor.views.context import Context

    inputs = load_inputs(args, tail_bytes=CHECK_TAIL_BYTES)
    at = _evaluation_time(args, inputs)
    frame = inputs.feed.frame
    observed = frame[(frame["kind"] == "observed") & (frame["time"] <= at)]
    registry = read_registry(inputs.registry_path)
    decisions = evaluate(observed, pd.DatetimeIndex([at]), inputs.site, registry, inputs.rules, inputs.freq_ghz,
                         inputs.odds)
    call = explain(decisions, 0)
    status = EXIT_CODES[call.verdict]
    quality = inputs.feed.quality.as_dict()
    age = call.features.get("data_age_min")
    quality.update({"source": inputs.feed.source,
                    "data_age_min": None if age is None or age != age else round(float(age), 2),
                    "ok": bool(call.features.get("data_ok"))})
    next_window = None
    notes = inputs.notes
    if int((frame["time"] > at).sum()) >= 2:  # the feed carries future rows: when can each method next be done
        from advisor.commands.outlook import next_window_for_check
        next_window = next_window_for_check(inputs, at, registry)
        if next_window and ((frame["kind"] == "observed") & (frame["time"] > at)).any():
            notes = (*notes, "Next window found in observations after the evaluation time (hindsight).")
    ctx = Context(site_name=inputs.site.name, time_zone=inputs.site.time_zone, feed_source=inputs.feed.source,
                  is_demo=inputs.is_demo, data_quality=quality, next_window=next_window, notes=notes)
    return CheckResult(call, ctx, status, inputs)


def cmd_check(args: argparse.Namespace) -> int:
    from advisor.views.jsondoc import to_json_dict
    from advisor.views.panel import render_panel
    from advisor.views.plain import render_plain

    result = run_check(args)
    details = getattr(args, "details", False)
    if args.json:
        print(json.dumps(to_json_dict(result.call, result.ctx, result.status), indent=2, allow_nan=False))
    elif _want_color(sys.stdout):
        from rich.console import Console

        console = Console()
        console.print(render_panel(result.call, result.ctx, console.width, console.height, details, result.status))
    else:
        sys.stdout.write(render_plain(result.call, result.ctx, details=details, status=result.status))
    return result.status


def _registry_path(args) -> Path:
    if args.references:
        return Path(args.references)
    if args.site:
        site = load_site(args.site)
        if site.references_path is None:
            raise UsageError("the site file names no reference registry", field="references.path",
                             hint="add references: {path: refs.csv} to the site file, or pass --references FILE")
        return site.references_path
    raise UsageError("no registry given", field="--references",
                     hint="pass --references FILE or --site SITE.yaml (the bundled demo registry is read-only)")


def cmd_reference_add(args) -> int:
    path = _registry_path(args)
    try:
        time = parse_at(args.time)
    except UsageError as exc:
        raise UsageError(exc.message, field="--time", hint=exc.hint) from None
    try:
        temp = float(args.air_temp_c)
    except ValueError:
        raise UsageError(f"air temperature {args.air_temp_c!r} is not a number", field="--air-temp-c",
                         hint="give °C, e.g. 3.5") from None
    if temp != temp:
        raise UsageError("air temperature is NaN", field="--air-temp-c")
    registry = append_reference(path, time, temp, args.note or "")
    print(f"added reference scan at {time:%Y-%m-%dT%H:%M:%SZ} ({temp:.1f} °C) to {path}; {len(registry)} in registry")
    return 0


def cmd_reference_list(args) -> int:
    if args.references or args.site:
        path = _registry_path(args)
    else:
        path = load_site(None).references_path
    registry = read_registry(path)
    now = parse_at(args.at) or pd.Timestamp.now(tz="UTC")
    print(f"reference scans in {path} (ages at {now:%Y-%m-%d %H:%M} UTC):")
    if len(registry) == 0:
        print("  (none)")
        return 0
    print(f"  {'time (UTC)':<20}  {'age':>8}  {'air °C':>6}  note")
    for t, temp, note in zip(registry.times_utc, registry.air_temp_c, registry.notes):
        age_h = (now - t).total_seconds() / 3600.0
        age = f"{age_h:.1f} h" if age_h >= 0 else "future"
        print(f"  {t:%Y-%m-%dT%H:%M:%SZ}  {age:>8}  {temp:>6.1f}  {note}")
    return 0


def _add_evaluation_options(p: argparse.ArgumentParser, with_at: bool = True) -> None:
    p.add_argument("--feed", metavar="FEED", help="weather feed, CSV or JSON Lines (default: the site's feed)")
    p.add_argument("--site", metavar="SITE.yaml", help="site file (default: the bundled invented demo site)")
    p.add_argument("--freq", default="86", metavar="FREQ",
                   help="target frequency: 86, 86GHz, or a wavelength like 3.5mm (default 86 GHz)")
    if with_at:
        p.add_argument("--at", metavar="TIME", help="evaluation time, ISO 8601 with Z or offset (default: now; "
                       "the last sample for the demo feed)")
    p.add_argument("--references", metavar="REFS.csv", help="reference-scan registry (default: the site's)")
    p.add_argument("--rules", metavar="FILE.yaml", nargs="+", action="extend",
                   help="extra rule files layered over the defaults and the site's")
    p.add_argument("--model", metavar="MODEL.json", help="site model giving p_usable (default: the site's "
                   "model.path; 'none' for rules only)")


class _Parser(argparse.ArgumentParser):
    """argparse with one-line errors in the advisor's own format (exit 2)."""

    def error(self, message: str):  # noqa: D401 - argparse API
        self.exit(2, f"advisor: error: {self.prog}: {message} (see '{self.prog} --help')\n")


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(
        prog="advisor",
        description="Before a high-frequency session: scan the reflector now, use the astronomical "
                    "method, or postpone - with reasons and numbers.",
        epilog=EXIT_HELP, formatter_class=HelpFormatter)
    parser.add_argument("--version", action="version", version=f"advisor {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    check = sub.add_parser("check", help="the call for one instant (default: now)",
                           description="Evaluate the feed at one instant and print the call.",
                           epilog=EXIT_HELP, formatter_class=HelpFormatter)
    _add_evaluation_options(check)
    check.add_argument("--json", action="store_true", help="print one JSON object (stable schema, see README)")
    check.add_argument("--details", action="store_true",
                       help="every reason in full with its rule id, every key condition (default: a compact screen "
                            "that fits 80x24)")
    check.set_defaults(func=cmd_check)

    ref = sub.add_parser("reference", help="the reference-scan registry",
                         description="Record and list reference scans (taken right after an astronomical correction).")
    ref_sub = ref.add_subparsers(dest="action", metavar="ACTION", parser_class=_Parser)
    add = ref_sub.add_parser("add", help="record a reference scan")
    add.add_argument("--time", required=True, metavar="TIME", help="when it was taken: ISO 8601 with Z/offset, or 'now'")
    add.add_argument("--air-temp-c", required=True, metavar="DEGC", help="air temperature at the scan [°C]")
    add.add_argument("--note", help="free text, e.g. 'after holography on 3C 84'")
    add.add_argument("--site", metavar="SITE.yaml", help="use the site's registry")
    add.add_argument("--references", metavar="REFS.csv", help="registry file (created if absent)")
    add.set_defaults(func=cmd_reference_add)
    lst = ref_sub.add_parser("list", help="show the registry with ages")
    lst.add_argument("--site", metavar="SITE.yaml")
    lst.add_argument("--references", metavar="REFS.csv")
    lst.add_argument("--at", metavar="TIME", help="compute ages at this time (default now)")
    lst.set_defaults(func=cmd_reference_list)
    ref.set_defaults(func=lambda a: _missing_action(ref))

    # Further commands register here, one line each: module.add_parser(sub, _add_evaluation_options)
    from advisor.commands import rules as cli_rules; cli_rules.add_parser(sub, _add_evaluation_options)  # noqa: E702 (one line)
    cli_replay.add_parser(sub, _add_evaluation_options)
    from advisor.commands import tick as cli_tick; cli_tick.add_parser(sub, _add_evaluation_options)  # noqa: E702 (one line)
    from advisor.commands import model as cli_model; cli_model.add_parser(sub, _add_evaluation_options)  # noqa: E702 (one line)
    from advisor.commands import outlook as cli_outlook; cli_outlook.add_parser(sub, _add_evaluation_options)  # noqa: E702 (one line)
    from advisor.commands import demo as cli_demo; cli_demo.add_parser(sub, _add_evaluation_options)  # noqa: E702 (one line)
    return parser


def _missing_action(parser: argparse.ArgumentParser) -> int:
    parser.print_usage(sys.stderr)
    print(f"{parser.prog}: error: choose an action (see --help)", file=sys.stderr)
    return 2


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return 2
    try:
        return args.func(args)
    except RulesRejected as exc:   # every lint error, one line each
        for line in exc.lines():
            print(f"advisor: error: {line}", file=sys.stderr)
        return 2
    except InsufficientData as exc:
        print(f"advisor: {exc.one_line()}", file=sys.stderr)
        return 12
    except AdvisorError as exc:
        print(f"advisor: error: {exc.one_line()}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("advisor: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 0
    except Exception as exc:  # pragma: no cover - the last line of defence
        if os.environ.get("ADVISOR_DEBUG"):
            raise
        print(f"advisor: internal error: {type(exc).__name__}: {exc} (set ADVISOR_DEBUG=1 for a traceback)",
              file=sys.stderr)
        return 1


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
