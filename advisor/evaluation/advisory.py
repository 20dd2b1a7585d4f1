"""What a scheduled run (``advisor tick``) has to say: what changed since the last run, and the state to keep.

    previous = parse_state(text)                     the stored state (ValueError when invalid)
    change = track_change(previous, verdict, reason_set(call.reasons), utc_text(now),
                          dead_feed_ticks, notify_on_reasons,
                          at_once=switches_at_once(previous, verdict, blocked_by), confirm=Confirm(3, 15.0))
    change.kind                                      first | verdict | reasons | dead_feed | None
    change.state.pending                             a new call waiting to be confirmed (or None)
    change.headline                                  the one-line announcement
    change.state.as_dict()                           the state to store for the next run
    dead_feed_note(change)                           a line for the advisory while the feed looks dead
    conditions(call)                                 the weather and the model's odds for the history line

Pure: no files, no clock (the caller gives the time); the state folder is
:mod:`advisor.io.statedir`, the advisory's pages are :mod:`advisor.views.advisory`.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from datetime import datetime, timezone

from advisor.io.history import WEATHER_COLUMNS
from advisor.vocabulary import METHODS, VERDICT, VERDICTS

STATE_SCHEMA = 2
#: Block ids that change a call without making a method unsafe: such a change waits to be confirmed.
_SOFT_BLOCKS = ("efficiency.min",)


def utc_text(moment: datetime) -> str:
    """``2026-12-01T03:00:00.123Z`` (UTC, milliseconds)."""
    return moment.astimezone(timezone.utc).strftime("%Y-%m-%dT%H:%M:%S.%f")[:-3] + "Z"


def short_utc(text: str | None) -> str:
    """``2026-12-01T03:00:00.123Z`` → ``2026-12-01 03:00:00 UTC``."""
    return "?" if not text else f"{text[:10]} {text[11:19]} UTC"


def _label(verdict: str) -> str:
    return VERDICT[verdict].label


@dataclass(frozen=True)
class TickState:
    """What the previous tick left: the announced verdict, reason set, counters and a pending call.

    ``verdict`` is the call last announced; ``pending`` a different call seen since
    ``pending_since_utc`` for ``pending_ticks`` ticks, not yet confirmed (see :class:`Confirm`).
    """

    verdict: str
    reasons: tuple[str, ...]
    since_utc: str
    issued_utc: str
    undetermined_ticks: int
    pending: str | None = None
    pending_since_utc: str | None = None
    pending_ticks: int = 0

    def as_dict(self) -> dict:
        return {
            "schema": STATE_SCHEMA,
            "verdict": self.verdict,
            "reasons": list(self.reasons),
            "since_utc": self.since_utc,
            "issued_utc": self.issued_utc,
            "undetermined_ticks": self.undetermined_ticks,
            "pending": self.pending,
            "pending_since_utc": self.pending_since_utc,
            "pending_ticks": self.pending_ticks,
        }


@dataclass(frozen=True)
class Confirm:
    """How long a new call must hold before it is announced: ``ticks`` ticks or ``minutes``, whichever first."""

    ticks: int = 3
    minutes: float = 15.0

    def confirmed(self, ticks: int, since_utc: str, now_utc: str) -> bool:
        held_min = (_parse_utc(now_utc) - _parse_utc(since_utc)).total_seconds() / 60.0
        return ticks >= self.ticks or held_min >= self.minutes


def _parse_utc(text: str) -> datetime:
    return datetime.fromisoformat(text[:-1]).replace(tzinfo=timezone.utc)


def switches_at_once(previous: TickState | None, verdict: str, blocked_by: dict[str, list[str]]) -> bool:
    """Whether a change from the announced call to ``verdict`` is announced without confirmation.

    At once: the first call, bad data (or data back after it), and a block that makes the
    announced method unsafe or impossible (any block but a shortfall of efficiency or odds).
    A change of preference between two feasible methods, or back to one after a lull, waits.
    """
    if previous is None or verdict == "undetermined" or previous.verdict == "undetermined":
        return True
    old = previous.verdict
    if old in blocked_by:
        return any(not (b in _SOFT_BLOCKS or b.startswith("model.")) for b in blocked_by[old])
    return False


def parse_state(text: str) -> TickState:
    """The state a previous run stored (``state.json``); ValueError when it is not one."""
    doc = json.loads(text)
    if not isinstance(doc, dict) or doc.get("schema") not in (1, STATE_SCHEMA):
        raise ValueError(f"not a tick state object of schema {STATE_SCHEMA}")
    verdict, reasons, ticks = doc.get("verdict"), doc.get("reasons"), doc.get("undetermined_ticks")
    if verdict not in VERDICTS:
        raise ValueError(f"unknown verdict {verdict!r}")
    if not isinstance(reasons, list) or not all(isinstance(r, str) for r in reasons):
        raise ValueError("reasons is not a list of strings")
    if isinstance(ticks, bool) or not isinstance(ticks, int) or ticks < 0:
        raise ValueError("undetermined_ticks is not a count")
    for key in ("since_utc", "issued_utc"):
        value = doc.get(key)
        if not isinstance(value, str) or not value.endswith("Z"):
            raise ValueError(f"{key} is not a UTC time")
        datetime.fromisoformat(value[:-1])
    pending, pending_since, pending_ticks = (
        doc.get("pending"),
        doc.get("pending_since_utc"),
        doc.get("pending_ticks", 0),
    )
    if pending is not None:
        if pending not in VERDICTS or not isinstance(pending_since, str) or not pending_since.endswith("Z"):
            raise ValueError("pending is not a verdict with a UTC time")
        datetime.fromisoformat(pending_since[:-1])
        if isinstance(pending_ticks, bool) or not isinstance(pending_ticks, int) or pending_ticks < 0:
            raise ValueError("pending_ticks is not a count")
    else:
        pending_since, pending_ticks = None, 0
    return TickState(
        verdict, tuple(reasons), doc["since_utc"], doc["issued_utc"], ticks, pending, pending_since, pending_ticks
    )


# --- change tracking (pure) ---------------------------------------------------------------


@dataclass(frozen=True)
class Change:
    """What this tick found compared with the last: ``kind`` is None when nothing to announce."""

    kind: str | None  # first | verdict | reasons | dead_feed | None
    headline: str
    state: TickState
    previous_verdict: str | None
    feed_looks_dead: bool


def reason_set(reasons) -> tuple[str, ...]:
    """The reasons that carry a judgement (block, warn, error term) as sorted ``rule[applies_to]``."""
    return tuple(sorted({f"{r.rule}[{r.applies_to}]" for r in reasons if r.effect != "info"}))


def track_change(
    previous: TickState | None,
    verdict: str,
    reasons: tuple[str, ...],
    issued_utc: str,
    dead_feed_ticks: int,
    notify_on_reasons: bool,
    at_once: bool = True,
    confirm: Confirm | None = None,
) -> Change:
    """Compare this tick with the previous state; the new state and what to announce.

    A different call is announced at once when ``at_once`` (see :func:`switches_at_once`),
    otherwise once it has held as ``confirm`` says; until then it is kept as ``pending``.
    """
    label = _label(verdict)
    undetermined = (previous.undetermined_ticks if previous else 0) + 1 if verdict == "undetermined" else 0
    dead = verdict == "undetermined" and undetermined >= dead_feed_ticks
    if previous is not None and previous.verdict != verdict and not at_once and confirm is not None:
        if previous.pending == verdict and previous.pending_since_utc is not None:
            ticks, pending_since = previous.pending_ticks + 1, previous.pending_since_utc
        else:
            ticks, pending_since = 1, issued_utc
        if not confirm.confirmed(ticks, pending_since, issued_utc):
            state = TickState(
                previous.verdict, reasons, previous.since_utc, issued_utc, undetermined, verdict, pending_since, ticks
            )
            return Change(None, "", state, previous.verdict, dead)
    if previous is None:
        since, kind = issued_utc, "first"
        headline = f"advisor tick: first advisory in this state dir: {label}"
    elif previous.verdict != verdict:
        since, kind = issued_utc, "verdict"
        headline = (
            f"advisor tick: verdict changed: {_label(previous.verdict)} → {label} "
            f"({previous.verdict} since {short_utc(previous.since_utc)})"
        )
        if previous.verdict == "undetermined" and previous.undetermined_ticks >= dead_feed_ticks:
            headline += f"; the feed is back after {previous.undetermined_ticks} undetermined ticks"
    else:
        since = previous.since_utc
        added = sorted(set(reasons) - set(previous.reasons))
        dropped = sorted(set(previous.reasons) - set(reasons))
        if dead and undetermined == dead_feed_ticks:
            kind = "dead_feed"
            headline = (
                f"advisor tick: the feed looks dead: {undetermined} consecutive undetermined ticks "
                f"since {short_utc(since)}"
            )
        elif notify_on_reasons and (added or dropped):
            kind = "reasons"
            bits = [f"+ {r}" for r in added] + [f"- {r}" for r in dropped]
            headline = f"advisor tick: reasons changed ({label} unchanged): " + "; ".join(bits)
        else:
            kind, headline = None, ""
    if dead and kind in ("first", "verdict"):
        headline += f"; the feed looks dead ({undetermined} consecutive undetermined ticks)"
    state = TickState(verdict, reasons, since, issued_utc, undetermined)
    return Change(kind, headline, state, previous.verdict if previous else None, dead)


def dead_feed_note(change: Change) -> str | None:
    """A line for the advisory itself while the feed looks dead."""
    if not change.feed_looks_dead:
        return None
    return (
        f"THE FEED LOOKS DEAD: {change.state.undetermined_ticks} consecutive undetermined ticks since "
        f"{short_utc(change.state.since_utc)}. Check the weather logger and its link."
    )


def _number(value, digits: int = 4):
    if value is None or isinstance(value, bool):
        return value
    value = float(value)
    return round(value, digits) if math.isfinite(value) else None


def conditions(call) -> dict:
    """What a tick's history line keeps besides the verdict: the weather at the call, in the
    attempt history's columns (:data:`advisor.io.history.WEATHER_COLUMNS`, so a line can be joined
    to a recorded outcome or train the model), and per method the site model's odds and whether
    they were extrapolated (None without a model)."""
    weather = {name: _number(call.features.get(name)) for name in WEATHER_COLUMNS}
    odds = {m: _number((call.candidates.get(m) or {}).get("p_usable")) for m in METHODS}
    extrapolated = {m: bool((call.candidates.get(m) or {}).get("extrapolated", False)) for m in METHODS}
    return {
        "weather": weather,
        "p_usable": odds,
        "odds_extrapolated": extrapolated,
        "data_ok": bool(call.features.get("data_ok", False)),
    }
