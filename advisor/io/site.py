"""Site configuration: where the dish is, how its feed is laid out, and its figures.

``load_site(path)`` reads a site YAML file, validates every key (errors name the key path and
line, and say what is expected) and returns a frozen :class:`Site`.  Paths inside the file
(feed, reference registry, attempt history, model, extra rule files) are resolved relative to the
file's folder.  ``demo_site_path()`` (from :mod:`advisor.io.bundled`) is the bundled invented demo site.

Two sections concern the site model:

* ``history: {path: attempts.csv}`` — the site's record of past attempts: ``advisor attempt add``
  appends to it, ``advisor train`` learns from it (see :mod:`advisor.io.history`);
* ``model: {path: model.json, terms: [...]}`` — the model file ``check`` applies, and the terms
  ``advisor train`` fits, each with the way it may push the odds (validated in
  :mod:`advisor.io.sitemodel`).
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from advisor.errors import SiteError
from advisor.io.bundled import demo_site_path, is_demo_file
from advisor.io.feedlayout import (  # noqa: F401 (re-exported)
    CANONICAL_COLUMNS,
    CANONICAL_UNITS,
    OPTIONAL_COLUMNS,
    REQUIRED_COLUMNS,
    TIME_UNITS,
    ColumnMap,
    FeedLayout,
    parse_feed_section,
    zone_value,
)
from advisor.io.sitefigures import (
    AstronomicalFigures,
    AtmosphereFigures,
    ScanFigures,
    SessionSettings,
    StructureFigures,
    Thresholds,
)
from advisor.io.sitemodel import ModelTermSetting, model_terms
from advisor.io.sitereader import Reader
from advisor.io.yamlio import load_yaml
from advisor.text import clean_text


@dataclass(frozen=True)
class Calibrator:
    """A bright compact source: name and J2000 position [deg]."""

    name: str
    ra_deg: float
    dec_deg: float


@dataclass(frozen=True)
class ForecastSettings:
    """``forecast:`` — how forecast rows are read and how far they are trusted (``advisor outlook``)."""

    path: Path | None = None  # forecast file read beside the site's own feed
    issue_time_column: str = "issued"  # ISO 8601 issue time of each forecast row
    horizon_h: float = 48.0  # rows further than this past their issue time are flagged
    wind_margin_pct: float = 0.0  # forecast wind and gusts raised by this before the rules [%]
    dew_point_margin_c: float = 0.0  # forecast dew point raised by this (capped at the air temperature) [°C]
    settling_min: float = 10.0  # added to a method's duration for the shortest window offered [min]
    # When the latest observation disagrees with the forecast beyond the margins, the forecast is
    # pulled towards the observation, the pull fading with this time constant [h].
    trust_observation_h: float = 2.0


def _forecast_settings(reader: Reader, base: Path) -> ForecastSettings:
    path = ("forecast",)
    reader.section(
        path,
        {
            "path",
            "issue_time_column",
            "horizon_h",
            "wind_margin_pct",
            "dew_point_margin_c",
            "settling_min",
            "trust_observation_h",
        },
    )
    d = ForecastSettings
    return ForecastSettings(
        path=reader.path_value(path + ("path",), base),
        issue_time_column=reader.text(path + ("issue_time_column",), default=d.issue_time_column)
        or d.issue_time_column,
        horizon_h=reader.number(path + ("horizon_h",), default=d.horizon_h, lo=1, hi=24 * 60),
        wind_margin_pct=reader.number(path + ("wind_margin_pct",), default=d.wind_margin_pct, lo=0, hi=200),
        dew_point_margin_c=reader.number(path + ("dew_point_margin_c",), default=d.dew_point_margin_c, lo=0, hi=10),
        settling_min=reader.number(path + ("settling_min",), default=d.settling_min, lo=0, hi=1440),
        trust_observation_h=reader.number(
            path + ("trust_observation_h",), default=d.trust_observation_h, lo=0.1, hi=48
        ),
    )


@dataclass(frozen=True)
class TickConfig:
    """``advisor tick`` settings: notify command (argv, never a shell line) and state-dir limits."""

    notify_command: tuple[str, ...] = ()
    notify_timeout_s: float = 30.0
    notify_format: str = "text"  # text | json, what the notify command reads on stdin
    history_max_bytes: int = 5_000_000  # history.jsonl is rotated to history.jsonl.1 above this
    dead_feed_ticks: int = 6  # consecutive undetermined ticks before "the feed looks dead"
    # A new call is announced once it has held for confirm_ticks ticks or confirm_min minutes
    # (whichever comes first); a call forced by a block (fog, rain, wind, bad data) at once.
    confirm_ticks: int = 3
    confirm_min: float = 15.0


def _tick_config(reader: Reader, base: Path) -> TickConfig:
    path = ("tick",)
    section = reader.section(
        path,
        {
            "notify_command",
            "notify_timeout_s",
            "notify_format",
            "history_max_bytes",
            "dead_feed_ticks",
            "confirm_ticks",
            "confirm_min",
        },
    )
    argv = section.get("notify_command") or []
    if not isinstance(argv, list) or not all(isinstance(a, str) and a for a in argv):
        raise reader.fail(
            path + ("notify_command",),
            f"expected a list of non-empty strings, got {argv!r}",
            hint="write the program and its arguments as a list, e.g. [/usr/local/bin/page-ops, "
            "--team, surface]; it is run directly, never through a shell",
        )
    if argv and "/" in argv[0] and not Path(argv[0]).expanduser().is_absolute():
        argv = [str(base / argv[0]), *argv[1:]]
    ints = {}
    for name, lo, hi in (
        ("history_max_bytes", 1000, 1e12),
        ("dead_feed_ticks", 1, 100_000),
        ("confirm_ticks", 1, 100_000),
    ):
        value = reader.number(path + (name,), default=getattr(TickConfig, name), lo=lo, hi=hi)
        if value != int(value):
            raise reader.fail(path + (name,), f"expected a whole number, got {value:g}")
        ints[name] = int(value)
    fmt = reader.text(path + ("notify_format",), default="text")
    if fmt not in ("text", "json"):
        raise reader.fail(path + ("notify_format",), f"unknown format {fmt!r}", hint="use text or json")
    return TickConfig(
        notify_command=tuple(argv),
        notify_format=fmt,
        notify_timeout_s=reader.number(path + ("notify_timeout_s",), default=30.0, lo=0.1, hi=3600),
        confirm_min=reader.number(path + ("confirm_min",), default=TickConfig.confirm_min, lo=0, hi=1440),
        **ints,
    )


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
    model_terms: tuple[ModelTermSetting, ...] = ()  # empty: training's default terms
    history_path: Path | None = None  # the site's record of past attempts
    tick: TickConfig = field(default_factory=TickConfig)
    forecast: ForecastSettings = field(default_factory=ForecastSettings)
    structure: StructureFigures = field(default_factory=StructureFigures)
    atmosphere: AtmosphereFigures = field(default_factory=AtmosphereFigures)
    session: SessionSettings = field(default_factory=SessionSettings)
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


def _figures(reader: Reader, path: tuple, cls: type, bounds: dict[str, tuple[float, float]]):
    section = reader.section(path, set(bounds))
    values = {}
    for name, (lo, hi) in bounds.items():
        default = getattr(cls, name)
        values[name] = reader.number(path + (name,), default=default, lo=lo, hi=hi) if name in section else default
    return cls(**values)


def _refuse_todos(reader: Reader, node: Any, path: tuple) -> None:
    """A value still saying TODO (a draft of ``advisor site new``) is refused, naming its key."""
    if isinstance(node, dict):
        for key, value in node.items():
            _refuse_todos(reader, value, path + (key,))
    elif isinstance(node, list):
        for i, value in enumerate(node):
            _refuse_todos(reader, value, path + (i,))
    elif isinstance(node, str) and node.strip().upper() == "TODO":
        raise reader.fail(path, "still says TODO", hint="fill in what the comment beside it asks for")


def parse_site(data: Any, lines: dict, source: str, base: Path, is_demo: bool = False) -> Site:
    """Validate parsed YAML ``data`` into a :class:`Site`."""
    if not isinstance(data, dict):
        raise SiteError(
            "expected a mapping at the top of the site file", source=source, line=1, hint="start with 'site:'"
        )
    r = Reader(data, lines, source)
    _refuse_todos(r, data, ())
    r.section(
        (),
        {
            "site",
            "feed",
            "references",
            "rules",
            "model",
            "history",
            "methods",
            "thresholds",
            "calibrators",
            "tick",
            "forecast",
            "atmosphere",
            "session",
            "structure",
        },
    )
    r.section(
        ("site",),
        {"name", "latitude_deg", "longitude_deg", "elevation_m", "time_zone", "dish_diameter_m"},
        required=True,
    )
    name = clean_text(r.text(("site", "name"), required=True))  # shown on terminals, pages and mail
    lat = r.number(("site", "latitude_deg"), lo=-90, hi=90, required=True)
    lon = r.number(("site", "longitude_deg"), lo=-180, hi=180, required=True)
    elev = r.number(("site", "elevation_m"), default=0.0, lo=-500, hi=9000)
    tz = (
        zone_value(
            r, ("site", "time_zone"), r.text(("site", "time_zone"), default="UTC"), allow_fractional_offset=False
        )
        or "UTC"
    )
    dish = r.number(("site", "dish_diameter_m"), lo=1, hi=1000, required=True)

    feed = parse_feed_section(r, base)

    r.section(("references",), {"path"})
    r.section(("model",), {"path", "terms"})
    r.section(("history",), {"path"})
    r.section(("methods",), {"scan", "astronomical"})
    scan = _figures(
        r,
        ("methods", "scan"),
        ScanFigures,
        {
            "noise_um_at_calm": (0, 5000),
            "wind_term_um_per_ms2": (0, 1000),
            "reference_ageing_um_per_day": (0, 5000),
            "reference_mismatch_um_per_c": (0, 5000),
            "air_path_m": (0, 1000),
            "refraction_compensated_fraction": (0, 1),
            "mount_um_per_c": (0, 5000),
            "duration_min": (0.1, 1440),
        },
    )
    astro = _figures(
        r,
        ("methods", "astronomical"),
        AstronomicalFigures,
        {
            "surface_rms_um": (0, 5000),
            "wind_term_um_per_ms2": (0, 1000),
            "thermal_drift_um_per_c": (0, 5000),
            "duration_min": (0.1, 1440),
            "uncorrected_surface_rms_um": (0, 100000),
            "min_calibrator_elevation_deg": (0, 90),
            "max_calibrator_elevation_deg": (0, 90),
            "sun_avoidance_deg": (0, 90),
            "gravity_sin_um": (-5000, 5000),
            "gravity_cos_um": (-5000, 5000),
        },
    )
    if astro.min_calibrator_elevation_deg >= astro.max_calibrator_elevation_deg:
        raise r.fail(
            ("methods", "astronomical", "max_calibrator_elevation_deg"), "must be above min_calibrator_elevation_deg"
        )
    atmosphere = _figures(
        r,
        ("atmosphere",),
        AtmosphereFigures,
        {
            "water_scale_height_km": (0.1, 10),
            "reference_pwv_mm": (0.1, 100),
            "reference_air_temp_c": (-60, 40),
            "receiver_temp_k": (1, 5000),
        },
    )
    session = _figures(r, ("session",), SessionSettings, {"elevation_deg": (5, 90)})
    thresholds = _figures(
        r,
        ("thresholds",),
        Thresholds,
        {
            "high_frequency_wind_limit_ms": (0, 100),
            "high_frequency_min_ghz": (0, 2000),
            "surface_requirement_fraction": (1, 1000),
            "min_ruze_efficiency": (0, 1),
            "laser_preference_efficiency": (0, 1),
            "min_p_usable": (0, 1),
            "fog_spread_c": (0, 20),
            "fog_rel_humidity_pct": (0, 100),
            "fog_visibility_m": (0, 100000),
            "precip_mm_h": (0, 1000),
            "pointing_error_arcsec_at_4ms": (0, 3600),
            "session_hours": (0, 24 * 7),
        },
    )
    structure = _figures(
        r,
        ("structure",),
        StructureFigures,
        {
            "drift_um_per_c": (0, 5000),
            "time_constant_h": (0.05, 100),
            "sun_heating_c_per_kwm2": (0, 100),
            "max_efficiency_loss": (0.001, 0.9),
        },
    )

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
        calibrators.append(Calibrator(str(cname), ra, dec))

    rule_list = r.get_raw(("rules",)) or []
    if not isinstance(rule_list, list) or not all(isinstance(x, str) for x in rule_list):
        raise r.fail(("rules",), "expected a list of rule file paths")
    rule_paths = tuple((base / Path(p)).resolve() if not Path(p).is_absolute() else Path(p) for p in rule_list)

    return Site(
        name=str(name),
        latitude_deg=lat,
        longitude_deg=lon,
        elevation_m=elev,
        time_zone=tz,
        dish_diameter_m=dish,
        feed=feed,
        scan=scan,
        astronomical=astro,
        thresholds=thresholds,
        calibrators=tuple(calibrators),
        references_path=r.path_value(("references", "path"), base),
        rule_paths=rule_paths,
        model_path=r.path_value(("model", "path"), base),
        model_terms=model_terms(r),
        history_path=r.path_value(("history", "path"), base),
        tick=_tick_config(r, base),
        forecast=_forecast_settings(r, base),
        structure=structure,
        atmosphere=atmosphere,
        session=session,
        source=source,
        is_demo=is_demo,
    )


def load_site(path: Path | str | None = None, read_yaml=load_yaml) -> Site:
    """Load and validate a site file; ``None`` loads the bundled demo site.

    ``read_yaml`` reads and parses it (``load_yaml``, or the cached
    :func:`advisor.io.yamlcache.load_yaml_cached`, which gives the same).
    """
    path = demo_site_path() if path is None else Path(path)
    is_demo = is_demo_file(path)
    data, lines = read_yaml(path, SiteError)
    return parse_site(data, lines, str(path), path.resolve().parent, is_demo=is_demo)
