"""The options every command shares, parsed one way: frequency, times, elevation, hours, the site;
and the terminal: colour, and writing a command's output without letting stdout change its status.

Beneath the commands (like :mod:`advisor.commands.session`, which re-exports these names).
"""

from __future__ import annotations

import argparse
import contextlib
import datetime as dt
import os
import re
import sys
from dataclasses import dataclass
from pathlib import Path
from zoneinfo import ZoneInfo

import pandas as pd

from advisor.errors import UsageError
from advisor.io.times import parse_time_arg

# --------------------------------------------------------------------------- option parsers

DEFAULT_FREQ_GHZ = 86.0
FREQ_RANGE_GHZ = (1.0, 1000.0)
FUTURE_TOLERANCE = pd.Timedelta(minutes=5)  # logger clocks may run a little fast
NO_MODEL = ("none", "off")
#: Words a time option accepts besides ISO 8601: ``now``, and the start of a day counted back.
DAY_WORDS = {"today": 0, "yesterday": 1}
TIME_FORMS = "ISO 8601 with Z or an offset, 'now', or 'today'/'yesterday' (00:00 site time)"

_FREQ = re.compile(r"^\s*([0-9]*\.?[0-9]+(?:[eE][-+]?\d+)?)\s*([A-Za-zµ]*)\s*$")
_FREQ_UNITS_GHZ = {"": 1.0, "ghz": 1.0, "mhz": 1e-3, "thz": 1e3}
_WAVE_UNITS_MM = {"mm": 1.0, "cm": 10.0, "um": 1e-3, "µm": 1e-3, "m": 1000.0}


ELEVATION_RANGE_DEG = (5.0, 90.0)


def parse_elevation_deg(text: str, field: str = "--elevation") -> float:
    """``45``, ``45deg`` or ``45°`` → the session's elevation [deg], within 5..90."""
    m = re.match(r"^\s*([0-9]*\.?[0-9]+)\s*(deg|°)?\s*$", str(text))
    if not m:
        raise UsageError(f"cannot read elevation {text!r}", field=field, hint="write degrees, e.g. 45 or 45deg")
    value = float(m.group(1))
    lo, hi = ELEVATION_RANGE_DEG
    if not lo <= value <= hi:
        raise UsageError(
            f"elevation {value:g} deg is outside {lo:g}..{hi:g} deg",
            field=field,
            hint="give the elevation the session observes at, e.g. 45",
        )
    return value


def parse_frequency_ghz(text: str, field: str = "--freq") -> float:
    """``86``, ``86GHz``, ``86 GHz`` or a wavelength like ``3.5mm`` → frequency [GHz]."""
    m = _FREQ.match(str(text))
    if not m:
        raise UsageError(
            f"cannot read frequency {text!r}", field=field, hint="write e.g. 86, 86GHz or a wavelength like 3.5mm"
        )
    value, unit = float(m.group(1)), m.group(2)
    key = unit.lower() if unit != "µm" else unit
    if key in _FREQ_UNITS_GHZ:
        ghz = value * _FREQ_UNITS_GHZ[key]
    elif key in _WAVE_UNITS_MM:
        mm = value * _WAVE_UNITS_MM[key]
        if mm <= 0:
            raise UsageError(f"wavelength {text!r} must be positive", field=field)
        ghz = 299_792_458.0 / (mm * 1e-3) / 1e9
    else:
        raise UsageError(
            f"unknown unit {unit!r} in frequency {text!r}",
            field=field,
            hint="use GHz, MHz, THz, or a wavelength in mm/cm",
        )
    lo, hi = FREQ_RANGE_GHZ
    if not lo <= ghz <= hi:
        raise UsageError(
            f"frequency {ghz:g} GHz is outside {lo:g}..{hi:g} GHz",
            field=field,
            hint="give the observing frequency, e.g. 86",
        )
    return ghz


@dataclass(frozen=True)
class TimeOption:
    """A time given on the command line: an instant, or the start of a day counted back from today.

    ``today`` and ``yesterday`` mean 00:00 in the site's time zone, so they are resolved once the
    site is known (:meth:`resolve`); every other form is an instant already.
    """

    field: str  # the option it came from, e.g. "--from"
    text: str
    instant_utc: pd.Timestamp | None = None
    days_back: int | None = None  # 0 today, 1 yesterday

    def resolve(self, time_zone: str | None, now_utc: pd.Timestamp | None = None) -> pd.Timestamp:
        """The UTC instant; day words are midnight in ``time_zone`` (UTC when None)."""
        if self.instant_utc is not None:
            return self.instant_utc
        zone = ZoneInfo(time_zone or "UTC")
        now = (now_utc if now_utc is not None else pd.Timestamp.now(tz="UTC")).tz_convert(zone)
        day = now.date() - dt.timedelta(days=self.days_back or 0)
        return pd.Timestamp(dt.datetime.combine(day, dt.time(0), tzinfo=zone)).tz_convert("UTC")


