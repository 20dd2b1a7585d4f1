"""What a feed says about itself: time-zone sanity from its irradiance, and the inspection report.

    zone = check_time_zone(frame, latitude_deg, longitude_deg, time_label)   # ZoneCheck
    report = inspect_feed(feed, layout, site)                                # FeedReport (advisor feed inspect)

Where a feed carries global irradiance, its daylight must match the sun computed for the site
at its times: irradiance above :data:`SUNLIT_WM2` while the sun is more than
:data:`SUN_DOWN_DEG` below the horizon (or nothing while the sun is high) means the times are
off — usually a wrong time zone.  The check finds the shift of the times that fits best, so the
message can say which zone would fit.  Pure: frames in, dataclasses out.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from advisor.io.feed import Feed
from advisor.io.feedlayout import CANONICAL_COLUMNS, CANONICAL_UNITS, FeedLayout, zone_label
from advisor.physics.sun import solar_position

__all__ = ["SUNLIT_WM2", "SUN_DOWN_DEG", "ZoneCheck", "check_time_zone", "FeedReport", "ColumnReport", "inspect_feed"]

#: Irradiance that needs the sun up [W/m²]: well above a sensor's night offset and twilight.
SUNLIT_WM2 = 50.0
#: The sun this far below the horizon gives no irradiance above SUNLIT_WM2 [deg] (twilight and
#: the mid-period of an hourly mean are allowed for).
SUN_DOWN_DEG = -3.0
#: ... and this high above it gives more than DARK_WM2 even under thick cloud [deg] (common practice).
SUN_HIGH_DEG = 25.0
DARK_WM2 = 5.0
#: Fewest sunlit samples the check needs before it judges anything.
MIN_SUNLIT_ROWS = 24
#: Shares of contradicting samples: a warning above WARN_FRACTION, a refusal above
#: REFUSE_FRACTION when another shift of the times fits far better (definitions of this tool).
WARN_FRACTION, REFUSE_FRACTION = 0.02, 0.10
MAX_CHECKED_ROWS = 20_000
#: An hour's shift that raises the correlation of irradiance and sun by more than this is reported.
HOUR_FIT_MARGIN = 0.01
#: Shifts tried [h]: half hours from -12 h to +12 h (the sun's day repeats beyond).
SHIFTS_H = np.arange(-24, 25) / 2.0


@dataclass(frozen=True)
class ZoneCheck:
    """The feed's irradiance against the computed sun."""

    status: str  # "ok", "unchecked", "warn", "refuse"
    sunlit_rows: int = 0  # samples with irradiance above SUNLIT_WM2 (among those checked)
    contradicting: int = 0  # sunlit with the sun down, or dark with the sun high
    checked_rows: int = 0
    best_shift_h: float = 0.0  # the shift of the times that fits best (0: as read)
    best_contradicting: int = 0
    message: str = ""

    @property
    def fraction(self) -> float:
        return self.contradicting / self.checked_rows if self.checked_rows else 0.0


