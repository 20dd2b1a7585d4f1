"""The call at one instant (``check``, ``tick``, ``rules explain``): decisions, the explained call,
when the frame carries rows after the instant the next window for each method, and what it says
about the hours ahead (:mod:`advisor.evaluation.lookahead`: how long a correction holds, until
when a postpone lasts, the forecast against the mast).

Pure: takes loaded objects and returns an :class:`Instant`; the commands add the files' names,
the data-quality summary and the rendering context.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import pandas as pd

from advisor.decision import Call, Decisions, Reason
from advisor.evaluation.evaluate import OddsFunction, evaluate
from advisor.evaluation.feedcheck import sample_problems
from advisor.evaluation.lookahead import look_ahead
from advisor.explain import explain
from advisor.io.references import Registry
from advisor.io.site import Site
from advisor.rules.ruleset import RuleSet
from advisor.text import clean_text


@dataclass(frozen=True)
class Instant:
    """One evaluated instant."""

    decisions: Decisions  # one row: the rule evaluation, candidates and verdict behind the call
    call: Call
    next_window: dict | None  # per method, from the rows after the instant; None without such rows
    next_window_in_hindsight: bool  # the rows after the instant used for next_window include observations
    look_ahead: dict | None = None  # check --json's look_ahead object (None without weather)


def safe_call(call: Call) -> Call:
    """``call`` with every text that may quote a file (rule messages, calibrator names, the headline)
    passed through :func:`advisor.text.clean_text`: nothing printed from it carries a terminal
    escape sequence or control character."""
    reasons = [replace(r, message=clean_text(r.message)) for r in call.reasons]
    return replace(
        call, reasons=reasons, headline=clean_text(call.headline), calibrator_name=clean_text(call.calibrator_name)
    )


def evaluate_instant(
    frame: pd.DataFrame,
    at_utc: pd.Timestamp,
    site: Site,
    registry: Registry,
    rules: RuleSet,
    freq_ghz: float,
    odds: OddsFunction | None = None,
    forecast_source: str | None = None,
) -> Instant:
    """The call at ``at_utc`` from the observed rows of ``frame`` up to it.

    Rows after ``at_utc`` (a forecast, or an archive evaluated in the past) never enter the
    call; when there are at least two of them they give the next window for each method.  The
    look ahead adds its info reasons to the call (``forecast_source`` names the forecast file).
    """
    observed = frame[(frame["kind"] == "observed") & (frame["time"] <= at_utc)]
    decisions = evaluate(observed, pd.DatetimeIndex([at_utc]), site, registry, rules, freq_ghz, odds)
    call = safe_call(_named_data_problems(explain(decisions, 0), decisions, observed, site))
    next_window = None
    hindsight = False
    if int((frame["time"] > at_utc).sum()) >= 2:
        from advisor.evaluation.outlook import (
            next_windows_after,  # only when the frame looks ahead
        )

        next_window = next_windows_after(frame, at_utc, site, registry, rules, freq_ghz, odds=odds)
        hindsight = bool(next_window) and bool(((frame["kind"] == "observed") & (frame["time"] > at_utc)).any())
    ahead = look_ahead(frame, at_utc, call, next_window, site, forecast_source)
    reasons = list(call.reasons)
    for reason in ahead.reasons:  # how long it holds goes right after the chosen method's figures
        after = [k for k, r in enumerate(reasons) if r.rule == f"budget.{call.verdict}"]
        reasons.insert(after[0] + 1 if reason.rule.startswith("holds.") and after else len(reasons), reason)
    call = replace(call, reasons=reasons)
    return Instant(decisions, call, next_window, hindsight, ahead.doc)


def evaluate_without_weather(
    empty_frame: pd.DataFrame,
    at_utc: pd.Timestamp,
    site: Site,
    registry: Registry,
    rules: RuleSet,
    freq_ghz: float,
    why: str,
) -> Instant:
    """The undetermined call when there is no weather at all (the feed cannot be read).

    ``empty_frame`` is a canonical frame without rows; ``why`` becomes the blocking ``feed``
    reason in place of the generic data reasons.  No model odds: there is no weather to give them on.
    """
    decisions = evaluate(empty_frame, pd.DatetimeIndex([at_utc]), site, registry, rules, freq_ghz)
    call = explain(decisions, 0)
    reason = Reason("feed", "both", "block", why)
    call = replace(call, reasons=[reason] + [r for r in call.reasons if r.rule != "data"])
    return Instant(decisions, safe_call(call), None, False)


def _named_data_problems(call: Call, decisions: Decisions, observed: pd.DataFrame, site: Site) -> Call:
    """An undetermined call's generic "implausible or incomplete" reason, replaced by what is
    wrong with the latest sample: the logger column and the value."""
    if call.verdict != "undetermined" or "latest_row" not in decisions.features:
        return call
    latest = int(decisions.features["latest_row"].iloc[0])
    if latest < 0 or bool(observed["good"].iloc[latest]):
        return call
    problems = sample_problems(observed, latest, site.feed)
    if not problems:
        return call
    when = pd.Timestamp(observed["time"].iloc[latest]).strftime("%Y-%m-%d %H:%M UTC")
    named = Reason(
        "data",
        "both",
        "block",
        f"The latest weather sample ({when}) is not usable: {'; '.join(problems)}. No call is made on bad data.",
    )
    generic = [r for r in call.reasons if r.rule == "data" and "implausible or incomplete" in r.message]
    reasons = [named if r is (generic[0] if generic else None) else r for r in call.reasons]
    if not generic:
        reasons.insert(0, named)
    return replace(call, reasons=reasons)
