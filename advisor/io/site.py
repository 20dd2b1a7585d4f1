"""Site configuration: where the dish is, how its feed is laid out, and its figures.

``load_site(path)`` reads a site YAML file, validates every key (errors name the key path and
line, and say what is expected) and returns a frozen :class:`Site`.  Paths inside the file
(feed, reference registry, extra rule files) are resolved relative to the file's folder.
``demo_site_path()`` (from :mod:`advisor.io.bundled`) is the bundled invented demo site.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

from advisor import units
from advisor.errors import SiteError
from advisor.io.bundled import demo_site_path
from advisor.io.yamlio import load_yaml
from advisor.text import clean_text

CANONICAL_COLUMNS = (
    "wind_mean_ms", "wind_gust_ms", "air_temp_c", "rel_humidity_pct",
    "dew_point_c", "pressure_hpa", "precip_mm_h", "visibility_m", "solar_wm2",
)
REQUIRED_COLUMNS = ("wind_mean_ms", "wind_gust_ms", "air_temp_c", "rel_humidity_pct")
CANONICAL_UNITS = {
    "wind_mean_ms": "m/s", "wind_gust_ms": "m/s", "air_temp_c": "degC",
    "rel_humidity_pct": "%", "dew_point_c": "degC", "pressure_hpa": "hPa",
    "precip_mm_h": "mm/h", "visibility_m": "m", "solar_wm2": "W/m2",
}


@dataclass(frozen=True)
class Calibrator:
    """A bright compact source: name and J2000 position [deg]."""

    name: str
    ra_deg: float
    dec_deg: float


@dataclass(frozen=True)
class ColumnMap:
    """One canonical column read from a logger column in a given unit."""

    canonical: str
    source_column: str
    unit: str


@dataclass(frozen=True)
class FeedLayout:
    """How to read the site's weather logger."""

    path: Path | None = None
    time_column: str = "time"
    time_zone: str | None = None
    columns: tuple[ColumnMap, ...] = ()
    max_feed_age_min: float = 15.0
    max_gap_min: float = 10.0
    time_unit: str | None = None   # None: ISO 8601 text (or epoch seconds); "iso", "epoch_s", "epoch_ms"


@dataclass(frozen=True)
class ScanFigures:
    """Laser-scanner error budget and timing."""

    noise_um_at_calm: float = 80.0
    wind_term_um_per_ms2: float = 4.0
    reference_ageing_um_per_day: float = 15.0
    # |ΔT| from the reference scan's air temperature: the air's refractive index along the beam
    # and the mount's thermal motion (advisor.physics.laser); a site may instead give the
    # combined coefficient it has measured (reference_mismatch_um_per_c).
    air_path_m: float = 60.0
    refraction_compensated_fraction: float = 0.7
    mount_um_per_c: float = 10.0
    reference_mismatch_um_per_c: float | None = None
    duration_min: float = 12.0


@dataclass(frozen=True)
class AstronomicalFigures:
    """Out-of-focus holography error budget, timing and source limits."""

    surface_rms_um: float = 180.0
    wind_term_um_per_ms2: float = 3.0
    thermal_drift_um_per_c: float = 25.0
    duration_min: float = 45.0
    uncorrected_surface_rms_um: float | None = None   # the surface with no fresh correction (optional)
    min_calibrator_elevation_deg: float = 25.0
    max_calibrator_elevation_deg: float = 80.0


@dataclass(frozen=True)
class Thresholds:
    """Decision thresholds (units in the names)."""

    high_frequency_wind_limit_ms: float = 4.0
    high_frequency_min_ghz: float = 30.0
    surface_requirement_fraction: float = 16.0   # the surface must reach λ/N (Ruze η 0.54 at λ/16)
    min_ruze_efficiency: float = 0.30
    laser_preference_efficiency: float = 0.08
    min_p_usable: float = 0.5
    fog_spread_c: float = 1.0
    fog_rel_humidity_pct: float = 97.0
    fog_visibility_m: float = 1000.0
    precip_mm_h: float = 0.1
    pointing_error_arcsec_at_4ms: float = 1.2


@dataclass(frozen=True)
class ForecastSettings:
    """``forecast:`` — how forecast rows are read and how far they are trusted (``advisor outlook``)."""

    path: Path | None = None             # forecast file read beside the site's own feed
    issue_time_column: str = "issued"    # ISO 8601 issue time of each forecast row
    horizon_h: float = 48.0              # rows further than this past their issue time are flagged
    wind_margin_pct: float = 0.0         # forecast wind and gusts raised by this before the rules [%]
    dew_point_margin_c: float = 0.0      # forecast dew point raised by this (capped at the air temperature) [°C]
    settling_min: float = 10.0           # added to a method's duration for the shortest window offered [min]


