"""How the advisor writes numbers, durations, times, frequencies and wavelengths: one place.

    sig(85.655)                      '85.7'          three significant figures
    fixed(-0.04, 1)                  '0.0'           never '-0.0'
    freq_text(85.65499)              '85.7 GHz'      typed values stay: '86 GHz', '230.538 GHz'
    wavelength_text(3.5)             '3.50 mm'
    freq_wave_text(85.655)           '85.7 GHz (3.50 mm)'
    duration_text(1022)              '17 h 2 min'    minutes past an hour become 'h min'
    duration_text(45)                '45 min'        two days and more: '3 d 4 h'
    plural(1, "attempt")             '1 attempt'     plural(3, "step") → '3 steps'
    percent(0.954)                   '95%'           odds_text(0.004) → '<1%'
    local_utc(ts, "America/Denver")  '30 Nov 20:00 MST (1 Dec 03:00 UTC)'
    span_text(a, b, tz)              '1 Dec 10:00 → 11:50 MST (17:00 → 18:50 UTC)'
    utc_iso(ts)                      '2026-12-01T03:00:00Z'
    wrap(text, 60, "  ")             lines folded at spaces, never between a number and its unit

Every view uses these, so a number reads the same on the terminal, in piped text, in the
control-room page and in the outlook.  Pure string work: no clock, no files.
"""

from __future__ import annotations

import math
import re
import textwrap
from zoneinfo import ZoneInfo

import pandas as pd

__all__ = [
    "sig",
    "fixed",
    "freq_text",
    "wavelength_text",
    "freq_wave_text",
    "duration_text",
    "hours_text",
    "plural",
    "percent",
    "odds_text",
    "local_utc",
    "span_text",
    "utc_iso",
    "tz_abbrev",
    "NBSP",
    "C_LIGHT_M_S",
    "keep_units",
    "wrap",
    "no_minus_zero",
    "same_local_day",
]

#: A non-breaking space: keeps a number and its unit on one line in wrapped text and HTML.
NBSP = "\u00a0"
#: Speed of light [m/s] (exact, SI definition).
C_LIGHT_M_S = 299_792_458.0


def _finite(value) -> bool:
    try:
        return value is not None and math.isfinite(float(value))
    except (TypeError, ValueError):
        return False


def _unsigned_zero(text: str) -> str:
    """``-0.0`` → ``0.0``: a value that rounds to zero carries no sign."""
    if text.startswith("-") and text[1:].replace(".", "").replace("0", "") == "":
        return text[1:]
    return text


_MINUS_ZERO = re.compile(r"(?<![\d.])-(0(?:\.0+)?)(?![\d.])")


def no_minus_zero(text: str) -> str:
    """Every ``-0``/``-0.0`` in ``text`` without its sign (``spread ≥ -0.0 °C`` → ``spread ≥ 0.0 °C``)."""
    return _MINUS_ZERO.sub(r"\1", text)


def fixed(value, decimals: int = 1, missing: str = "n/a") -> str:
    """``value`` with ``decimals`` decimals, never ``-0.0``; ``missing`` when not a finite number."""
    if not _finite(value):
        return missing
    return _unsigned_zero(f"{float(value):.{decimals}f}")


def sig(value, figures: int = 3, missing: str = "n/a") -> str:
    """``value`` to ``figures`` significant figures, trailing zeros kept (``3.50``), never in
    exponent form for everyday magnitudes and never ``-0.0``."""
    if not _finite(value):
        return missing
    value = float(value)
    if value == 0:
        return "0"
    exponent = math.floor(math.log10(abs(value)))
    decimals = max(0, figures - 1 - exponent)
    text = f"{value:.{decimals}f}"
    if decimals == 0 and exponent >= figures:  # 12345 → 12300, not 12345
        text = f"{round(value, figures - 1 - exponent):.0f}"
    return _unsigned_zero(text)


