"""Guessing how an unknown logger file is laid out, from its first lines (``feed inspect``, ``site new``).

    guess = guess_layout(path)
    guess.layout        # a FeedLayout that reads the file (UTC assumed where the zone is unknown)
    guess.columns       # canonical → (logger column, unit, why) as guessed
    guess.todos         # what a person must still say (zone, position, a gust factor, ...)

The guess reads at most :data:`HEAD_BYTES` from the start of the file: lines above the header
(a metadata line), the time column(s) and their format (ISO 8601, epoch numbers, or a strftime
layout such as ``%m/%d/%Y %H:%M``, with ``24:00`` meaning period-ending stamps), columns by their
names and units, missing-value codes (``-9900``, ``-9999``, ``M`` ...) and precipitation given as a
depth over a number of hours.  Nothing is guessed silently: every guess has a reason, and what
cannot be guessed is a TODO.
"""

from __future__ import annotations

import codecs
import csv
import io
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from advisor import units
from advisor.catalogue import PLAUSIBLE_RANGE
from advisor.errors import FeedError
from advisor.io.feedlayout import CANONICAL_UNITS, ColumnMap, FeedLayout
from advisor.io.feedtimes import MIDNIGHT_24
from advisor.io.fileio import FileKind, open_regular

__all__ = ["HEAD_BYTES", "Guess", "GuessedColumn", "guess_layout", "SENTINELS"]

HEAD_BYTES = 4_000_000
_ANY_SIZE = FileKind("feed file", 1 << 62, "")
#: Numbers loggers and archives write for "no value" (a code is proposed only where it appears
#: in a column whose real values never come near it).
SENTINELS = (-9900.0, -9999.0, -999.0, -999.9, -99.9, -9999.9, 9999.0, 99999.0, 9999.9, -8888.0, 8888.0)
_WORD_CODES = ("M", "NA", "N/A", "--", "---", "///", "////", "-", "*", "ERR", "NULL", "NaN", "nan")

#: Canonical column → (name pattern, names that must not match, fallback unit).
_PATTERNS = (
    ("wind_gust_ms", r"gust|w(?:ind)?_?max|peak|wmax", r"dir"),
    ("wind_mean_ms", r"w(?:ind)?[\s_-]*s(?:pee)?d|wspd|wind_?avg|wind(?!.*dir)|\bws\b|\bff\b", r"dir|gust|max|peak"),
    ("dew_point_c", r"dew", r""),
    ("air_temp_c", r"dry[\s_-]*bulb|air[\s_-]*t|temp|\btt?\b|\btair\b", r"dew|wet|soil|ground|panel|module|rate"),
    ("rel_humidity_pct", r"\brh|rel.*hum|humid|rhum", r""),
    ("pressure_hpa", r"press|baro|\bslp\b|\bqfe\b|\bp\b", r""),
    ("visibility_m", r"vis", r""),
    ("precip_mm_h", r"precip|rain|prcp", r"quantity|\(hr\)|hours|period|source|uncert|flag|prob"),
    ("solar_wm2", r"\bghi\b|solar|irrad|global|sw_?down|radiation", r"source|uncert|flag|direct|diffuse|dni|dhi|etr"),
)
_HOURS_COLUMN = re.compile(r"quantity|\(hr\)|hours|period|accum", re.I)
_SKIP_WORDS = re.compile(r"source|uncert|flag|qc|quality|\bdir\b|direction", re.I)
#: Unit spelling in a column name → unit, by canonical column's dimension.
_UNIT_WORDS = {
    "speed": (
        (r"m/s|\bms\b|_ms$|m s-1", "m/s"),
        (r"\bkn\b|knot|\bkt\b|_kn$|_kt$", "kn"),
        (r"mph", "mph"),
        (r"km/h|kmh|kph", "km/h"),
    ),
    "temperature": (
        (r"\(c\)|degc|°c|_c$|\bc\b|celsius", "degC"),
        (r"\(f\)|degf|°f|_f$|\bf\b|fahrenheit", "degF"),
        (r"\(k\)|kelvin", "K"),
    ),
    "fraction": ((r"%|pct|percent", "%"), (r"frac", "fraction")),
    "pressure": ((r"mbar|\bmb\b", "mbar"), (r"hpa", "hPa"), (r"inhg", "inHg"), (r"\bpa\b|\(pa\)", "Pa")),
    "length": ((r"\(m\)|_m$|\bm\b", "m"), (r"\bkm\b|\(km\)", "km")),
    "rain": ((r"mm/h|mm h-1|mmh", "mm/h"), (r"in/h", "in/h"), (r"\(mm\)|\bmm\b|_mm$", "mm"), (r"\(in\)|_in$", "in")),
    "irradiance": ((r"w/m|wm2|w m-2", "W/m2"),),
}
_DIMENSION = {
    "wind_mean_ms": "speed",
    "wind_gust_ms": "speed",
    "air_temp_c": "temperature",
    "dew_point_c": "temperature",
    "rel_humidity_pct": "fraction",
    "pressure_hpa": "pressure",
    "visibility_m": "length",
    "precip_mm_h": "rain",
    "solar_wm2": "irradiance",
}
_FORMATS = (
    "%m/%d/%Y %H:%M",
    "%d/%m/%Y %H:%M",
    "%Y/%m/%d %H:%M",
    "%d.%m.%Y %H:%M",
    "%Y-%m-%d %H:%M",
    "%d-%m-%Y %H:%M",
    "%m-%d-%Y %H:%M",
    "%Y%m%d %H%M",
    "%Y%m%d%H%M",
)