def _forecast_settings(reader: "_Reader", base: Path) -> ForecastSettings:
    path = ("forecast",)
    reader.section(path, {"path", "issue_time_column", "horizon_h", "wind_margin_pct", "dew_point_margin_c",
                          "settling_min"})
    d = ForecastSettings
    return ForecastSettings(
        path=reader.path_value(path + ("path",), base),
        issue_time_column=reader.text(path + ("issue_time_column",), default=d.issue_time_column),
        horizon_h=reader.number(path + ("horizon_h",), default=d.horizon_h, lo=1, hi=24 * 60),
        wind_margin_pct=reader.number(path + ("wind_margin_pct",), default=d.wind_margin_pct, lo=0, hi=200),
        dew_point_margin_c=reader.number(path + ("dew_point_margin_c",), default=d.dew_point_margin_c, lo=0, hi=10),
        settling_min=reader.number(path + ("settling_min",), default=d.settling_min, lo=0, hi=1440),
    )


@dataclass(frozen=True)
class TickConfig:
    """``advisor tick`` settings: notify command (argv, never a shell line) and state-dir limits."""

    notify_command: tuple[str, ...] = ()
    notify_timeout_s: float = 30.0
    notify_format: str = "text"          # text | json, what the notify command reads on stdin
    history_max_bytes: int = 5_000_000   # history.jsonl is rotated to history.jsonl.1 above this
    dead_feed_ticks: int = 6             # consecutive undetermined ticks before "the feed looks dead"
    # A new call is announced once it has held for confirm_ticks ticks or confirm_min minutes
    # (whichever comes first); a call forced by a block (fog, rain, wind, bad data) at once.
    confirm_ticks: int = 3
    confirm_min: float = 15.0


def _tick_config(reader: "_Reader", base: Path) -> TickConfig:
    path = ("tick",)
    section = reader.section(path, {"notify_command", "notify_timeout_s", "notify_format",
                                    "history_max_bytes", "dead_feed_ticks", "confirm_ticks", "confirm_min"})
    argv = section.get("notify_command") or []
    if not isinstance(argv, list) or not all(isinstance(a, str) and a for a in argv):
        raise reader.fail(path + ("notify_command",), f"expected a list of non-empty strings, got {argv!r}",
                          hint="write the program and its arguments as a list, e.g. [/usr/local/bin/page-ops, "
                               "--team, surface]; it is run directly, never through a shell")
    if argv and "/" in argv[0] and not Path(argv[0]).expanduser().is_absolute():
        argv = [str(base / argv[0]), *argv[1:]]
    ints = {}
    for name, lo, hi in (("history_max_bytes", 1000, 1e12), ("dead_feed_ticks", 1, 100_000),
                         ("confirm_ticks", 1, 100_000)):
        value = reader.number(path + (name,), default=getattr(TickConfig, name), lo=lo, hi=hi)
        if value != int(value):
            raise reader.fail(path + (name,), f"expected a whole number, got {value:g}")
        ints[name] = int(value)
    fmt = reader.text(path + ("notify_format",), default="text")
    if fmt not in ("text", "json"):
        raise reader.fail(path + ("notify_format",), f"unknown format {fmt!r}", hint="use text or json")
    return TickConfig(notify_command=tuple(argv), notify_format=fmt,
                      notify_timeout_s=reader.number(path + ("notify_timeout_s",), default=30.0, lo=0.1, hi=3600),
                      confirm_min=reader.number(path + ("confirm_min",), default=TickConfig.confirm_min, lo=0, hi=1440),
                      **ints)


@dataclass(frozen=True)
class Site:
    """A validated site configuration."""

    name: str
    latitude_deg: float
    longitude_deg: float
    elevation_m: float
    time_zone: str
    dish_diameter_m: float
    feed: FeedLayout
    scan: ScanFigures
    astronomical: AstronomicalFigures
    thresholds: Thresholds
    calibrators: tuple[Calibrator, ...]
    references_path: Path | None = None
    rule_paths: tuple[Path, ...] = ()
    model_path: Path | None = None
    tick: TickConfig = field(default_factory=TickConfig)
    forecast: ForecastSettings = field(default_factory=ForecastSettings)
    source: str = "<built-in>"
    is_demo: bool = False
    extra: dict = field(default_factory=dict, compare=False)


