"""The pieces of one :class:`advisor.decision.Call` that every view of it shares.

    when_text(call, ctx)          '30 Nov 2026 20:00 MST (1 Dec 03:00 UTC)'
    target_text(call)             '86 GHz (3.49 mm)'
    blockers(call, method)        the blocking reasons against one method (rules, data, odds, budget)
    blocked_names(call, method)   the same as short words for a table cell ('high frequency wind limit')
    cause_text(reason)            the lead clause of a reason: what happened, with its numbers
    cause_line(call)              the first line under the verdict: the call and its cause
    sections(call)                reasons grouped: why this call / why not the other / cautions
    candidate_rows(call)          one tuple per method, in CANDIDATE_HEADERS order
    key_features(features)        (label, text) of the catalogue's key features
    conditions_line(features)     the few numbers an operator looks at first, on one line
    next_window_text(nw, tz)      'Next window: laser scan 1 Dec 10:00 → 11:50 MST (...), 1 h 50 min'

Words come from :mod:`advisor.vocabulary`, labels and formats from :mod:`advisor.catalogue`,
numbers, durations and times from :mod:`advisor.fmt`.  Nothing here decides anything: the
groups are read off the reasons the call carries, whatever they are.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

import pandas as pd

from advisor import fmt
from advisor.catalogue import CATALOGUE, KEY_FEATURES
from advisor.decision import Call, Reason
from advisor.views.context import Context
from advisor.vocabulary import EFFECT_LABEL, METHOD_LABEL, METHODS, VERDICT

CANDIDATE_HEADERS = ("method", "feasible", "surface rms", "Ruze η", "p usable", "takes", "blocked by")
#: Columns of the candidate table that hold numbers (right-aligned).
NUMERIC_HEADERS = ("surface rms", "Ruze η", "p usable", "takes")
#: The reason effects (vocabulary.REASON_EFFECTS), most severe first.
SEVERITY = ("block", "add_error", "warn", "info")
_EFFECT_ORDER = {effect: k for k, effect in enumerate(SEVERITY)}
#: A method as the object of a sentence ("why not the astronomical method").
METHOD_PHRASE = {"scan": "the laser scan", "astronomical": "the astronomical method"}
#: Reasons the decision itself gives (not a rule of the rule set), as words for a table cell.
_OWN_REASON_WORDS = {
    "data": "stale or bad data",
    "feed": "feed unreadable",
    "model": "site model odds",
    "budget": "efficiency below minimum",
    "efficiency": "efficiency below minimum",
    "target": "frequency out of reach",
    "choice": "the other is better",
}
#: The conditions the compact screen shows on one line, in this order.
COMPACT_FEATURES = ("wind_mean_ms", "wind_gust_ms", "dew_point_spread_c", "precip_mm_h", "visibility_m")
_COMPACT_LABEL = {
    "wind_mean_ms": "wind",
    "wind_gust_ms": "gusts",
    "dew_point_spread_c": "spread",
    "precip_mm_h": "rain",
    "visibility_m": "vis",
}
# Statistical asides that mean nothing to an operator: "(+1.0 log-odds vs. ...)", "(+0.5)".
#: A reason's lead clause shorter than this [characters] is shown with the rest of its message.
SHORT_CAUSE_CHARS = 40
_JARGON = re.compile(r"\s*\((?:[^()]*log-odds[^()]*|[+−-]\d+(?:\.\d+)?)\)")


def when_text(call: Call, ctx: Context) -> str:
    """The evaluation time in the site's local time (with the year) and in UTC."""
    return fmt.local_utc(call.time_utc, ctx.time_zone, year=True)


def target_text(call: Call) -> str:
    """The target frequency and its wavelength: ``85.7 GHz (3.50 mm)``."""
    return fmt.freq_wave_text(call.freq_ghz)


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
    if name == "air_temp_rate_c_per_h" and rate_window is not None and math.isfinite(rate_window) and rate_window > 60:
        return f"temperature rate (over {_window_text(rate_window)})"
    return label


# --- reasons ------------------------------------------------------------------------------


def ordered_reasons(call: Call) -> list[Reason]:
    """Reasons, most severe first (stable within one severity)."""
    return sorted(call.reasons, key=lambda r: _EFFECT_ORDER.get(r.effect, len(_EFFECT_ORDER)))


def _applies(reason: Reason, method: str) -> bool:
    return reason.applies_to in (method, "both")


def blockers(call: Call, method: str) -> list[Reason]:
    """Every blocking reason against ``method``: rules, stale data, the site model's odds, the budget."""
    return [r for r in call.reasons if r.effect == "block" and _applies(r, method)]


def reason_name(rule: str) -> str:
    """A reason's id as words for a table cell: ``gusts_shake_structure`` → ``gusts shake structure``."""
    head = rule.split(".", 1)[0]
    return _OWN_REASON_WORDS.get(head, rule.replace("_", " "))


