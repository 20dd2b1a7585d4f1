"""A property: a feed whose required inputs cannot be trusted at the evaluation time never gives "scan".

For any feed in which a required input (mean wind, gusts, air temperature, humidity) is
missing, stale, truncated or implausible at the evaluation time, the call is never scan: it is
undetermined (or another call made on what is known), or the feed is refused with an input
error.  An optional input the feed carried until just before (a sensor dropout) is covered by
a second property once the dropout rule exists (catalogue feature ``input_dropout``).

Each example builds a small canonical table (a calm, clear winter night at the invented demo
site, which scans when undamaged: checked by ``test_undamaged_feeds_scan``), damages it, and
calls the evaluation directly.  Examples: 2,000 per property in CI; ``HYPOTHESIS_PROFILE=long``
runs 20,000, ``ADVISOR_PROPERTY_EXAMPLES=N`` any number.  The weather is invented and only
puts the call in a known state; no check value comes from it.
"""

from __future__ import annotations

import math
import os
import tempfile
from dataclasses import replace
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from advisor.catalogue import CATALOGUE, PLAUSIBLE_RANGE
from advisor.errors import AdvisorError
from advisor.evaluation.evaluate import evaluate
from advisor.explain import explain
from advisor.io.feed import canonical_frame, read_feed
from advisor.io.site import FeedLayout, load_site
from advisor.rules.loader import default_rule_files, load_rules

from .conftest import NIGHT_UTC, registry_at, weather_table

REQUIRED = ("wind_mean_ms", "wind_gust_ms", "air_temp_c", "rel_humidity_pct")
OPTIONAL = ("visibility_m", "precip_mm_h")


def _examples() -> int:
    if os.environ.get("ADVISOR_PROPERTY_EXAMPLES"):
        return int(os.environ["ADVISOR_PROPERTY_EXAMPLES"])
    return 20_000 if os.environ.get("HYPOTHESIS_PROFILE") == "long" else 2_000


PROPERTY = settings(
    max_examples=_examples(),
    deadline=None,
    derandomize=False,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large],
)

SITE = load_site(None)
# The calm nights must scan: a 2 h session (holography's extra 33 min pay back only over a longer one).
SITE = replace(SITE, thresholds=replace(SITE.thresholds, session_hours=2.0))
RULES = load_rules([(p, "default") for p in default_rule_files()], CATALOGUE)
MAX_AGE_MIN = SITE.feed.max_feed_age_min


def _layout() -> FeedLayout:
    return FeedLayout(max_feed_age_min=MAX_AGE_MIN)


def verdict_of(table: pd.DataFrame, at: pd.Timestamp, layout: FeedLayout | None = None) -> str:
    """The call at ``at`` for a canonical-name table (an input error counts as "refused")."""
    try:
        feed = canonical_frame(table, layout or _layout())
    except AdvisorError:
        return "refused"
    return _verdict(
        feed.frame, at, float(table["air_temp_c"].dropna().iloc[-1]) if table["air_temp_c"].notna().any() else 2.0
    )


def _verdict(frame: pd.DataFrame, at: pd.Timestamp, ref_temp_c: float) -> str:
    if not math.isfinite(ref_temp_c) or abs(ref_temp_c) > 60:
        ref_temp_c = 2.0
    registry = registry_at(at - pd.Timedelta(hours=2), ref_temp_c + 0.5)
    observed = frame[frame["time"] <= at]
    decisions = evaluate(observed, pd.DatetimeIndex([at]), SITE, registry, RULES, 86.0)
    return explain(decisions, 0).verdict


# --- a good night, then damage --------------------------------------------------------------


@st.composite
def good_nights(draw) -> tuple[pd.DataFrame, pd.Timestamp]:
    """A calm, clear night feed ending at the evaluation time (scans when undamaged)."""
    step = draw(st.sampled_from([1.0, 1.0, 2.0, 5.0]))
    hours = draw(st.sampled_from([0.75, 1.0, 2.0]))
    end = NIGHT_UTC + pd.Timedelta(minutes=draw(st.integers(-90, 60)))
    mean = draw(st.floats(0.3, 3.0))
    table = weather_table(
        end=end,
        hours=hours,
        step_min=step,
        wind_mean_ms=mean,
        wind_gust_ms=mean + draw(st.floats(0.2, 2.0)),
        air_temp_c=draw(st.floats(-6.0, 8.0)),
        temp_rate_c_per_h=draw(st.floats(-0.8, 0.3)),
        rel_humidity_pct=draw(st.floats(30.0, 80.0)),
    )
    return table, end


def _out_of_range(draw, name: str) -> float:
    lo, hi = PLAUSIBLE_RANGE[name]
    how = draw(st.sampled_from(["below", "above", "inf", "-inf"]))
    if how == "inf":
        return math.inf
    if how == "-inf":
        return -math.inf
    excess = draw(st.floats(0.01, 1e6))
    return lo - excess if how == "below" else hi + excess