_WORDS_HINT = "; or now, today, yesterday"
_CUT_SHORT = "the line may have been cut short while it was written; "  # said for a file's line
_EPOCH = re.compile(r"[+-]?\d+(?:\.\d*)?")


def parse_time(text: str | None, field: str) -> TimeOption | None:
    """A time option (``--at``, ``--from``, ``--to``, ``--time``); ``None`` stays None.

    Accepts ISO 8601 with ``Z`` or an offset (read strictly by
    :func:`advisor.io.times.parse_time_arg`: range-checked, ``+00`` and lower-case ``t``/``z``
    allowed), ``now``, ``today`` or ``yesterday``; anything else is a :class:`UsageError` naming
    ``field`` and saying what is wrong (a bare number names the epoch unit it looks like).
    """
    if text is None:
        return None
    word = str(text).strip().lower()
    if word in DAY_WORDS:
        return TimeOption(field, text, days_back=DAY_WORDS[word])
    if _EPOCH.fullmatch(word):
        what, hint = _epoch_message(word)
        raise UsageError(what, field=field, hint=hint)
    try:
        return TimeOption(field, text, instant_utc=parse_time_arg(text, field))
    except UsageError as exc:  # an option was typed, not cut short while being written
        hint = (exc.hint or "").replace(_CUT_SHORT, "")
        if "ISO 8601" in hint:
            hint += _WORDS_HINT
        exc.hint = hint or None
        raise


def _epoch_message(text: str) -> tuple[str, str]:
    """``(what, hint)`` for a bare number given as a time: name the epoch unit it looks like, if any."""
    from advisor.io.times import TIME_RANGE_UTC

    digits = len(text.lstrip("+-").split(".")[0])
    value = float(text) if digits < 40 else float("inf")
    lo, hi = (t.value / 1e9 for t in TIME_RANGE_UTC)
    for unit, seconds, width in (("seconds", value, (9, 10)), ("milliseconds", value / 1e3, (12, 13))):
        if width[0] <= digits <= width[1] and lo <= seconds < hi:
            iso = pd.Timestamp(seconds, unit="s", tz="UTC").strftime("%Y-%m-%dT%H:%M:%SZ")
            return (
                f"{text!r} is a number, not a time (as epoch {unit} it would be {iso})",
                f"write the time in ISO 8601, e.g. {iso}",
            )
    return f"{text!r} is a number, not a time", "write ISO 8601 with Z or an offset, e.g. 2026-01-15T09:00:00Z"


def time_help(what: str) -> str:
    """The help text of a time option: what it is, then the forms it accepts."""
    return f"{what}: {TIME_FORMS}"


def add_evaluation_options(p: argparse.ArgumentParser, with_at: bool = True) -> None:
    """The options every evaluating command shares (``check`` and those that say "options as for check")."""
    p.add_argument("--feed", metavar="FEED", help="weather feed, CSV or JSON Lines (default: the site's feed)")
    p.add_argument("--site", metavar="SITE.yaml", help=SITE_HELP)
    p.add_argument(
        "--freq",
        default="86",
        metavar="FREQ",
        help="target frequency: 86, 86GHz, or a wavelength like 3.5mm (default 86 GHz)",
    )
    if with_at:
        p.add_argument(
            "--at", metavar="TIME", help=time_help("evaluation time (default: now; the last sample for the demo feed)")
        )
    p.add_argument(
        "--elevation",
        metavar="DEG",
        help="elevation the session observes at, 5..90 deg (default: the "
        "site's session.elevation_deg, 45 if it gives none): where the laser corrects the surface, the "
        "calibrator is preferred near it, and the atmosphere's transmission is taken",
    )
    p.add_argument("--references", metavar="REFS.csv", help="reference-scan registry (default: the site's)")
    p.add_argument(
        "--rules",
        metavar="FILE.yaml",
        nargs="+",
        action="extend",
        help="extra rule files layered over the defaults and the site's",
    )
    p.add_argument(
        "--model",
        metavar="MODEL.json",
        help="site model giving p_usable (default: the site's model.path; 'none' for rules only)",
    )