_ANGLE_HMS = re.compile(r"^\s*([+-]?\d+)[h:\s]\s*(\d+)[m:\s]\s*(\d+(?:\.\d*)?)s?\s*$")
_ANGLE_DMS = re.compile(r"^\s*([+-]?)(\d+)[d°:\s]\s*(\d+)['′m:\s]\s*(\d+(?:\.\d*)?)(?:\"|″|s)?\s*$")


def parse_ra_deg(value: Any) -> float:
    """Right ascension as degrees from ``'12h29m06.7s'``, ``'12:29:06.7'`` or a number [deg]."""
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        ra = float(value)
    else:
        m = _ANGLE_HMS.match(str(value))
        if not m:
            raise ValueError(f"expected RA like '12h29m06.7s' or degrees, got {value!r}")
        h, mi, s = int(m.group(1)), int(m.group(2)), float(m.group(3))
        if not (0 <= h < 24 and 0 <= mi < 60 and 0 <= s < 60):
            raise ValueError(f"RA out of range: {value!r}")
        ra = 15.0 * (h + mi / 60 + s / 3600)
    if not 0 <= ra < 360:
        raise ValueError(f"RA must be in 0..360 deg, got {ra}")
    return ra


def parse_dec_deg(value: Any) -> float:
    """Declination as degrees from ``'+41d30m42.1s'``, ``'+41:30:42.1'`` or a number [deg]."""
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        dec = float(value)
    else:
        m = _ANGLE_DMS.match(str(value))
        if not m:
            raise ValueError(f"expected Dec like '+41d30m42.1s' or degrees, got {value!r}")
        sign = -1.0 if m.group(1) == "-" else 1.0
        d, mi, s = int(m.group(2)), int(m.group(3)), float(m.group(4))
        if not (mi < 60 and s < 60):
            raise ValueError(f"Dec out of range: {value!r}")
        dec = sign * (d + mi / 60 + s / 3600)
    if not -90 <= dec <= 90:
        raise ValueError(f"Dec must be in -90..+90 deg, got {dec}")
    return dec


class _Reader:
    """Walks the YAML data with key paths, turning every problem into a SiteError."""

    def __init__(self, data: dict, lines: dict, source: str) -> None:
        self.data, self.lines, self.source = data, lines, source

    def fail(self, path: tuple, message: str, hint: str | None = None) -> SiteError:
        line = None
        for n in range(len(path), -1, -1):
            if path[:n] in self.lines:
                line = self.lines[path[:n]]
                break
        dotted = ".".join(str(p) for p in path) or "<top>"
        return SiteError(message, source=self.source, line=line, field=dotted, hint=hint)

    def section(self, path: tuple, known: set[str], required: bool = False) -> dict:
        value = self.get_raw(path)
        if value is None:
            if required:
                raise self.fail(path, "missing section", hint=f"add '{path[-1]}:' with {sorted(known)}")
            return {}
        if not isinstance(value, dict):
            raise self.fail(path, f"expected a mapping, got {type(value).__name__}")
        for key in value:
            if key not in known:
                import difflib

                if clean_text(key) != str(key):
                    raise self.fail(path + (key,), "unknown key: it contains control characters or escape sequences",
                                    hint="retype the key; known keys: " + ", ".join(sorted(known)))
                close = difflib.get_close_matches(str(key), sorted(known), n=1)
                hint = f"did you mean '{close[0]}'?" if close else f"known keys: {', '.join(sorted(known))}"
                raise self.fail(path + (key,), "unknown key", hint=hint)
        return value

    def get_raw(self, path: tuple) -> Any:
        node: Any = self.data
        for key in path:
            if isinstance(node, dict) and key in node:
                node = node[key]
            elif isinstance(node, list) and isinstance(key, int) and key < len(node):
                node = node[key]
            else:
                return None
        return node

    def number(self, path: tuple, default: float | None = None, lo: float | None = None,
               hi: float | None = None, required: bool = False) -> float:
        value = self.get_raw(path)
        if value is None:
            if required or default is None:
                raise self.fail(path, "missing value", hint="add a number")
            return float(default)
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise self.fail(path, f"expected a number, got {value!r}", hint="write a plain number, e.g. 4.0")
        try:
            value = float(value)
        except OverflowError:
            raise self.fail(path, "number too large", hint="write a plain number, e.g. 4.0") from None
        if value != value:
            raise self.fail(path, "expected a number, got NaN")
        if (lo is not None and value < lo) or (hi is not None and value > hi):
            raise self.fail(path, f"{value:g} is outside {lo:g}..{hi:g}")
        return value

    def text(self, path: tuple, default: str | None = None, required: bool = False) -> str | None:
        value = self.get_raw(path)
        if value is None:
            if required:
                raise self.fail(path, "missing value", hint="add a text value")
            return default
        if not isinstance(value, str):
            raise self.fail(path, f"expected text, got {value!r}", hint="quote the value")
        return value

    def path_value(self, path: tuple, base: Path) -> Path | None:
        value = self.text(path)
        if value is None:
            return None
        p = Path(value).expanduser()
        return p if p.is_absolute() else (base / p)


