"""The pieces of one :class:`advisor.decision.Call` that the panel and the plain text share.

    when_text(call, ctx)          '2026-12-01 03:00 UTC (20:00 MST local)'
    candidate_rows(call)          one tuple per method, in CANDIDATE_HEADERS order
    ordered_reasons(call)         reasons, most severe first
    key_features(features)        (label, text) of the catalogue's key features
    next_window_text(nw, tz)      'Next window: laser scan 10:29–11:44 MST (...)'

Labels, formats and units come from :mod:`advisor.catalogue` and :mod:`advisor.vocabulary`.
"""

from __future__ import annotations

import math
from zoneinfo import ZoneInfo

import pandas as pd

from advisor.catalogue import CATALOGUE, KEY_FEATURES
from advisor.decision import Call, Reason
from advisor.views.context import Context
from advisor.vocabulary import METHOD_LABEL

CANDIDATE_HEADERS = ("method", "feasible", "surface rms", "Ruze η", "p usable", "takes", "blocked by")
#: Columns of the candidate table that hold numbers (right-aligned).
NUMERIC_HEADERS = ("surface rms", "Ruze η", "p usable", "takes")
#: The reason effects (vocabulary.REASON_EFFECTS), most severe first.
SEVERITY = ("block", "add_error", "warn", "info")
_EFFECT_ORDER = {effect: k for k, effect in enumerate(SEVERITY)}


def when_text(call: Call, ctx: Context) -> str:
    """The evaluation time in UTC and in the site's local time."""
    local = call.time_utc.tz_convert(ZoneInfo(ctx.time_zone))
    return f"{call.time_utc:%Y-%m-%d %H:%M} UTC ({local:%H:%M %Z} local)"


def _window_text(minutes) -> str | None:
    """'1-h', '3-h', '30-min' for a statistic's window; None for the catalogue's own 10 minutes."""
    if minutes is None or not math.isfinite(minutes) or abs(minutes - 10.0) < 1e-9:
        return None
    if minutes >= 60 and abs(minutes / 60 - round(minutes / 60)) < 1e-9:
        return f"{minutes / 60:g}-h"
    return f"{minutes:g}-min"


def feature_label(name: str, features: dict) -> str:
    """A feature's screen label for this call: the wind statistics say the window they were
    computed over ("wind (1-h mean)" on hourly data) and estimated gusts say so."""
    label = CATALOGUE[name].label
    if name == "wind_gust_ms" and features.get("gust_estimated"):
        return "gusts (estimated)"
    window = _window_text(features.get("wind_window_min"))
    if window and name == "wind_mean_ms":
        return f"wind ({window} mean)"
    if window and name == "wind_gust_ms":
        return f"gusts ({window} max)"
    rate_window = features.get("temp_rate_window_min")
    if name == "air_temp_rate_c_per_h" and rate_window is not None and math.isfinite(rate_window) \
            and rate_window > 60:
        return f"temperature rate (over {_window_text(rate_window)})"
    return label


def key_features(features: dict) -> list[tuple[str, str]]:
    """(label, text) pairs of the key conditions; hours since sunrise by day, since sunset by night."""
    rows = []
    for spec in KEY_FEATURES:
        if spec.name == "hours_since_sunset" and not features.get("is_night", True):
            spec = CATALOGUE["hours_since_sunrise"]
        rows.append((feature_label(spec.name, features), feature_text(spec.name, spec.display_format, features)))
    return rows


def feature_text(name: str, fmt: str, features: dict) -> str:
    """One feature's value in its display format; ``n/a`` when missing."""
    value = features.get(name)
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return "n/a"
    if name == "visibility_m" and value >= 10_000:
        return f"{value / 1000:.0f} km"
    if name == "calibrator_minutes_up" and value >= 1440:
        return "all day (circumpolar)"
    text = fmt.format(value)
    number = text.split()[0].rstrip("°")
    if number.startswith("-") and number.lstrip("-+").replace(".", "").strip("0") == "":
        text = text[1:]  # no "-0.0 °C"
    return text


def candidate_rows(call: Call):
    """One row of text per method: label, feasible, surface rms, Ruze η, p usable, duration, blocked by."""
    for method, label in METHOD_LABEL.items():
        c = call.candidates[method]
        rms = "n/a" if c["surface_rms_um"] is None else f"{c['surface_rms_um']:.0f} µm"
        eta = "n/a" if c["ruze_efficiency"] is None else f"{c['ruze_efficiency']:.2f}"
        p = "—" if c["p_usable"] is None else f"{c['p_usable']:.0%}"
        yield (label, "yes" if c["feasible"] else "no", rms, eta, p, f"{c['duration_min']:.0f} min",
               ", ".join(c["blocked_by"]) or "—")


def ordered_reasons(call: Call) -> list[Reason]:
    """Reasons, most severe first (stable within one severity)."""
    return sorted(call.reasons, key=lambda r: _EFFECT_ORDER.get(r.effect, len(_EFFECT_ORDER)))


def next_window_text(next_window: dict, time_zone: str) -> str:
    """'Next window: laser scan 10:29–11:44 MST (17:29–18:44 UTC, 75 min); astronomical ...'."""
    zone = ZoneInfo(time_zone)
    bits = []
    for method, w in next_window.items():
        label = METHOD_LABEL[method]
        if not w:
            bits.append(f"{label}: none in the forecast")
            continue
        start, end = (pd.Timestamp(w[k]) for k in ("start_utc", "end_utc"))
        ls, le = start.tz_convert(zone), end.tz_convert(zone)
        day = "" if ls.date() == le.date() else f" {le:%d %b}"
        bits.append(f"{label} {ls:%d %b %H:%M}–{le:%H:%M}{day} {le:%Z} ({start:%H:%M}–{end:%H:%M} UTC, "
                    f"{w.get('length_min', (end - start).total_seconds() / 60):.0f} min)")
    return "Next window: " + "; ".join(bits)