@dataclass(frozen=True)
class GuessedColumn:
    """One canonical column as guessed: the logger column, its unit, and why."""

    canonical: str
    source: str
    unit: str
    why: str
    over_hours_from: str | None = None
    codes: tuple = ()


@dataclass
class Guess:
    """A guessed layout, the reasons for each guess, and what is left to a person."""

    layout: FeedLayout
    header: list[str]
    skipped_lines: list[str] = field(default_factory=list)
    columns: dict[str, GuessedColumn] = field(default_factory=dict)
    unused: list[str] = field(default_factory=list)
    notes: dict[str, str] = field(default_factory=dict)  # layout key → why it was guessed
    todos: dict[str, str] = field(default_factory=dict)  # layout key → what to fill in
    codes_found: dict[str, list] = field(default_factory=dict)  # logger column → codes seen in it
    zone_known: bool = False  # the times carry their own offset
    cadence_min: float | None = None


def _head_text(path: Path) -> tuple[str, bool]:
    """The file's first complete lines (at most HEAD_BYTES), and whether that is the whole file."""
    with open_regular(path, FeedError, _ANY_SIZE, empty_hint="expected a header line and data rows") as (fh, size):
        data = fh.read(HEAD_BYTES)
    whole = len(data) >= size
    if not whole:
        data = data[: data.rfind(b"\n") + 1]
    if data.startswith(codecs.BOM_UTF8):
        data = data[3:]
    try:
        return data.decode("utf-8"), whole
    except UnicodeDecodeError as exc:
        raise FeedError(
            f"not UTF-8 text (byte 0x{data[exc.start]:02x})", source=str(path), hint="save the feed as UTF-8 CSV"
        ) from None


def _header_line(lines: list[str]) -> int:
    """Index of the header: the first line with as many fields as the lines below it, mostly words."""
    rows = list(csv.reader(lines[:40]))
    counts = [len(r) for r in rows]
    for i, row in enumerate(rows[:20]):
        below = counts[i + 1 : i + 11]
        if not below or len(row) < 2:
            continue
        if all(c == len(row) for c in below):
            words = sum(1 for cell in row if cell.strip() and not _is_number(cell))
            if words >= len(row) / 2:
                return i
    return 0


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def _unit_from_name(canonical: str, name: str) -> tuple[str, str] | None:
    low = name.lower()
    for pattern, unit in _UNIT_WORDS[_DIMENSION[canonical]]:
        if re.search(pattern, low):
            return unit, "unit from the name"
    return None


def _time_columns(table: pd.DataFrame) -> tuple[list[str], str]:
    names = [str(c) for c in table.columns]
    low = {n: n.lower() for n in names}
    single = [
        n
        for n in names
        if re.match(r"\s*(timestamp|datetime|date[_ ]?time|time[_ ]?stamp|time_utc|utc|time)\b", low[n])
    ]
    dates = [n for n in names if re.match(r"\s*date\b", low[n]) and n not in single]
    times = [n for n in names if re.match(r"\s*(time|hour|hh:mm)\b", low[n])]
    if dates and times:
        sample = table[times[0]].astype(str).str.strip()
        if sample.str.fullmatch(r"\d{1,2}:\d\d(:\d\d)?").mean() > 0.9:
            return [dates[0], times[0]], "a date column and a time-of-day column"
    if single:
        return [single[0]], "its name"
    if dates:
        return [dates[0]], "its name"
    return [names[0]], "the first column (no column is named like a time)"