def _figures(reader: _Reader, path: tuple, cls: type, bounds: dict[str, tuple[float, float]]):
    section = reader.section(path, set(bounds))
    values = {}
    for name, (lo, hi) in bounds.items():
        default = getattr(cls, name)
        values[name] = reader.number(path + (name,), default=default, lo=lo, hi=hi) if name in section else default
    return cls(**values)


TIME_UNITS = ("iso", "epoch_s", "epoch_ms")


def _time_zone(reader: _Reader, path: tuple, value: str | None) -> str | None:
    """An IANA time zone name, checked by loading it; a region folder such as ``America`` is refused."""
    if value is None:
        return None
    hint = "use an IANA name such as America/Denver or Europe/Madrid, or UTC"
    if not value or len(value) > 64 or any(not (ch.isalnum() or ch in "/_+-") for ch in value):
        raise reader.fail(path, f"unknown time zone {value!r}", hint=hint)
    try:
        ZoneInfo(value)
    except IsADirectoryError:
        raise reader.fail(path, f"{value!r} is a region, not a time zone",
                          hint=f"name a zone within it, e.g. {value}/<City>; {hint}") from None
    except (ZoneInfoNotFoundError, ValueError, OSError, UnicodeError):
        raise reader.fail(path, f"unknown time zone {value!r}", hint=hint) from None
    return value


def _time_unit(reader: _Reader) -> str | None:
    value = reader.text(("feed", "time_unit"))
    if value is not None and value not in TIME_UNITS:
        raise reader.fail(("feed", "time_unit"), f"unknown time unit {value!r}",
                          hint="use iso (ISO 8601 text), epoch_s (seconds since 1970) or epoch_ms (milliseconds)")
    return value


