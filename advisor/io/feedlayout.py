"""How a site's logger file is laid out: the ``feed:`` section of a site file.

A real station's export is described as it is, without converting it first::

    feed:
      path: station.csv
      skip_lines: 1                     # lines above the header (a metadata line)
      time_column: [Date, Time]         # one column, or date and time joined with one space
      time_format: "%m/%d/%Y %H:%M"     # strftime; unset: ISO 8601 (or epoch numbers, time_unit)
      time_label: end                   # instant | end (period-ending stamps, 24:00 allowed) | start
      time_zone: UTC-05:00              # IANA name, UTC±HH[:MM] or Etc/GMT±H; for stamps without offset
      missing: [-9900, -9999]           # codes meaning "no value", in every column
      gust_factor: 1.5                  # no gust sensor: gust = factor × mean wind, marked estimated
      max_feed_age_min: 90              # unset: from the feed's measured cadence (age_limit_min)
      max_gap_min: 150                  # unset: from the cadence (gap_limit_min)
      dropout_min: 180                  # unset: from the cadence (dropout_limit_min)
      max_change_per_min: {rel_humidity_pct: 10}
      columns:
        wind_mean_ms: {from: Wspd, unit: m/s}
        visibility_m: {from: Hvis, unit: m, missing: [-9900]}
        precip_mm_h:  {from: Lprecip depth, unit: mm, over_hours_from: Lprecip quantity}

:func:`parse_feed_section` validates it (errors name the key path and line) into a frozen
:class:`FeedLayout`.  The limits that depend on the feed's own cadence are methods of the layout
so every user applies the same definition.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from pathlib import Path
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

import numpy as np

from advisor import units
from advisor.io.sitereader import Reader

__all__ = [
    "CANONICAL_COLUMNS",
    "REQUIRED_COLUMNS",
    "OPTIONAL_COLUMNS",
    "CANONICAL_UNITS",
    "DEFAULT_MAX_CHANGE_PER_MIN",
    "TIME_LABELS",
    "TIME_UNITS",
    "ColumnMap",
    "FeedLayout",
    "parse_feed_section",
    "parse_time_zone",
    "fixed_offset_minutes",
    "zone_label",
]

CANONICAL_COLUMNS = (
    "wind_mean_ms",
    "wind_gust_ms",
    "air_temp_c",
    "rel_humidity_pct",
    "dew_point_c",
    "pressure_hpa",
    "precip_mm_h",
    "visibility_m",
    "solar_wm2",
)
REQUIRED_COLUMNS = ("wind_mean_ms", "wind_gust_ms", "air_temp_c", "rel_humidity_pct")
#: Inputs a call can be made without; absent, they are "not seen", never "fine".
OPTIONAL_COLUMNS = ("pressure_hpa", "precip_mm_h", "visibility_m", "solar_wm2")
CANONICAL_UNITS = {
    "wind_mean_ms": "m/s",
    "wind_gust_ms": "m/s",
    "air_temp_c": "degC",
    "rel_humidity_pct": "%",
    "dew_point_c": "degC",
    "pressure_hpa": "hPa",
    "precip_mm_h": "mm/h",
    "visibility_m": "m",
    "solar_wm2": "W/m2",
}
TIME_UNITS = ("iso", "epoch_s", "epoch_ms")
#: What a stamp marks: an instant, the end of the period its values cover, or its start.
TIME_LABELS = ("instant", "end", "start")

#: Largest change between two consecutive samples per minute between them (a step test); the
#: sample after a larger change is implausible.  The limits are the 1-minute step limits of
#: Zahumenský (2004), "Guidelines on quality control procedures for data from automatic weather
#: stations", WMO CBS/OPAG-IOS/ET AWS-3/Doc. 4(2) (quoted from memory); over longer intervals the
#: limit grows in proportion (a generous bound: it bites on fast feeds, never on hourly ones).
DEFAULT_MAX_CHANGE_PER_MIN = {
    "air_temp_c": 3.0,
    "dew_point_c": 2.0,
    "rel_humidity_pct": 10.0,
    "pressure_hpa": 0.5,
    "wind_mean_ms": 20.0,
    "wind_gust_ms": 20.0,
    "solar_wm2": 800.0,
}

#: Floors of the limits derived from the cadence [min] (the limits of a 1-minute logger).
AGE_FLOOR_MIN, GAP_FLOOR_MIN, DROPOUT_FLOOR_MIN = 15.0, 10.0, 60.0
#: ... and their multiples of the cadence: a sample is stale once its successor is half a
#: cadence overdue; a gap is more than one missing sample and a half; an optional sensor that
#: stopped reporting blocks a scan for three of its samples (definitions of this tool).
AGE_CADENCES, GAP_CADENCES, DROPOUT_CADENCES = 1.5, 2.5, 3.0

_OFFSET = re.compile(r"^(?:UTC|GMT)\s*([+-])\s*(\d{1,2})(?::?(\d{2}))?$", re.IGNORECASE)


@dataclass(frozen=True)
class ColumnMap:
    """One canonical column read from a logger column in a given unit.

    ``missing`` holds codes meaning "no value" in this column (numbers compared as numbers, words
    as the stripped cell text).  For precipitation given as a depth, ``over_hours`` (fixed) or
    ``over_hours_from`` (a column giving each row's hours) turns the depth into a rate.
    """

    canonical: str
    source_column: str
    unit: str
    missing: tuple = ()
    over_hours: float | None = None
    over_hours_from: str | None = None

    @property
    def is_depth(self) -> bool:
        return self.over_hours is not None or self.over_hours_from is not None


@dataclass(frozen=True)
class FeedLayout:
    """How to read the site's weather logger (see the module docstring for the keys)."""

    path: Path | None = None
    time_column: str | tuple[str, ...] = "time"
    time_zone: str | None = None
    columns: tuple[ColumnMap, ...] = ()
    max_feed_age_min: float | None = None  # None: from the cadence (age_limit_min)
    max_gap_min: float | None = None  # None: from the cadence (gap_limit_min)
    time_unit: str | None = None  # None: ISO 8601 text (or epoch seconds); "iso", "epoch_s", "epoch_ms"
    time_format: str | None = None  # strftime format of the (joined) time text
    time_label: str = "instant"  # instant | end | start
    skip_lines: int = 0  # lines above the header
    missing: tuple = ()  # codes meaning "no value" in every column
    gust_factor: float | None = None  # no gust sensor: gust = factor × mean wind (estimated)
    dropout_min: float | None = None  # None: from the cadence (dropout_limit_min)
    max_change_per_min: tuple[tuple[str, float], ...] = ()  # site overrides of the step limits

    @property
    def time_columns(self) -> tuple[str, ...]:
        """The time column(s): one, or date and time."""
        return (self.time_column,) if isinstance(self.time_column, str) else tuple(self.time_column)

    @property
    def time_field(self) -> str:
        """The time column(s) as named in messages."""
        return " + ".join(self.time_columns)

    def step_limits(self) -> dict[str, float]:
        """Largest plausible change per minute of each quantity (defaults, site overrides)."""
        return {**DEFAULT_MAX_CHANGE_PER_MIN, **dict(self.max_change_per_min)}

    def age_limit_min(self, cadence_min=None):
        """Oldest a last good sample may be [min]: the site's ``max_feed_age_min``, else
        max(15 min, 1.5 × the cadence).  ``cadence_min`` may be an array (NaN: unknown)."""
        return _limit(self.max_feed_age_min, cadence_min, AGE_FLOOR_MIN, AGE_CADENCES)

    def gap_limit_min(self, cadence_min=None):
        """Longest interval between two samples that is not a gap [min]: ``max_gap_min``, else
        max(10 min, 2.5 × the cadence)."""
        return _limit(self.max_gap_min, cadence_min, GAP_FLOOR_MIN, GAP_CADENCES)

    def dropout_limit_min(self, cadence_min=None):
        """How long an optional sensor that stopped reporting still blocks a scan [min]:
        ``dropout_min``, else max(60 min, 3 × the cadence)."""
        return _limit(self.dropout_min, cadence_min, DROPOUT_FLOOR_MIN, DROPOUT_CADENCES)

    def as_read(self, sources: dict[str, str]) -> FeedLayout:
        """This layout with each column mapped as it was actually read (``FeedQuality.sources``): a
        canonical name the file carried itself replaces a mapping to a column it lacks."""
        from dataclasses import replace

        kept = [c for c in self.columns if sources.get(c.canonical) in (None, c.source_column)]
        mapped = {c.canonical for c in kept}
        own = [ColumnMap(n, col, CANONICAL_UNITS[n]) for n, col in sources.items() if n not in mapped and col == n]
        return replace(self, columns=tuple(kept + own))

    def source_of(self, canonical: str) -> str:
        """The logger column a canonical column is read from (its own name when unmapped)."""
        for c in self.columns:
            if c.canonical == canonical:
                return c.source_column
        return canonical


def _limit(fixed: float | None, cadence_min, floor: float, cadences: float):
    if fixed is not None:
        return fixed if np.ndim(cadence_min) == 0 else np.full(np.shape(cadence_min), float(fixed))
    cadence = np.asarray(np.nan if cadence_min is None else cadence_min, dtype=float)
    value = np.where(
        np.isfinite(cadence), np.maximum(floor, cadences * np.where(np.isfinite(cadence), cadence, 0)), floor
    )
    return float(value) if value.ndim == 0 else value


def fixed_offset_minutes(text: str) -> int | None:
    """Minutes east of UTC of ``UTC±HH[:MM]`` / ``GMT±H`` (None for anything else)."""
    m = _OFFSET.match(text.strip())
    if not m:
        return None
    hours, minutes = int(m.group(2)), int(m.group(3) or 0)
    if hours > 14 or minutes >= 60:
        raise ValueError(f"offset {text!r} is outside -14:00..+14:00")
    return (1 if m.group(1) == "+" else -1) * (hours * 60 + minutes)


def parse_time_zone(value: str, allow_fractional_offset: bool = True) -> str:
    """A time zone as written in a site file → the name the advisor uses.

    IANA names are checked by loading them (a region folder such as ``America`` is refused);
    ``UTC-05:00`` (standard-time loggers) becomes ``Etc/GMT+5`` (the IANA name, whose sign is
    inverted by convention); an offset with minutes (``UTC+05:30``) stays as written
    ``UTC+05:30`` when ``allow_fractional_offset``.  Raises ``ValueError`` with the reason.
    """
    text = value.strip()
    minutes = fixed_offset_minutes(text)
    if minutes is not None:
        if minutes % 60 == 0:
            hours = -minutes // 60
            return "UTC" if hours == 0 else f"Etc/GMT{hours:+d}"
        if not allow_fractional_offset:
            raise ValueError(
                f"offset {text!r} is not a whole number of hours here; name the IANA zone (e.g. Asia/Kolkata)"
            )
        sign = "+" if minutes > 0 else "-"
        return f"UTC{sign}{abs(minutes) // 60:02d}:{abs(minutes) % 60:02d}"
    if not text or len(text) > 64 or any(not (ch.isalnum() or ch in "/_+-") for ch in text):
        raise ValueError(f"unknown time zone {value!r}")
    try:
        ZoneInfo(text)
    except IsADirectoryError:
        raise ValueError(f"{value!r} is a region, not a time zone") from None
    except (ZoneInfoNotFoundError, ValueError, OSError, UnicodeError):
        raise ValueError(f"unknown time zone {value!r}") from None
    return text


def zone_label(name: str | None) -> str:
    """A zone as people write it: ``Etc/GMT+5`` → ``UTC-05:00`` (IANA's sign is inverted)."""
    if name is None:
        return "UTC"
    m = re.fullmatch(r"Etc/GMT([+-])(\d{1,2})", name)
    if m:
        return f"UTC{'-' if m.group(1) == '+' else '+'}{int(m.group(2)):02d}:00"
    return name


ZONE_HINT = "use an IANA name such as America/Denver or Europe/Madrid, UTC, or a fixed offset such as UTC-05:00"


def zone_value(reader: Reader, path: tuple, value: str | None, allow_fractional_offset: bool = True) -> str | None:
    """:func:`parse_time_zone` of a site-file value, failures as a :class:`SiteError`."""
    if value is None:
        return None
    try:
        return parse_time_zone(value, allow_fractional_offset)
    except ValueError as exc:
        what = str(exc)
        hint = ZONE_HINT
        if "region" in what:
            hint = f"name a zone within it, e.g. {value}/<City>; {ZONE_HINT}"
        raise reader.fail(path, what, hint=hint) from None


def _codes(reader: Reader, path: tuple) -> tuple:
    """A list of missing-value codes: numbers, or words such as ``M`` or ``NA``."""
    value = reader.get_raw(path)
    if value is None:
        return ()
    if not isinstance(value, list):
        value = [value]
    out: list = []
    for item in value:
        if isinstance(item, bool) or not isinstance(item, (int, float, str)):
            raise reader.fail(
                path, f"expected a list of numbers or words, got {item!r}", hint="e.g. missing: [-9900, -9999, M]"
            )
        if isinstance(item, str):
            word = item.strip()
            if not word:
                raise reader.fail(path, "an empty code", hint="an empty cell is missing anyway; list only codes")
            try:
                number = float(word)
            except ValueError:
                out.append(word)
                continue
            item = number
        number = float(item)
        if not math.isfinite(number):
            raise reader.fail(path, f"code {item!r} is not a finite number")
        out.append(number)
    return tuple(dict.fromkeys(out))


def _column(reader: Reader, canonical: str) -> ColumnMap:
    cpath = ("feed", "columns", canonical)
    if canonical not in CANONICAL_COLUMNS:
        import difflib

        close = difflib.get_close_matches(str(canonical), CANONICAL_COLUMNS, n=1)
        raise reader.fail(
            cpath,
            "not a canonical column",
            hint=f"did you mean '{close[0]}'?" if close else f"one of {', '.join(CANONICAL_COLUMNS)}",
        )
    keys = {"from", "unit", "missing"} | ({"over_hours", "over_hours_from"} if canonical == "precip_mm_h" else set())
    reader.section(cpath, keys)
    src = reader.text(cpath + ("from",), required=True) or ""
    unit = reader.text(cpath + ("unit",), default=CANONICAL_UNITS[canonical]) or CANONICAL_UNITS[canonical]
    over_hours = (
        reader.number(cpath + ("over_hours",), lo=1e-3, hi=24 * 366)
        if reader.get_raw(cpath + ("over_hours",)) is not None
        else None
    )
    over_from = reader.text(cpath + ("over_hours_from",))
    if over_hours is not None and over_from is not None:
        raise reader.fail(cpath + ("over_hours_from",), "give over_hours or over_hours_from, not both")
    target = "mm" if (over_hours is not None or over_from is not None) else CANONICAL_UNITS[canonical]
    try:
        units.convert(1.0, unit, target)
    except units.UnitError as exc:
        hint = f"use a unit convertible to {target}"
        if target == "mm/h" and unit in units.known_units() and units.dimension(unit) == "length":
            hint = "a depth needs the hours it was collected over: add over_hours: N or over_hours_from: COLUMN"
        raise reader.fail(cpath + ("unit",), str(exc), hint=hint) from None
    return ColumnMap(canonical, src, unit, _codes(reader, cpath + ("missing",)), over_hours, over_from)


def _time_column(reader: Reader) -> str | tuple[str, ...]:
    path = ("feed", "time_column")
    value = reader.get_raw(path)
    if value is None:
        return "time"
    if isinstance(value, str) and value.strip():
        return value
    if isinstance(value, list) and len(value) == 2 and all(isinstance(v, str) and v.strip() for v in value):
        if value[0] == value[1]:
            raise reader.fail(path, "the date and the time column are the same")
        return (value[0], value[1])
    raise reader.fail(
        path,
        f"expected a column name or [date column, time column], got {value!r}",
        hint='e.g. time_column: timestamp, or time_column: ["Date (MM/DD/YYYY)", "Time (HH:MM)"]',
    )


def _time_format(reader: Reader, two_columns: bool) -> str | None:
    path = ("feed", "time_format")
    fmt = reader.text(path)
    if fmt is None:
        if two_columns:
            raise reader.fail(
                path,
                "a date and a time column need a time_format",
                hint='the two are joined with one space, e.g. time_format: "%m/%d/%Y %H:%M"',
            )
        return None
    if "%" not in fmt:
        raise reader.fail(path, f"{fmt!r} has no % directive", hint='write strftime codes, e.g. "%m/%d/%Y %H:%M"')
    if not any(d in fmt for d in ("%d", "%j")) or "%H" not in fmt and "%I" not in fmt:
        raise reader.fail(
            path,
            f"{fmt!r} needs a day (%d or %j) and an hour (%H or %I)",
            hint='e.g. "%Y-%m-%d %H:%M" or "%m/%d/%Y %H:%M"',
        )
    if "%z" in fmt or "%Z" in fmt:
        raise reader.fail(
            path,
            "a zone in the time text is not read with time_format",
            hint="remove %z/%Z and set feed.time_zone, or write ISO 8601 times with an offset",
        )
    return fmt


def _max_change(reader: Reader) -> tuple[tuple[str, float], ...]:
    path = ("feed", "max_change_per_min")
    section = reader.section(path, set(DEFAULT_MAX_CHANGE_PER_MIN) | {"precip_mm_h", "visibility_m"})
    return tuple((name, reader.number(path + (name,), lo=1e-6, hi=1e6, required=True)) for name in section)


FEED_KEYS = {
    "path",
    "time_column",
    "time_zone",
    "time_unit",
    "time_format",
    "time_label",
    "skip_lines",
    "columns",
    "missing",
    "gust_factor",
    "max_feed_age_min",
    "max_gap_min",
    "dropout_min",
    "max_change_per_min",
}


def parse_feed_section(reader: Reader, base: Path) -> FeedLayout:
    """Validate the ``feed:`` section of a site file into a :class:`FeedLayout`."""
    section = reader.section(("feed",), FEED_KEYS)
    col_section = section.get("columns") or {}
    if not isinstance(col_section, dict):
        raise reader.fail(("feed", "columns"), "expected a mapping of canonical name → {from, unit}")
    columns = tuple(_column(reader, canonical) for canonical in col_section)
    mapped = {c.canonical for c in columns}
    gust_factor = None
    if reader.get_raw(("feed", "gust_factor")) is not None:
        gust_factor = reader.number(("feed", "gust_factor"), lo=1.0, hi=5.0)
        if "wind_gust_ms" in mapped:
            raise reader.fail(
                ("feed", "gust_factor"),
                "the feed maps a gust column and also sets gust_factor",
                hint="use the measured gusts (remove gust_factor) or drop the wind_gust_ms mapping",
            )
    time_column = _time_column(reader)
    time_unit = reader.text(("feed", "time_unit"))
    if time_unit is not None and time_unit not in TIME_UNITS:
        raise reader.fail(
            ("feed", "time_unit"),
            f"unknown time unit {time_unit!r}",
            hint="use iso (ISO 8601 text), epoch_s (seconds since 1970) or epoch_ms (milliseconds)",
        )
    time_format = _time_format(reader, not isinstance(time_column, str))
    if time_format is not None and time_unit in ("epoch_s", "epoch_ms"):
        raise reader.fail(
            ("feed", "time_format"),
            f"time_format with time_unit: {time_unit}",
            hint="epoch numbers need no format; remove one of the two",
        )
    label = reader.text(("feed", "time_label"), default="instant")
    if label not in TIME_LABELS:
        raise reader.fail(
            ("feed", "time_label"),
            f"unknown time label {label!r}",
            hint="instant (a sample at the stamp), end (the stamp ends the period its values "
            "cover; 24:00 allowed) or start",
        )
    skip = reader.number(("feed", "skip_lines"), default=0, lo=0, hi=1000)
    if skip != int(skip):
        raise reader.fail(("feed", "skip_lines"), f"expected a whole number, got {skip:g}")

    def optional(name: str, lo: float, hi: float) -> float | None:
        return reader.number(("feed", name), lo=lo, hi=hi) if reader.get_raw(("feed", name)) is not None else None

    return FeedLayout(
        path=reader.path_value(("feed", "path"), base),
        time_column=time_column,
        time_zone=zone_value(reader, ("feed", "time_zone"), reader.text(("feed", "time_zone"))),
        columns=columns,
        max_feed_age_min=optional("max_feed_age_min", 0.5, 1440),
        max_gap_min=optional("max_gap_min", 0.5, 1440),
        time_unit=time_unit,
        time_format=time_format,
        time_label=label,
        skip_lines=int(skip),
        missing=_codes(reader, ("feed", "missing")),
        gust_factor=gust_factor,
        dropout_min=optional("dropout_min", 1, 7 * 1440),
        max_change_per_min=_max_change(reader),
    )