def _time_format(texts: pd.Series) -> tuple[str | None, str | None, bool, str]:
    """(time_format, time_unit, has 24:00, why) for a sample of time texts."""
    texts = texts.astype(str).str.strip()
    midnight = texts.str.contains(MIDNIGHT_24, regex=True)
    readable = texts.str.replace(MIDNIGHT_24, "00:00", regex=True)
    numbers = pd.to_numeric(texts, errors="coerce")
    if numbers.notna().all():
        if ((numbers > 3e11) & (numbers < 7e12)).all():
            return None, "epoch_ms", False, "numbers in the range of epoch milliseconds"
        if ((numbers > 3e8) & (numbers < 7e9)).all():
            return None, "epoch_s", False, "numbers in the range of epoch seconds"
    iso = readable.str.fullmatch(r"\d{4}-\d\d-\d\d[Tt ]\d\d:\d\d(:\d\d(\.\d+)?)?([Zz]|[+-]\d\d(:?\d\d)?)?")
    if iso.all() and not midnight.any():
        return None, None, False, "ISO 8601 times"
    for base in _FORMATS:
        for fmt in (base + ":%S", base) if "%M" in base and not base.endswith("%H%M") else (base,):
            parsed = pd.to_datetime(readable, format=fmt, errors="coerce")
            if parsed.notna().all():
                why = f"every sampled time reads as {fmt}"
                if fmt.startswith("%m/%d") or fmt.startswith("%d/%m"):
                    other = fmt.replace("%m/%d", "%X").replace("%d/%m", "%m/%d").replace("%X", "%d/%m")
                    if pd.to_datetime(readable, format=other, errors="coerce").notna().all():
                        why += f" (and as {other}: no day above 12 in the sample — check the order)"
                return fmt, None, bool(midnight.any()), why
    return None, None, bool(midnight.any()), "no known layout fits: write feed.time_format"


def _sentinels(values: pd.Series, canonical: str | None = None, unit: str | None = None) -> list:
    """Codes for "no value" in one column: a listed sentinel that is impossible for the quantity
    (outside its plausible range) or far from the column's other values, or a word in a column
    of numbers."""
    text = values.astype(str).str.strip()
    numbers = pd.to_numeric(text, errors="coerce")
    found: list = []
    words = text[numbers.isna() & (text != "") & (text.str.lower() != "nan")]
    for word in _WORD_CODES:
        if (words == word).any():
            found.append(word)
    real = numbers.dropna()
    for code in SENTINELS:
        hit = real == code
        if hit.any():
            rest = real[~hit]
            spread = float(rest.abs().max()) if len(rest) else 0.0
            impossible = False
            if canonical in PLAUSIBLE_RANGE and unit is not None:
                try:
                    value = float(units.convert(code, unit, CANONICAL_UNITS[canonical]))
                    lo, hi = PLAUSIBLE_RANGE[canonical]
                    impossible = not lo <= value <= hi
                except units.UnitError:
                    pass
            if impossible or abs(code) > 5 * max(spread, 1.0) or len(rest) == 0:
                found.append(int(code) if code == int(code) else code)
    return found