def blocked_names(call: Call, method: str) -> list[str]:
    """The blocking reasons against ``method`` as short words (each once)."""
    return list(dict.fromkeys(reason_name(r.rule) for r in blockers(call, method)))


def blocked_ids(call: Call, method: str) -> list[str]:
    """The ids of the blocking reasons against ``method`` (each once), for JSON and --details."""
    return list(dict.fromkeys(r.rule for r in blockers(call, method)))


def plain_words(message: str) -> str:
    """A reason's message without statistical asides and without a leading method label."""
    text = fmt.no_minus_zero(_JARGON.sub("", message))
    for label in METHOD_LABEL.values():
        if text.startswith(label + ": "):
            text = text[len(label) + 2 :]
            break
    return text[:1].upper() + text[1:]


def cause_text(reason: Reason) -> str:
    """The lead clause of a reason (what happened, with its numbers), without the consequence.

    ``Mean wind 4.7 m/s is above the limit of 4.0 m/s: a corrected surface would not hold`` →
    ``Mean wind 4.7 m/s is above the limit of 4.0 m/s``.
    """
    text = plain_words(reason.message)
    depth, cut = 0, len(text)
    for k, ch in enumerate(text):
        depth += 1 if ch in "([" else -1 if ch in ")]" else 0
        if depth == 0 and text.startswith((": ", "; "), k):
            cut = k
            break
    lead = text[:cut].rstrip(" .")
    # a bare lead ("Precipitation 1.6 mm/h") says too little: keep what follows it
    return lead if len(lead) >= SHORT_CAUSE_CHARS else text.rstrip(" .")


def _who(reason: Reason) -> str:
    return "both methods" if reason.applies_to == "both" else METHOD_LABEL.get(reason.applies_to, reason.applies_to)


def cause_line(call: Call, limit: int = 2) -> str:
    """The line under the verdict: the call with its numbers, or what stops every method.

    For postpone and undetermined it names the blocking reasons the call carries (the first
    ``limit`` of them, then how many more), whatever rules they come from.
    """
    if call.verdict in ("scan", "astronomical"):
        return _without_restated_verdict(call)
    blocks = [r for r in ordered_reasons(call) if r.effect == "block"]
    if not blocks:
        return call.headline
    bits = [cause_text(r) + "." for r in blocks[:limit]]
    more = len(blocks) - limit
    if more > 0:
        bits.append(f"+{fmt.plural(more, 'more reason')}.")
    if call.verdict == "undetermined":
        bits.append("Do not scan on this advice.")
    return " ".join(bits)


def _without_restated_verdict(call: Call) -> str:
    """The headline without its opening words when they only restate the verdict the badge shows
    (``Scan the reflector now: laser correction ...`` → ``Laser correction ...``); the calibrator
    of an astronomical call stays."""
    head, sep, tail = call.headline.partition(": ")
    if not sep or not tail:
        return call.headline
    tail = tail[:1].upper() + tail[1:]
    if call.verdict == "astronomical" and call.calibrator_name and call.calibrator_name in head:
        return f"On {call.calibrator_name}: {tail[:1].lower() + tail[1:]}"
    return tail


@dataclass(frozen=True)
class Item:
    """One reason as a section shows it: its words, the compact words, and where it came from."""

    text: str  # the full message (with who it stops, where the section does not say)
    short: str  # plain words: no statistical asides
    cause: str  # the lead clause only: what happened, with its numbers
    rule: str
    applies_to: str
    effect: str


@dataclass(frozen=True)
class Section:
    """A group of reasons under a plain heading."""

    title: str
    items: tuple[Item, ...]


def _item(reason: Reason, who: bool = False) -> Item:
    full, short, cause = fmt.no_minus_zero(reason.message), plain_words(reason.message), cause_text(reason)
    if who:
        label = METHOD_LABEL.get(reason.applies_to, "")
        prefix = "both" if reason.applies_to == "both" else label or reason.applies_to
        full = f"{prefix}: {full[len(label) + 2 :] if label and full.startswith(label + ': ') else full}"
        short, cause = (f"{prefix}: {t}" for t in (short, cause))
    return Item(full, short, cause, reason.rule, reason.applies_to, reason.effect)


def sections(call: Call) -> list[Section]:
    """The reasons grouped for an operator.

    scan / astronomical: why this method (its figures and the site model's view), why not the
    other one (what blocks it, or why it lost), cautions.  postpone / undetermined: why (every
    blocking reason, saying which method it stops), cautions.  Reasons that fit no group (notes
    on the other method) come last under "Other notes".
    """
    used: set[int] = set()
    out: list[Section] = []

    def take(title: str, reasons: list[Reason], who: bool = False) -> None:
        chosen = [r for r in reasons if id(r) not in used]
        used.update(id(r) for r in chosen)
        if chosen:
            out.append(Section(title, tuple(_item(r, who) for r in chosen)))

    reasons = ordered_reasons(call)
    words = VERDICT[call.verdict].words
    if call.verdict in ("scan", "astronomical"):
        chosen, other = call.verdict, next(m for m in METHODS if m != call.verdict)
        title = f"Why {words}" if chosen == "scan" else f"Why {METHOD_PHRASE[chosen]}"
        take(title, [r for r in reasons if r.applies_to == chosen and r.effect == "info"])
        against = blockers(call, other) or [r for r in reasons if r.rule == "choice"]
        take(f"Why not {METHOD_PHRASE[other]}", against)
    else:
        take(f"Why {words.split(' (')[0]}", [r for r in reasons if r.effect == "block"], who=True)
    take("Cautions", [r for r in reasons if r.effect in ("warn", "add_error")], who=True)
    take("Other notes", list(reasons), who=True)
    return out