def parse_site(data: Any, lines: dict, source: str, base: Path, is_demo: bool = False) -> Site:
    """Validate parsed YAML ``data`` into a :class:`Site`."""
    if not isinstance(data, dict):
        raise SiteError("expected a mapping at the top of the site file", source=source, line=1,
                        hint="start with 'site:'")
    r = _Reader(data, lines, source)
    r.section((), {"site", "feed", "references", "rules", "model", "methods", "thresholds", "calibrators", "tick", "forecast"})
    r.section(("site",), {"name", "latitude_deg", "longitude_deg", "elevation_m", "time_zone", "dish_diameter_m"}, required=True)
    name = clean_text(r.text(("site", "name"), required=True))   # shown on terminals, pages and mail
    lat = r.number(("site", "latitude_deg"), lo=-90, hi=90, required=True)
    lon = r.number(("site", "longitude_deg"), lo=-180, hi=180, required=True)
    elev = r.number(("site", "elevation_m"), default=0.0, lo=-500, hi=9000)
    tz = _time_zone(r, ("site", "time_zone"), r.text(("site", "time_zone"), default="UTC"))
    dish = r.number(("site", "dish_diameter_m"), lo=1, hi=1000, required=True)

    feed_section = r.section(("feed",), {"path", "time_column", "time_zone", "time_unit", "columns",
                                         "max_feed_age_min", "max_gap_min"})
    columns = []
    col_section = feed_section.get("columns") or {}
    if not isinstance(col_section, dict):
        raise r.fail(("feed", "columns"), "expected a mapping of canonical name → {from, unit}")
    for canonical, spec in col_section.items():
        cpath = ("feed", "columns", canonical)
        if canonical not in CANONICAL_COLUMNS:
            import difflib

            close = difflib.get_close_matches(str(canonical), CANONICAL_COLUMNS, n=1)
            raise r.fail(cpath, "not a canonical column",
                         hint=f"did you mean '{close[0]}'?" if close else f"one of {', '.join(CANONICAL_COLUMNS)}")
        r.section(cpath, {"from", "unit"})
        src = r.text(cpath + ("from",), required=True)
        unit = r.text(cpath + ("unit",), default=CANONICAL_UNITS[canonical])
        try:
            units.convert(1.0, unit, CANONICAL_UNITS[canonical])
        except units.UnitError as exc:
            raise r.fail(cpath + ("unit",), str(exc), hint=f"use a unit convertible to {CANONICAL_UNITS[canonical]}") from None
        columns.append(ColumnMap(canonical, src, unit))
    feed = FeedLayout(
        path=r.path_value(("feed", "path"), base),
        time_column=r.text(("feed", "time_column"), default="time"),
        time_zone=_time_zone(r, ("feed", "time_zone"), r.text(("feed", "time_zone"))),
        columns=tuple(columns),
        max_feed_age_min=r.number(("feed", "max_feed_age_min"), default=15.0, lo=0.5, hi=1440),
        max_gap_min=r.number(("feed", "max_gap_min"), default=10.0, lo=0.5, hi=1440),
        time_unit=_time_unit(r),
    )

    r.section(("references",), {"path"})
    r.section(("model",), {"path"})
    r.section(("methods",), {"scan", "astronomical"})
    scan = _figures(r, ("methods", "scan"), ScanFigures, {
        "noise_um_at_calm": (0, 5000), "wind_term_um_per_ms2": (0, 1000),
        "reference_ageing_um_per_day": (0, 5000), "reference_mismatch_um_per_c": (0, 5000),
        "air_path_m": (0, 1000), "refraction_compensated_fraction": (0, 1), "mount_um_per_c": (0, 5000),
        "duration_min": (0.1, 1440)})
    astro = _figures(r, ("methods", "astronomical"), AstronomicalFigures, {
        "surface_rms_um": (0, 5000), "wind_term_um_per_ms2": (0, 1000),
        "thermal_drift_um_per_c": (0, 5000), "duration_min": (0.1, 1440), "uncorrected_surface_rms_um": (0, 100000),
        "min_calibrator_elevation_deg": (0, 90), "max_calibrator_elevation_deg": (0, 90)})
    if astro.min_calibrator_elevation_deg >= astro.max_calibrator_elevation_deg:
        raise r.fail(("methods", "astronomical", "max_calibrator_elevation_deg"),
                     "must be above min_calibrator_elevation_deg")
    thresholds = _figures(r, ("thresholds",), Thresholds, {
        "high_frequency_wind_limit_ms": (0, 100), "high_frequency_min_ghz": (0, 2000),
        "surface_requirement_fraction": (1, 1000),
        "min_ruze_efficiency": (0, 1), "laser_preference_efficiency": (0, 1),
        "min_p_usable": (0, 1), "fog_spread_c": (0, 20), "fog_rel_humidity_pct": (0, 100),
        "fog_visibility_m": (0, 100000), "precip_mm_h": (0, 1000),
        "pointing_error_arcsec_at_4ms": (0, 3600)})

    cal_list = r.get_raw(("calibrators",)) or []
    if not isinstance(cal_list, list):
        raise r.fail(("calibrators",), "expected a list of {name, ra, dec}")
    calibrators = []
    for i, _ in enumerate(cal_list):
        cpath = ("calibrators", i)
        r.section(cpath, {"name", "ra", "dec"}, required=True)
        cname = clean_text(r.text(cpath + ("name",), required=True))
        try:
            ra = parse_ra_deg(r.get_raw(cpath + ("ra",)))
        except ValueError as exc:
            raise r.fail(cpath + ("ra",), str(exc)) from None
        try:
            dec = parse_dec_deg(r.get_raw(cpath + ("dec",)))
        except ValueError as exc:
            raise r.fail(cpath + ("dec",), str(exc)) from None
        calibrators.append(Calibrator(cname, ra, dec))

    rule_list = r.get_raw(("rules",)) or []
    if not isinstance(rule_list, list) or not all(isinstance(x, str) for x in rule_list):
        raise r.fail(("rules",), "expected a list of rule file paths")
    rule_paths = tuple((base / Path(p)).resolve() if not Path(p).is_absolute() else Path(p) for p in rule_list)

    return Site(
        name=name, latitude_deg=lat, longitude_deg=lon, elevation_m=elev, time_zone=tz,
        dish_diameter_m=dish, feed=feed, scan=scan, astronomical=astro, thresholds=thresholds,
        calibrators=tuple(calibrators),
        references_path=r.path_value(("references", "path"), base),
        rule_paths=rule_paths,
        model_path=r.path_value(("model", "path"), base),
        tick=_tick_config(r, base),
        forecast=_forecast_settings(r, base),
        source=source, is_demo=is_demo,
    )


def load_site(path: Path | str | None = None) -> Site:
    """Load and validate a site file; ``None`` loads the bundled demo site."""
    is_demo = path is None
    path = demo_site_path() if path is None else Path(path)
    data, lines = load_yaml(path, SiteError)
    return parse_site(data, lines, str(path), path.resolve().parent, is_demo=is_demo)