def guess_layout(path: Path | str) -> Guess:
    """Guess how ``path`` (CSV or JSON Lines) is laid out; see the module docstring."""
    path = Path(path)
    text, _whole = _head_text(path)
    lines = text.splitlines()
    if not lines:
        raise FeedError("feed is empty", source=str(path), hint="expected a header line and data rows")
    is_jsonl = lines[0].lstrip().startswith("{")
    skip = 0 if is_jsonl else _header_line(lines)
    try:
        table = (
            pd.read_json(io.StringIO("\n".join(lines[:20000])), lines=True, dtype=False)
            if is_jsonl
            else pd.read_csv(io.StringIO("\n".join(lines[skip : skip + 20001])), dtype=str, keep_default_na=False)
        )
    except (ValueError, pd.errors.ParserError) as exc:
        raise FeedError(
            f"cannot read the file's first lines: {str(exc).splitlines()[0]}",
            source=str(path),
            hint="is it a comma-separated or JSON Lines file?",
        ) from None
    table = table.rename(columns=lambda c: str(c).strip())
    if len(table.columns) == 1 and any(ch in str(table.columns[0]) for ch in ";\t|"):
        raise FeedError(
            "the file seems to use another delimiter than ','",
            source=str(path),
            line=skip + 1,
            hint="save it as comma-separated (CSV) or JSON Lines",
        )
    if len(table) == 0:
        raise FeedError("no data rows in the file's first lines", source=str(path), hint="expected data rows")
    guess = Guess(FeedLayout(), [str(c) for c in table.columns], skipped_lines=lines[:skip])
    if skip:
        guess.notes["skip_lines"] = f"the header is on line {skip + 1}; above it: {lines[0][:60]!r}"
    time_cols, why = _time_columns(table)
    texts = table[time_cols[0]].astype(str).str.strip()
    if len(time_cols) == 2:
        texts = texts + " " + table[time_cols[1]].astype(str).str.strip()
    fmt, unit, midnight, fmt_why = _time_format(texts.head(2000))
    guess.notes["time_column"] = f"chosen by {why}"
    guess.notes["time_format" if fmt else "time_unit" if unit else "time_column"] = fmt_why
    if fmt is None and unit is None and "ISO" not in fmt_why:
        guess.todos["time_format"] = 'the strftime layout of the time text, e.g. "%m/%d/%Y %H:%M"'
    label = "end" if midnight else "instant"
    if midnight:
        guess.notes["time_label"] = "stamps run to 24:00: each ends the period its values cover"
    zone_known = unit is not None or bool(texts.head(200).str.contains(r"(?:[Zz]|[+-]\d\d:?\d\d)$").all())
    guess.zone_known = zone_known
    if not zone_known:
        guess.todos["time_zone"] = (
            "the zone the stamps are written in: UTC, a fixed offset such as UTC-05:00 for "
            "standard time all year, or an IANA name such as America/Chicago"
        )
    used = set(time_cols)
    for canonical, pattern, exclude in _PATTERNS:
        for name in guess.header:
            if name in used or _SKIP_WORDS.search(name):
                continue
            low = name.lower()
            if re.search(pattern, low) and not (exclude and re.search(exclude, low)):
                unit_guess = _unit_from_name(canonical, name)
                unit_name, unit_why = unit_guess or (
                    CANONICAL_UNITS[canonical],
                    f"no unit in the name: {CANONICAL_UNITS[canonical]} assumed, check",
                )
                hours = None
                if canonical == "precip_mm_h" and unit_name in ("mm", "in"):
                    hours = next(
                        (
                            h
                            for h in guess.header
                            if h != name and _HOURS_COLUMN.search(h) and not _SKIP_WORDS.search(h)
                        ),
                        None,
                    )
                    if hours is None:
                        guess.todos["precip_mm_h"] = (
                            f"'{name}' is a depth: add over_hours: N (the hours it was "
                            "collected over) or over_hours_from: COLUMN"
                        )
                depth = canonical == "precip_mm_h" and unit_name in ("mm", "in")
                codes = _sentinels(table[name], None if depth else canonical, None if depth else unit_name)
                if depth and (table[name].astype(str).str.strip().str.startswith("-")).any():
                    codes += [c for c in _sentinels(table[name]) if c not in codes]
                    codes += [
                        c
                        for c in SENTINELS
                        if c < 0 and (pd.to_numeric(table[name], errors="coerce") == c).any() and c not in codes
                    ]
                if hours is not None:
                    codes += [c for c in _sentinels(table[hours]) if c not in codes]
                codes = [int(c) if isinstance(c, float) and c == int(c) else c for c in codes]
                guess.columns[canonical] = GuessedColumn(canonical, name, unit_name, unit_why, hours, tuple(codes))
                used.add(name)
                if hours:
                    used.add(hours)
                break
    for required in ("wind_mean_ms", "air_temp_c", "rel_humidity_pct"):
        if required not in guess.columns:
            guess.todos[required] = "no column looks like it: name the logger's column"
    gust_factor = None
    if "wind_gust_ms" not in guess.columns and "wind_mean_ms" in guess.columns:
        guess.todos["gust_factor"] = (
            "no gust column: the station's gust factor (gust / mean, e.g. 1.5), or map a gust column as wind_gust_ms"
        )
        gust_factor = 1.5  # only to read the file for inspection; the site file keeps the TODO
    all_codes = sorted({c for col in guess.columns.values() for c in col.codes}, key=str)
    for col in guess.columns.values():
        for c in col.codes:
            guess.codes_found.setdefault(col.source, []).append(c)
    guess.unused = [n for n in guess.header if n not in used]
    times_for_cadence = texts.head(2000)
    try:
        parsed = (
            pd.to_datetime(
                times_for_cadence.str.replace(MIDNIGHT_24, "00:00", regex=True),
                format=fmt if fmt else ("ISO8601" if unit is None else None),
                unit=None,
                errors="coerce",
                utc=True,
            )
            if unit is None
            else pd.to_datetime(pd.to_numeric(times_for_cadence), unit="ms" if unit == "epoch_ms" else "s", utc=True)
        )
        t = np.sort(pd.DatetimeIndex(parsed.dropna()).as_unit("ns").asi8)
        steps = np.diff(t)
        steps = steps[steps > 0]
        guess.cadence_min = float(np.median(steps) / 6e10) if len(steps) else None
    except (ValueError, TypeError):
        guess.cadence_min = None
    columns = tuple(
        ColumnMap(c.canonical, c.source, c.unit, over_hours_from=c.over_hours_from)
        for c in guess.columns.values()
        if not (c.canonical == "precip_mm_h" and "precip_mm_h" in guess.todos)
    )
    guess.layout = FeedLayout(
        path=path,
        time_column=time_cols[0] if len(time_cols) == 1 else (time_cols[0], time_cols[1]),
        time_zone=None if zone_known else "UTC",
        columns=columns,
        time_unit=unit,
        time_format=fmt,
        time_label=label,
        skip_lines=skip,
        missing=tuple(all_codes),
        gust_factor=gust_factor,
    )
    return guess
