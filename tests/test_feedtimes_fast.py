"""The fast path for a uniform column of ISO 8601 times agrees with the strict reader, or steps aside.

Reference: the strict reader (advisor.io.times.parse_time_column, which has no fast path),
itself checked against its own tests and pandas; for a whole column, pandas.to_datetime
(format="ISO8601").  Property: for any column, the fast path either returns None or exactly the
strict reader's instants; it never accepts what the strict reader refuses, and a feed's times
(or its error message, line and all) are the same with the fast path switched off.  The times
are generated (hypothesis), not data.
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import advisor.io.feedtimes as feedtimes
from advisor.errors import FeedError
from advisor.io.feedlayout import FeedLayout
from advisor.io.feedtimes import feed_times, uniform_iso_ns
from advisor.io.times import parse_time_column


def _strict(texts: list) -> np.ndarray | None:
    """The strict reader's instants [ns], or None when it refuses the column."""
    try:
        parsed = parse_time_column(
            pd.Series(texts, dtype=object), source="t", field="time", line_offset=2, error_type=FeedError
        )
    except FeedError:
        return None
    return pd.DatetimeIndex(parsed).as_unit("ns").asi8


def _feed_times(texts: list, fast: bool, unit: str | None = None):
    """``feed_times`` of a one-column table: the times, or the error's message."""
    table = pd.DataFrame({"time": pd.Series(texts, dtype=object)})
    with pytest.MonkeyPatch.context() as m:
        if not fast:
            m.setattr(feedtimes, "uniform_iso_ns", lambda _values: None)
        try:
            times, _ = feed_times(table, FeedLayout(time_zone="America/Denver", time_unit=unit), "feed.csv", 2)
        except FeedError as exc:
            return str(exc)
    return times


_OFFSETS = st.sampled_from(["Z", "z", "+00:00", "-07:00", "+05:30", "+0100", "-11", "+23:59", "-00:30", ""])
_FRACTIONS = st.sampled_from(["", ".5", ".123", ".123456", ".123456789"])
_SEPARATORS = st.sampled_from(["T", "t", " "])


@st.composite
def columns(draw):
    """A column written the same way throughout, sometimes with one text spoilt."""
    start = draw(st.datetimes(min_value=dt.datetime(1899, 12, 31), max_value=dt.datetime(2200, 1, 1)))
    step = draw(st.integers(min_value=1, max_value=400_000))
    n = draw(st.integers(min_value=1, max_value=40))
    sep, offset = draw(_SEPARATORS), draw(_OFFSETS)
    seconds, fraction = draw(st.booleans()), draw(_FRACTIONS)
    texts = []
    for i in range(n):
        t = start + dt.timedelta(seconds=i * step)
        if t.year > 9999:
            break
        text = t.strftime(f"%Y-%m-%d{sep}%H:%M")
        if seconds:
            text += t.strftime(":%S") + fraction
        texts.append(text + offset)
    if draw(st.booleans()):
        i = draw(st.integers(min_value=0, max_value=len(texts) - 1))
        spoilt = list(texts[i])
        k = draw(st.integers(min_value=0, max_value=len(spoilt) - 1))
        spoilt[k] = draw(st.sampled_from([*"0123456789:-+,TZ .x\n\x00", "", "99", "é", " 1"]))
        texts[i] = "".join(spoilt)
    return texts


@settings(max_examples=400, deadline=None)
@given(columns())
def test_fast_path_agrees_with_the_strict_reader(texts):
    fast = uniform_iso_ns(pd.Series(texts, dtype=object))
    strict = _strict(texts)
    if fast is not None:
        assert strict is not None, texts
        assert np.array_equal(fast, strict), texts


@settings(max_examples=200, deadline=None)
@given(columns(), st.sampled_from([None, "iso", "epoch_s"]))
def test_a_feeds_times_and_errors_are_the_same_without_the_fast_path(texts, unit):
    with_fast, without = _feed_times(texts, True, unit), _feed_times(texts, False, unit)
    if isinstance(without, str):
        assert with_fast == without
    else:
        pd.testing.assert_series_equal(with_fast, without, check_exact=True)


@pytest.mark.parametrize(
    "texts",
    [
        ["2028-02-30T00:00Z"],
        ["2026-02-29T00:00Z"],
        ["2026-01-15T24:00Z"],
        ["2026-01-15T09:00:60Z"],
        ["2026-13-01T00:00Z"],
        ["2026-00-01T00:00Z"],
        ["2026-01-00T00:00Z"],
        ["2026-01-15T09:00"],
        ["2026-01-15T09:00:00+24:00"],
        ["2026-01-15T09:00:00+01:60"],
        ["2200-01-01T00:00:00Z"],
        ["1899-12-31T23:59:59+00:00"],
        ["2026-01-15T09:00:00Z", "2026-01-15T09:01:00+00:00"],
        ["2026-01-15T09:00:00Z", "2026-01-15T09:01:00-00:00"[:-1]],
        ["2026-01-15T09:00:00Z", ""],
        ["2026-01-15T09:00:00Z", None],
        ["2026-01-15T09:00:00Z", 5],
        ["2026-01-15T09:00:00Z", b"2026-01-15T09:01:00Z"],
        ["2026-01-15T09:00:00Z", "2026-01-15T09:01:00Z\x00"],
        ["2026-01-15T09:00:00Z", " 2026-01-15T09:01:00Z"],
        ["2026-01-15T09:00:00Z", "2026-01-15T09:01:00é"],
        ["2026-01-15T09:00:00+01:00", "2026-01-15T09:00:00,01:00"],
        ["2026-01-15T09:00:00,5Z"],
        ["2026-01-15T09:00:00.1234567891Z"],
        ["2026-01-15T09:00:00Z", "2026-01-15T09:0\n0:00Z"],
    ],
)
def test_fast_path_steps_aside(texts):
    assert uniform_iso_ns(pd.Series(texts, dtype=object)) is None


def test_a_year_of_minutes_is_read_as_pandas_reads_it():
    """pandas.to_datetime (ISO 8601) as the reference for a year of minutes with an offset."""
    stamps = pd.date_range("2025-12-01T00:00:00-07:00", periods=525_601, freq="1min")
    texts = pd.Series(stamps.strftime("%Y-%m-%dT%H:%M:%S-07:00"), dtype="str")
    ns = uniform_iso_ns(texts)
    reference = pd.to_datetime(texts.astype(object), utc=True, format="ISO8601").dt.as_unit("ns")
    assert ns is not None
    assert np.array_equal(ns, reference.astype("int64").to_numpy())
