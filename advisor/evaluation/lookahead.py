"""What ``check`` and ``tick`` say about the hours ahead: how long a correction holds, until when a
postpone lasts, and whether the forecast still agrees with the mast.

    ahead = look_ahead(frame, at_utc, call, next_window, site, forecast_source)
    ahead.reasons      # info reasons added to the call
    ahead.doc          # the ``look_ahead`` object of ``check --json``

Pure: the frame is the feed (and the site's forecast rows, when it names a forecast file) as
the command read it; ``next_window`` is :func:`advisor.evaluation.outlook.next_windows_after`'s.
"""

from __future__ import annotations

from dataclasses import dataclass
from zoneinfo import ZoneInfo

import pandas as pd

from advisor.decision import UNREACHABLE_BLOCK, Call, Reason
from advisor.evaluation.decay import correction_holds, holds_text
from advisor.evaluation.forecastcheck import compare_with_forecast
from advisor.io.site import Site
from advisor.vocabulary import METHOD_LABEL, METHODS

__all__ = ["LookAhead", "look_ahead", "postpone_until"]


@dataclass(frozen=True)
class LookAhead:
    reasons: tuple[Reason, ...]
    doc: dict


def _local(ts: pd.Timestamp, site: Site, with_day: bool = False) -> str:
    local = pd.Timestamp(ts).tz_convert(ZoneInfo(site.time_zone))
    return f"{local:%d %b %H:%M %Z}" if with_day else f"{local:%H:%M %Z}"


def postpone_until(
    next_window: dict | None, rows_end_utc: pd.Timestamp | None, at_utc: pd.Timestamp, site: Site
) -> tuple[str, dict]:
    """The sentence and JSON fields saying until when a postpone lasts.

    ``rows_end_utc`` is the time of the last row ahead (forecast or, in hindsight, observed).
    ``until`` is ``window`` (the rows ahead open one: ``postpone_until_utc`` is its start),
    ``beyond_forecast`` (none before they end) or ``no_forecast`` (no rows ahead).
    """
    if not next_window or rows_end_utc is None or rows_end_utc <= at_utc:
        return (
            "Until when cannot be said: there are no forecast rows after now (name a forecast file in the "
            "site's forecast.path).",
            {"until": "no_forecast", "postpone_until_utc": None},
        )
    starts = {m: pd.Timestamp(w["start_utc"]) for m, w in next_window.items() if w}
    if not starts:
        return (
            f"The forecast, which runs to {_local(rows_end_utc, site, with_day=True)}, opens no window for "
            "either method: the postpone lasts at least that long.",
            {"until": "beyond_forecast", "postpone_until_utc": None},
        )
    method = min(starts, key=lambda m: starts[m])
    w = next_window[method]
    start, end = starts[method], pd.Timestamp(w["end_utc"])
    day = start.tz_convert(ZoneInfo(site.time_zone)).date() != at_utc.tz_convert(ZoneInfo(site.time_zone)).date()
    text = (
        f"Postpone until about {_local(start, site, with_day=day)}: the forecast opens a "
        f"{METHOD_LABEL[method]} window then ({_local(start, site)}–{_local(end, site)})."
    )
    return text, {"until": "window", "postpone_until_utc": start.strftime("%Y-%m-%dT%H:%M:%SZ"), "method": method}


def look_ahead(
    frame: pd.DataFrame,
    at_utc: pd.Timestamp,
    call: Call,
    next_window: dict | None,
    site: Site,
    forecast_source: str | None = None,
) -> LookAhead:
    """Validity of each correction, until when a postpone lasts, and the forecast check."""
    at_utc = pd.Timestamp(at_utc).tz_convert("UTC")
    reasons: list[Reason] = []
    is_fc = (frame["kind"] == "forecast").to_numpy()
    forecast_end = pd.Timestamp(frame.loc[is_fc, "time"].max()) if is_fc.any() else None
    doc: dict = {
        "session_hours": site.thresholds.session_hours,
        "forecast_source": forecast_source,
        "forecast_end_utc": forecast_end.strftime("%Y-%m-%dT%H:%M:%SZ") if forecast_end is not None else None,
    }

    disagreement = compare_with_forecast(frame, site) if is_fc.any() else None
    doc["forecast_disagreement"] = disagreement.as_dict() if disagreement else None
    if disagreement is not None:
        reasons.append(Reason("forecast.disagrees", "both", "info", disagreement.text()))

    holds = None
    if call.verdict in (*METHODS, "postpone") and call.features.get("data_ok"):
        holds = correction_holds(frame, at_utc, call.candidates, call.features, site)
        if call.verdict in METHODS and holds.get(call.verdict):
            reasons.append(
                Reason(
                    f"holds.{call.verdict}",
                    call.verdict,
                    "info",
                    holds_text(call.verdict, holds[call.verdict], call.features, site),
                )
            )
    doc["holds"] = holds

    doc["postpone"] = None
    unreachable = all(UNREACHABLE_BLOCK in call.candidates[m]["blocked_by"] for m in METHODS)
    if call.verdict == "postpone" and not unreachable:
        rows_end = pd.Timestamp(frame["time"].max()) if len(frame) else None
        text, fields = postpone_until(next_window, rows_end, at_utc, site)
        reasons.append(Reason("postpone.until", "both", "info", text))
        doc["postpone"] = fields
    return LookAhead(tuple(reasons), doc)