def _contradictions(
    times: pd.DatetimeIndex, solar: np.ndarray, lat: float, lon: float
) -> tuple[np.ndarray, np.ndarray, float]:
    """(sunlit with the sun down, dark with the sun high, correlation of the irradiance with the
    sine of the sun's elevation where positive)."""
    el, _ = solar_position(times, lat, lon)
    el = np.asarray(el, dtype=float)
    height = np.maximum(np.sin(np.radians(el)), 0.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        fit = float(np.corrcoef(solar, height)[0, 1]) if np.std(height) > 0 and np.std(solar) > 0 else 0.0
    return (solar > SUNLIT_WM2) & (el < SUN_DOWN_DEG), (solar < DARK_WM2) & (el > SUN_HIGH_DEG), fit


def _shift_text(hours: float) -> str:
    sign = "+" if hours >= 0 else "-"
    h, m = divmod(int(round(abs(hours) * 60)), 60)
    return f"{sign}{h:02d}:{m:02d}"


def check_time_zone(
    frame: pd.DataFrame,
    latitude_deg: float,
    longitude_deg: float,
    time_label: str = "instant",
    declared_zone: str | None = None,
) -> ZoneCheck:
    """Compare the feed's irradiance (``solar_wm2``) with the sun computed at its times.

    Stamps that end a period (``time_label`` end, or start already moved to the end) are
    compared at the middle of their period (half the median interval earlier).  Observed rows
    only; at most :data:`MAX_CHECKED_ROWS`, evenly spread.
    """
    if "solar_wm2" not in frame:
        return ZoneCheck("unchecked", message="no irradiance in the feed: the time zone cannot be checked")
    rows = frame[(frame["kind"] == "observed") & np.isfinite(frame["solar_wm2"].to_numpy(dtype=float))]
    if len(rows) > MAX_CHECKED_ROWS:
        rows = rows.iloc[np.linspace(0, len(rows) - 1, MAX_CHECKED_ROWS).astype(int)]
    times = pd.DatetimeIndex(rows["time"])
    if time_label in ("end", "start") and len(times) > 1:
        step = np.median(np.diff(np.unique(times.asi8)))
        times = times - pd.Timedelta(int(step // 2), unit="ns")
    solar = rows["solar_wm2"].to_numpy(dtype=float)
    sunlit = int((solar > SUNLIT_WM2).sum())
    if sunlit < MIN_SUNLIT_ROWS:
        return ZoneCheck(
            "unchecked",
            sunlit_rows=sunlit,
            checked_rows=len(rows),
            message=f"only {sunlit} samples with irradiance above {SUNLIT_WM2:.0f} W/m²: "
            "too few to check the time zone",
        )
    dark_lit, lit_dark, fit_0 = _contradictions(times, solar, latitude_deg, longitude_deg)
    bad = int((dark_lit | lit_dark).sum())
    offset = _declared_offset_h(declared_zone, times) if declared_zone is not None else None
    if bad / len(rows) <= WARN_FRACTION:
        # Few contradictions: an hour off (daylight saving) still shows in how well the sun follows.
        near = {
            shift: _contradictions(times + pd.Timedelta(hours=shift), solar, latitude_deg, longitude_deg)[2]
            for shift in (-1.0, 1.0)
        }
        shift = max(near, key=lambda k: near[k])
        if near[shift] - fit_0 <= HOUR_FIT_MARGIN:
            return ZoneCheck("ok", sunlit_rows=sunlit, contradicting=bad, checked_rows=len(rows))
        return ZoneCheck(
            "warn",
            sunlit,
            bad,
            len(rows),
            shift,
            bad,
            f"the irradiance follows the computed sun better with times {_moved(shift)} "
            f"(correlation {near[shift]:.2f} against {fit_0:.2f}){_zone_text(offset, shift, declared_zone)}",
        )
    counts, fits = [], []
    for shift in SHIFTS_H:
        a, b, fit = _contradictions(times + pd.Timedelta(hours=float(shift)), solar, latitude_deg, longitude_deg)
        counts.append(int((a | b).sum()))
        fits.append(fit)
    best = int(np.argmax(fits))  # the shift whose sun follows the irradiance best
    best_shift, best_bad = float(SHIFTS_H[best]), counts[best]
    if offset is not None:  # a day apart the sun is the same: keep the offset within -12..+14 h
        while offset - best_shift > 14:
            best_shift += 24
        while offset - best_shift < -12:
            best_shift -= 24
    fits_better = best_shift != 0.0 and best_bad * 5 <= bad
    status = "refuse" if bad / len(rows) > REFUSE_FRACTION and fits_better else "warn"
    what = (
        f"{int(dark_lit.sum())} samples with irradiance above {SUNLIT_WM2:.0f} W/m² while the computed sun is "
        f"below the horizon and {int(lit_dark.sum())} dark ones with the sun above {SUN_HIGH_DEG:.0f}° "
        f"({bad} of {len(rows)} checked)"
    )
    if fits_better:
        fix = (
            f"times {_moved(best_shift)} fit the sun ({best_bad} contradictions)"
            f"{_zone_text(offset, best_shift, declared_zone)}"
        )
    else:
        fix = "no shift of the times fits better: check the irradiance column and the site's position"
    return ZoneCheck(status, sunlit, bad, len(rows), best_shift, best_bad, f"{what}; {fix}")


def _moved(shift_h: float) -> str:
    return f"{abs(shift_h):g} h {'later' if shift_h > 0 else 'earlier'}"


def _zone_text(offset_h: float | None, shift_h: float, declared_zone: str | None) -> str:
    if offset_h is None:
        return ": the logger's clock or zone is off"
    return f": the stamps look like UTC{_shift_text(offset_h - shift_h)}, not {zone_label(declared_zone)}"


def _declared_offset_h(zone: str, times: pd.DatetimeIndex) -> float | None:
    """The declared zone's UTC offset at the feed's median time [h]."""
    from advisor.io.feedtimes import zone_object

    try:
        t = pd.Timestamp(times[len(times) // 2]).tz_convert(zone_object(zone))
    except (TypeError, ValueError, KeyError):
        return None
    offset = t.utcoffset()
    return None if offset is None else offset.total_seconds() / 3600.0


# --------------------------------------------------------------------------- the inspection report


@dataclass(frozen=True)
class ColumnReport:
    """One canonical input as the advisor read it."""

    canonical: str
    source: str  # logger column (or the canonical name itself)
    unit: str  # unit read in
    present: int  # rows with a usable value
    coded: int  # rows holding a missing-value code
    implausible: int  # rows dropped as implausible (range or step)
    dropouts: int  # rows where the sensor had just fallen silent (optional inputs)
    low: float | None
    high: float | None
    note: str = ""


@dataclass(frozen=True)
class FeedReport:
    """What the advisor makes of a feed file (``advisor feed inspect``)."""

    source: str
    rows: int
    first_utc: pd.Timestamp | None
    last_utc: pd.Timestamp | None
    cadence_min: float | None
    gaps: int
    longest_gap_min: float | None
    gap_limit_min: float
    age_limit_min: float
    columns: tuple[ColumnReport, ...]
    absent: tuple[str, ...]  # canonical inputs the feed does not carry
    coded_cells: dict = field(default_factory=dict)
    rows_with_codes: int = 0
    duplicates: int = 0
    out_of_order: int = 0
    partial_last_line: bool = False
    gust_estimated: bool = False
    zone: ZoneCheck | None = None
    time_field: str = "time"


def inspect_feed(
    feed: Feed, layout: FeedLayout, latitude_deg: float | None = None, longitude_deg: float | None = None
) -> FeedReport:
    """The inspection report of a read feed (the site's position enables the time-zone check)."""
    frame = feed.frame
    observed = frame[frame["kind"] == "observed"]
    q = feed.quality
    dt_min = np.diff(pd.DatetimeIndex(observed["time"]).asi8) / 6e10
    mapping = {c.canonical: c for c in layout.columns}
    coded_bits = observed["q_bits_coded"].to_numpy(dtype=np.int64)
    bad_bits = observed["q_bits_implausible"].to_numpy(dtype=np.int64)
    drop_bits = observed["q_bits_dropout"].to_numpy(dtype=np.int64)
    columns, absent = [], []
    for k, name in enumerate(CANONICAL_COLUMNS):
        spec = mapping.get(name)
        derived = name == "dew_point_c" and name not in q.columns_read
        if name not in frame or (name not in q.columns_read and not derived and name != "wind_gust_ms"):
            absent.append(name)
            continue
        values = observed[name].to_numpy(dtype=float)
        finite = values[np.isfinite(values)]
        note = ""
        source = spec.source_column if spec else name
        unit = spec.unit if spec else CANONICAL_UNITS[name]
        if name == "wind_gust_ms" and layout.gust_factor is not None:
            source, unit, note = "(none)", "m/s", f"estimated: {layout.gust_factor:g} × mean wind"
        elif derived:
            source, unit, note = "(none)", "degC", "derived from air temperature and humidity"
        if spec is not None and spec.is_depth:
            hours = f"{spec.over_hours:g} h" if spec.over_hours is not None else f"hours from '{spec.over_hours_from}'"
            note = f"depth over {hours}, read as mm/h"
        columns.append(
            ColumnReport(
                name,
                source,
                unit,
                int(np.isfinite(values).sum()),
                int(((coded_bits >> k) & 1).sum()),
                int(((bad_bits >> k) & 1).sum()),
                int(((drop_bits >> k) & 1).sum()),
                float(finite.min()) if len(finite) else None,
                float(finite.max()) if len(finite) else None,
                note,
            )
        )
    zone = None
    if latitude_deg is not None and longitude_deg is not None:
        zone = check_time_zone(frame, latitude_deg, longitude_deg, layout.time_label, layout.time_zone)
    gap_limit = float(layout.gap_limit_min(q.cadence_min))
    return FeedReport(
        source=feed.source,
        rows=q.n_rows,
        first_utc=q.first_time_utc,
        last_utc=q.last_time_utc,
        cadence_min=q.cadence_min,
        gaps=q.n_gaps,
        longest_gap_min=float(dt_min.max()) if len(dt_min) else None,
        gap_limit_min=gap_limit,
        age_limit_min=float(layout.age_limit_min(q.cadence_min)),
        columns=tuple(columns),
        absent=tuple(absent),
        coded_cells=dict(q.coded_cells),
        rows_with_codes=q.rows_with_codes,
        duplicates=q.n_duplicates,
        out_of_order=q.n_out_of_order,
        partial_last_line=q.partial_last_line,
        gust_estimated=q.gust_estimated,
        zone=zone,
        time_field=layout.time_field,
    )


# --------------------------------------------------------------------------- one sample's problems


def sample_problems(frame: pd.DataFrame, row: int, layout: FeedLayout) -> list[str]:
    """What is wrong with the feed's row ``row``, naming the logger column and the value.

    ``"'RHum (%)' = 140 % is outside the plausible 0..100.5 %"``, ``"'RHum (%)' changed from
    61 % to 99 % in 1 min (limit 10 %/min)"``, ``"'Wspd (m/s)' holds the missing-value code"``,
    ``"no value in 'RHum (%)'"``.  Values are shown in canonical units.
    """
    from advisor.catalogue import PLAUSIBLE_RANGE, unit_text
    from advisor.io.feedlayout import REQUIRED_COLUMNS

    if row < 0 or row >= len(frame):
        return []
    r = frame.iloc[row]
    out = []
    limits = layout.step_limits()
    for k, name in enumerate(CANONICAL_COLUMNS):
        column = f"'{layout.source_of(name)}'"
        unit = unit_text(CANONICAL_UNITS[name])
        if int(r.get("q_bits_implausible", 0)) >> k & 1:
            value = float(r.get(f"raw_{name}", np.nan))
            lo, hi = PLAUSIBLE_RANGE.get(name, (-np.inf, np.inf))
            if np.isfinite(value) and not lo <= value <= hi:
                out.append(f"{column} = {value:g} {unit} is outside the plausible {lo:g}..{hi:g} {unit}")
            elif name == "wind_gust_ms" and np.isfinite(value) and value < float(r.get("wind_mean_ms", np.nan)):
                out.append(f"{column} = {value:g} {unit} is below the mean wind")
            else:
                before = frame.iloc[row - 1] if row > 0 else None
                prev = np.nan if before is None else float(before.get(f"raw_{name}", np.nan))
                if before is not None and not np.isfinite(prev):
                    prev = float(before.get(name, np.nan))
                minutes = (r["time"] - before["time"]).total_seconds() / 60 if before is not None else np.nan
                step = (
                    f"changed from {prev:g} to {value:g} {unit} in {minutes:g} min"
                    if np.isfinite(prev)
                    else f"= {value:g} {unit} jumped"
                )
                limit = f" (limit {limits[name]:g} {unit}/min)" if name in limits else ""
                out.append(f"{column} {step}{limit}")
        elif int(r.get("q_bits_coded", 0)) >> k & 1 and name in REQUIRED_COLUMNS:
            out.append(f"{column} holds a missing-value code")
        elif name in REQUIRED_COLUMNS and name in frame and not np.isfinite(float(r[name])):
            out.append(f"no value in {column}")
    return out