def add_session_option(p: argparse.ArgumentParser) -> None:
    """``--session-hours``: the session the choice between methods is made for."""
    p.add_argument(
        "--session-hours",
        metavar="H",
        help="length of the session the correction is for [h]: "
        "holography's extra minutes must pay back within it (default: the site's "
        "thresholds.session_hours; 0: no session length, the fixed efficiency margin decides)",
    )


def parse_hours(text: str | None, field: str, lo: float, hi: float) -> float | None:
    """A number of hours from the command line (None stays None); errors name the option."""
    if text is None:
        return None
    try:
        value = float(text)
    except ValueError:
        raise UsageError(
            f"{text!r} is not a number", field=field, hint=f"give hours between {lo:g} and {hi:g}"
        ) from None
    if not (lo <= value <= hi):
        raise UsageError(f"{value:g} is outside {lo:g}..{hi:g}", field=field, hint="give the length in hours")
    return value


def missing_action(parser: argparse.ArgumentParser) -> int:
    """A command with actions called without one: usage and one line on stderr, exit 2."""
    parser.print_usage(sys.stderr)
    print(f"{parser.prog}: error: choose an action (see --help)", file=sys.stderr)
    return 2


def want_color(stream) -> bool:
    """Colour only on a terminal, and never with ``NO_COLOR`` set."""
    try:
        return stream.isatty() and "NO_COLOR" not in os.environ
    except (ValueError, OSError, AttributeError):  # a closed stdout (None when the shell closed it)
        return False


def emit(write) -> bool:
    """Run ``write()`` (which prints the command's output); False when stdout could not take it.

    A closed pipe (``check ... | true``), a closed or full stdout never changes a command's exit
    status: the call's status is what scripts rely on.  A closed pipe is silent; any other
    failure to write says so on stderr.  Stdout is then pointed at the null device so that
    Python's final flush cannot fail again.
    """
    import sys

    if sys.stdout is None:  # started with stdout closed: nothing can be written
        return False
    try:
        write()
        sys.stdout.flush()
        return True
    except BrokenPipeError:
        pass
    except (OSError, ValueError) as exc:
        with contextlib.suppress(OSError, ValueError):
            print(
                f"advisor: warning: could not write to stdout ({exc}); the exit status still gives the call",
                file=sys.stderr,
            )
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError):
        pass
    return False


# --------------------------------------------------------------------------- the request


SITE_ENV = "ADVISOR_SITE"
SITE_HELP = "site file (default: $ADVISOR_SITE, else ~/.config/advisor/site.yaml, else the bundled invented demo site)"


def config_site_path() -> Path:
    """Where the operator's site file is looked for when neither --site nor $ADVISOR_SITE is given."""
    base = os.environ.get("XDG_CONFIG_HOME") or str(Path.home() / ".config")
    return Path(base) / "advisor" / "site.yaml"


def site_location(option: str | None) -> tuple[Path | None, str]:
    """The site file to use and where that choice came from: ``--site``, ``$ADVISOR_SITE``, the
    configuration folder's ``site.yaml``, or ``(None, "demo")`` for the bundled demo site."""
    if option:
        return Path(option), "--site"
    named = os.environ.get(SITE_ENV, "").strip()
    if named:
        path = Path(named).expanduser()
        if not path.exists():
            raise UsageError(
                f"{SITE_ENV} names {named}, which does not exist",
                field=SITE_ENV,
                hint="point it at your site file, or unset it to use the configuration folder or the demo",
            )
        return path, SITE_ENV
    config = config_site_path()
    if config.exists():
        return config, str(config)
    return None, "demo"


def svg_target(text: str | None, example: str) -> Path | None:
    """``--svg FILE``: the file to write (None when not asked), refused when it cannot be a file."""
    if text is None:
        return None
    path = Path(text).expanduser()
    if path.is_dir():
        raise UsageError(f"{path} is a directory", field="--svg", hint=f"give a file name, e.g. {example}")
    if not path.parent.is_dir():
        raise UsageError(f"folder {path.parent} does not exist", field="--svg", hint="create it or choose another path")
    return path


def text_width(default: int = 80) -> int:
    """Columns for plain text: ``$COLUMNS`` when set, else the terminal of stdout, else that of
    stderr (output piped into ``head`` or ``less`` still fits the terminal it is read on), else
    ``default``."""
    with contextlib.suppress(ValueError):
        columns = int(os.environ.get("COLUMNS", ""))
        if columns > 0:
            return columns
    for stream in (sys.stdout, sys.stderr):
        with contextlib.suppress(AttributeError, ValueError, OSError):
            return os.get_terminal_size(stream.fileno()).columns
    return default