def freq_text(freq_ghz, missing: str = "n/a") -> str:
    """A frequency [GHz]: as given when it has at most three decimals (``86 GHz``, ``230.538 GHz``),
    else to three significant figures (``85.7 GHz``)."""
    if not _finite(freq_ghz):
        return missing
    value = float(freq_ghz)
    short = round(value, 3)
    # a frequency someone typed (86, 230.538) reads back as typed; one derived from a
    # wavelength (3.5 mm → 85.654988...) gets three significant figures
    text = f"{short:g}" if abs(value - short) < 1e-9 and short != 0 else sig(value)
    return f"{text} GHz"


def wavelength_text(wavelength_mm, missing: str = "n/a") -> str:
    """A wavelength [mm] to three significant figures: ``3.50 mm``."""
    if not _finite(wavelength_mm):
        return missing
    return f"{sig(wavelength_mm)} mm"


def freq_wave_text(freq_ghz) -> str:
    """``85.7 GHz (3.50 mm)``: the frequency and the wavelength it means."""
    if not _finite(freq_ghz) or float(freq_ghz) <= 0:
        return freq_text(freq_ghz)
    mm = C_LIGHT_M_S / (float(freq_ghz) * 1e9) * 1e3
    return f"{freq_text(freq_ghz)} ({wavelength_text(mm)})"


def duration_text(minutes, missing: str = "n/a") -> str:
    """A duration [min] as people say it: ``45 min``, ``1 h``, ``17 h 2 min``, ``3 d 4 h``.

    Under a minute (but more than nothing) is ``<1 min``; from 48 h on, days and hours.
    """
    if not _finite(minutes):
        return missing
    value = float(minutes)
    sign = "-" if value < 0 else ""
    value = abs(value)
    if 0 < value < 0.5:
        return f"{sign}<1 min"
    total = int(round(value))
    if total < 60:
        return f"{sign}{total} min"
    if total < 48 * 60:
        h, m = divmod(total, 60)
        return f"{sign}{h} h" + (f" {m} min" if m else "")
    d, rest = divmod(int(round(value / 60)), 24)
    return f"{sign}{d} d" + (f" {rest} h" if rest else "")


def hours_text(hours, missing: str = "n/a") -> str:
    """A duration given in hours: ``hours_text(1.5)`` → ``1 h 30 min``."""
    return duration_text(float(hours) * 60.0, missing) if _finite(hours) else missing


def hours_total(hours, missing: str = "n/a") -> str:
    """A total of hours, as a replay sums them: ``4211 h``, ``7.5 h``, ``0.2 h``, ``<0.1 h``."""
    if not _finite(hours):
        return missing
    value = float(hours)
    if 0 < value < 0.05:
        return "<0.1 h"
    return f"{value:.0f} h" if value >= 10 else no_minus_zero(f"{value:.1f} h")


def plural(count, word: str, many: str | None = None) -> str:
    """``1 attempt``, ``2 attempts`` (``many`` for irregular plurals)."""
    n = int(count)
    return f"{n} {word if n == 1 else (many or word + 's')}"


def percent(fraction, missing: str = "n/a") -> str:
    """A fraction as a whole percentage: ``0.954`` → ``95%``."""
    return missing if not _finite(fraction) else f"{float(fraction):.0%}"


def odds_text(p, missing: str = "n/a") -> str:
    """A probability as a percentage that never rounds to a misleading ``0%`` or ``100%``."""
    if not _finite(p):
        return missing
    if p < 0.01:
        return "<1%"
    if p > 0.99:
        return ">99%"
    return f"{float(p):.0%}"


def tz_abbrev(ts: pd.Timestamp, tz: str) -> str:
    """The time zone's abbreviation at ``ts`` (``MST``)."""
    return ts.tz_convert(ZoneInfo(tz)).strftime("%Z")


def _day_time(ts: pd.Timestamp) -> str:
    return f"{ts.day} {ts:%b %H:%M}"