@st.composite
def damaged_feeds(draw):
    """``(kind, table, evaluation time)``: a good night whose required inputs fail at the evaluation time."""
    table, end = draw(good_nights())
    n = len(table)
    kind = draw(st.sampled_from(["missing", "missing_column", "implausible", "stale", "late_rows_lost"]))
    at = end
    if kind == "missing":  # the last k samples of some required inputs are empty
        k = draw(st.integers(1, n))
        cols = draw(st.lists(st.sampled_from(REQUIRED), min_size=1, max_size=4, unique=True))
        table.loc[table.index[-k:], cols] = np.nan
    elif kind == "missing_column":
        table = table.drop(columns=[draw(st.sampled_from(REQUIRED))])
    elif kind == "implausible":  # the last k samples of one required input are impossible values
        k = draw(st.integers(1, min(n, 30)))
        name = draw(st.sampled_from(REQUIRED))
        table[name] = table[name].astype(float)
        table.loc[table.index[-k:], name] = _out_of_range(draw, name)
    elif kind == "stale":  # the feed stopped: the evaluation time is past the data's useful age
        at = end + pd.Timedelta(minutes=draw(st.floats(MAX_AGE_MIN + 0.5, 5 * 24 * 60)))
    else:  # the rows up to the evaluation time were lost, more than the useful age
        times = pd.to_datetime(table["time"])
        span_min = (times.iloc[-1] - times.iloc[0]).total_seconds() / 60
        lost = draw(st.floats(MAX_AGE_MIN + 0.5, max(MAX_AGE_MIN + 0.5, span_min - 1)))
        table = table[times <= end - pd.Timedelta(minutes=lost)]
        if len(table) == 0:  # nothing left at all: the feed is empty
            return "stale", weather_table(end=end - pd.Timedelta(minutes=lost), hours=0.5), at
    return kind, table, at


# --- truncated lines ------------------------------------------------------------------------


@st.composite
def truncated_feeds(draw):
    """``("truncated", text, evaluation time)``: every complete line says "do not scan" (fog or a
    gale); the last line, a calm clear minute at the evaluation time, is cut short.

    Read whole, the cut line would say scan; read cut short ("99.5" → "9", "15.2" → "1") it
    might too.  It must never be used.
    """
    table, end = draw(good_nights())
    if draw(st.sampled_from(["fog", "gale"])) == "fog":
        table["rel_humidity_pct"] = draw(st.floats(99.0, 100.0))
        table["visibility_m"] = draw(st.floats(20.0, 300.0))
    else:
        table["wind_mean_ms"] = draw(st.floats(14.0, 30.0))
        table["wind_gust_ms"] = table["wind_mean_ms"] + draw(st.floats(3.0, 10.0))
    at = end + pd.Timedelta(minutes=1)
    calm = weather_table(end=at, hours=0.0, step_min=1.0).reindex(columns=table.columns)
    last = calm.to_csv(index=False, header=False, lineterminator="\n")
    cut = draw(st.integers(1, len(last) - 1))  # at least the newline is missing
    return "truncated", table.to_csv(index=False, lineterminator="\n") + last[:cut].rstrip("\n"), at


def _truncated_verdict(text: str, at: pd.Timestamp) -> str:
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "mast.csv"
        path.write_text(text)
        try:
            feed = read_feed(path, _layout())
        except AdvisorError:
            return "refused"
    assert feed.frame["time"].iloc[-1] < at  # the cut line did not enter the frame
    return _verdict(feed.frame, at, float(feed.frame["air_temp_c"].iloc[-1]))


# --- the property ----------------------------------------------------------------------------


@st.composite
def untrustworthy_feeds(draw):
    """One of the damages above; a truncated last line one time in six."""
    return draw(truncated_feeds()) if draw(st.integers(0, 5)) == 0 else draw(damaged_feeds())


@PROPERTY
@given(case=untrustworthy_feeds())
def test_required_inputs_missing_stale_truncated_or_implausible_never_scan(case):
    kind, feed, at = case
    verdict = _truncated_verdict(feed, at) if kind == "truncated" else verdict_of(feed, at)
    assert verdict != "scan", kind


# --- the property has teeth ------------------------------------------------------------------


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(night=good_nights())
def test_undamaged_feeds_scan(night):
    """Without damage the generated nights scan, so "never scan" above is not true by accident."""
    table, end = night
    assert verdict_of(table, end) == "scan"


# --- optional inputs: a sensor that fell silent ----------------------------------------------


@st.composite
def optional_dropouts(draw):
    """A good night whose optional sensor (visibility, precipitation) reported until k minutes ago."""
    table, end = draw(good_nights())
    name = draw(st.sampled_from(OPTIONAL))
    step = (pd.to_datetime(table["time"].iloc[-1]) - pd.to_datetime(table["time"].iloc[-2])).total_seconds() / 60
    k = draw(st.integers(1, max(1, int(40 // step))))  # silent for at most 40 min
    assume(k < len(table) - 2)
    table[name] = table[name].astype(float)
    table.loc[table.index[-k:], name] = np.nan
    return table, end


#: The issue-12 work has a 2,000-example property of its own on dropouts; this one checks the
#: same rule on the feeds built here.
DROPOUT_EXAMPLES = max(50, _examples() // 4)


@pytest.mark.skipif(
    "input_dropout" not in CATALOGUE,
    reason="the optional-input dropout rule (a sensor that fell silent blocks a scan; issue 12, "
    "catalogue feature 'input_dropout') is not in this build yet",
)
@settings(PROPERTY, max_examples=DROPOUT_EXAMPLES)
@given(case=optional_dropouts())
def test_an_optional_input_that_just_went_missing_never_scans(case):
    table, end = case
    assert verdict_of(table, end) != "scan"