# --- figures ------------------------------------------------------------------------------


def candidate_rows(call: Call):
    """One row of text per method: label, feasible, surface rms, Ruze η, p usable, duration, blocked by."""
    for method, label in METHOD_LABEL.items():
        c = call.candidates[method]
        rms = "n/a" if c["surface_rms_um"] is None else f"{fmt.fixed(c['surface_rms_um'], 0)} µm"
        eta = fmt.fixed(c["ruze_efficiency"], 2)
        p = "—" if c["p_usable"] is None else fmt.odds_text(c["p_usable"])
        yield (
            label,
            "yes" if c["feasible"] else "no",
            rms,
            eta,
            p,
            fmt.duration_text(c["duration_min"]),
            ", ".join(blocked_names(call, method)) or "—",
        )


def feature_text(name: str, fmt_pattern: str, features: dict) -> str:
    """One feature's value in its display format; durations as ``h min``; ``n/a`` when missing."""
    value = features.get(name)
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return "n/a"
    unit = CATALOGUE[name].unit if name in CATALOGUE else ""
    if name == "visibility_m" and value >= 10_000:
        return f"{value / 1000:.0f} km"
    if name == "calibrator_minutes_up" and value >= 1440:
        return "all day (circumpolar)"
    if unit == "min":
        return fmt.duration_text(value)
    if unit == "h":
        return fmt.hours_text(value)
    return fmt.no_minus_zero(fmt_pattern.format(value))


def key_features(features: dict) -> list[tuple[str, str]]:
    """(label, text) pairs of the key conditions; hours since sunrise by day, since sunset by night;
    a condition with ``key_when`` only where that flag is true."""
    rows = []
    for spec in KEY_FEATURES:
        if spec.key_when and not features.get(spec.key_when):
            continue
        if spec.name == "hours_since_sunset" and not features.get("is_night", True):
            spec = CATALOGUE["hours_since_sunrise"]
        rows.append((feature_label(spec.name, features), feature_text(spec.name, spec.display_format, features)))
    return rows


def conditions_line(call: Call) -> str:
    """``wind 0.8 m/s · gusts 1.5 m/s · spread 3.8 °C · rain 0.0 mm/h · vis 27 km``."""
    bits = []
    for name in COMPACT_FEATURES:
        text = feature_text(name, CATALOGUE[name].display_format, call.features)
        if text != "n/a":
            label = feature_label(name, call.features)  # "wind (1-h mean)", "gusts (estimated)" when so
            bits.append(f"{_COMPACT_LABEL[name] if label == CATALOGUE[name].label else label} {text}")
    return " · ".join(bits)


def data_age_text(call: Call) -> str:
    """``data age 3 min``, or ``no good data`` when there is no sample at all."""
    age = call.features.get("data_age_min")
    return "no good data" if age is None or not math.isfinite(age) else f"data age {fmt.duration_text(age)}"


def next_window_text(
    next_window: dict, time_zone: str, compact: bool = False, since: pd.Timestamp | None = None
) -> str:
    """'Next window: laser scan 1 Dec 10:00 → 11:50 MST (17:00 → 18:50 UTC), 1 h 50 min; ...'.

    ``compact``: each method's start and length (``laser scan 15:50 MST (22:50 UTC) for 4 h 15 min``),
    the date only when it is not the local day of ``since``.
    """
    bits = []
    for method, w in next_window.items():
        label = METHOD_LABEL[method]
        if not w:
            bits.append(f"{label}: none in the forecast")
            continue
        start, end = (pd.Timestamp(w[k]) for k in ("start_utc", "end_utc"))
        length = w.get("length_min", (end - start).total_seconds() / 60)
        if compact:
            same_day = since is not None and fmt.same_local_day(start, since, time_zone)
            bits.append(
                f"{label} {fmt.local_utc(start, time_zone, with_date=not same_day)} for {fmt.duration_text(length)}"
            )
        else:
            bits.append(f"{label} {fmt.span_text(start, end, time_zone)}, {fmt.duration_text(length)}")
    return "Next window: " + "; ".join(bits)


def effect_word(effect: str) -> str:
    """How the screen words a reason's effect ("against", "caution", ...)."""
    return EFFECT_LABEL.get(effect, effect)