def local_utc(ts: pd.Timestamp, tz: str, with_date: bool = True, year: bool = False) -> str:
    """``30 Nov 20:00 MST (1 Dec 03:00 UTC)``: local time first, UTC beside it.

    The UTC date is shown only when it differs from the local one; ``with_date=False`` drops
    the local date too (``20:00 MST (03:00 UTC)``); ``year`` adds the local year.
    """
    ts = pd.Timestamp(ts)
    local = ts.tz_convert(ZoneInfo(tz))
    utc = ts.tz_convert("UTC")
    if with_date:
        head = _day_time(local) if not year else f"{local.day} {local:%b %Y %H:%M}"
    else:
        head = f"{local:%H:%M}"
    utc_part = _day_time(utc) if with_date and utc.date() != local.date() else f"{utc:%H:%M}"
    return f"{head} {local:%Z} ({utc_part} UTC)"


def same_local_day(a: pd.Timestamp, b: pd.Timestamp, tz: str) -> bool:
    """Whether ``a`` and ``b`` fall on the same calendar day in ``tz``."""
    zone = ZoneInfo(tz)
    return pd.Timestamp(a).tz_convert(zone).date() == pd.Timestamp(b).tz_convert(zone).date()


def span_text(start: pd.Timestamp, end: pd.Timestamp, tz: str) -> str:
    """A period in local time with UTC beside: ``1 Dec 10:00 → 11:50 MST (17:00 → 18:50 UTC)``,
    ``30 Nov 20:00 → 1 Dec 00:20 MST (03:00 → 07:20 UTC)``; dates only where they change."""
    start, end = pd.Timestamp(start), pd.Timestamp(end)
    zone = ZoneInfo(tz)
    ls, le = start.tz_convert(zone), end.tz_convert(zone)
    us, ue = start.tz_convert("UTC"), end.tz_convert("UTC")
    local_end = f"{le:%H:%M}" if le.date() == ls.date() else _day_time(le)
    utc_start = f"{us:%H:%M}" if us.date() == ls.date() else _day_time(us)
    utc_end = f"{ue:%H:%M}" if ue.date() == us.date() else _day_time(ue)
    return f"{_day_time(ls)} → {local_end} {le:%Z} ({utc_start} → {utc_end} UTC)"


def utc_iso(ts: pd.Timestamp) -> str:
    """``2026-12-01T03:00:00Z``."""
    return pd.Timestamp(ts).tz_convert("UTC").strftime("%Y-%m-%dT%H:%M:%SZ")


_UNIT_AFTER_NUMBER = re.compile(
    r"(?<=\d) (?=(?:µm|m/s|°C/h|°C|GHz|MHz|mm/h|mm|cm|min|h|d|km|m|%|hPa|W/m²|arcsec|s|UTC|[A-Z]{3,4})(?=[\s,;:.)\]]|$))"
)


_EQUALS_NUMBER = re.compile(r"(?<=\S) = (?=[-+]?\d)|(?<=[ησλΔ]) (?=[-+]?\d)")
_DURATION_PARTS = re.compile(r"(?<=\d[\u00a0 ][dh]) (?=\d+[\u00a0 ](?:h|min)\b)")


def keep_units(text: str) -> str:
    """``text`` with a non-breaking space between each number and its unit (``199\u00a0µm``),
    within durations (``4 h 15 min``), around ``=`` before a number (``λ/16 = 218 µm``) and after a
    symbol (``η 0.60``)."""
    text = _EQUALS_NUMBER.sub(lambda m: m.group(0).replace(" ", NBSP), text)
    return _DURATION_PARTS.sub(NBSP, _UNIT_AFTER_NUMBER.sub(NBSP, text))


def wrap(text: str, width: int, indent: str = "", first_indent: str = "") -> list[str]:
    """``text`` folded at spaces to ``width`` columns; a number stays on the line of its unit.

    Continuation lines start with ``indent``; the result has ordinary spaces again.
    """
    lines = textwrap.wrap(
        keep_units(text),
        width=max(20, width),
        initial_indent=first_indent,
        subsequent_indent=indent,
        break_long_words=False,
        break_on_hyphens=False,
    )
    return [line.replace(NBSP, " ") for line in lines] or [first_indent.rstrip()]
