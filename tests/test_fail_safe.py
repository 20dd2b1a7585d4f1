"""Fail-safe: poor data never produces "scan"; big inputs are read in bounded memory or refused."""

from __future__ import annotations

import os

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from advisor.commands.main import main
from advisor.errors import FeedError
from advisor.io.feed import read_feed
from advisor.io.site import FeedLayout

from .conftest import weather_table

COLUMNS = ("wind_mean_ms", "wind_gust_ms", "air_temp_c", "rel_humidity_pct")


@st.composite
def perturbed_feeds(draw):
    """A good calm-night feed (which scans) with random damage near its end."""
    table = weather_table(hours=2.0)
    n = len(table)
    kind = draw(st.sampled_from(["nan_tail", "implausible_last", "truncate", "nan_cells", "shift_late"]))
    if kind == "nan_tail":
        k = draw(st.integers(1, n - 1))
        cols = draw(st.lists(st.sampled_from(COLUMNS), min_size=1, unique=True))
        table.loc[table.index[-k:], cols] = np.nan
    elif kind == "implausible_last":
        col = draw(st.sampled_from(COLUMNS))
        bad = {"wind_mean_ms": -4.0, "wind_gust_ms": 250.0, "air_temp_c": 85.0, "rel_humidity_pct": 140.0}[col]
        table.loc[table.index[-1], col] = bad
    elif kind == "truncate":
        table = table.iloc[: draw(st.integers(1, n))]
    elif kind == "nan_cells":
        rows = draw(st.lists(st.integers(0, n - 1), min_size=1, max_size=40))
        col = draw(st.sampled_from(COLUMNS))
        table.loc[table.index[rows], col] = np.nan
    else:
        minutes = draw(st.integers(0, 180))
        times = pd.to_datetime(table["time"], utc=True) - pd.Timedelta(minutes=minutes)
        table["time"] = times.dt.strftime("%Y-%m-%dT%H:%M:%SZ")
    return table


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(table=perturbed_feeds())
def test_insufficient_data_is_never_scan(call_for, table):
    call = call_for(table)
    if not call.features["data_ok"]:
        assert call.verdict == "undetermined"
    # Whatever the damage, a scan call needs fresh, complete, plausible data.
    if call.verdict == "scan":
        assert call.features["data_ok"]
        assert call.features["data_age_min"] <= 15
        assert np.isfinite(call.features["wind_mean_ms"]) and np.isfinite(call.features["rel_humidity_pct"])


def test_check_reads_only_the_tail_of_a_large_feed(tmp_path):
    """A big file is read from its end only; the call at the last sample is unchanged."""
    path = tmp_path / "long.csv"
    weather_table(hours=48.0).to_csv(path, index=False)
    full = read_feed(path, FeedLayout())
    tail = read_feed(path, FeedLayout(), tail_bytes=20_000)
    assert len(tail.frame) < len(full.frame) / 4
    pd.testing.assert_frame_equal(
        tail.frame.tail(50).reset_index(drop=True), full.frame.tail(50).reset_index(drop=True)
    )


def test_tail_read_reports_true_file_lines(tmp_path):
    table = weather_table(hours=48.0)
    table["wind_mean_ms"] = table["wind_mean_ms"].astype(object)
    table.loc[table.index[-3], "wind_mean_ms"] = "gusty"
    path = tmp_path / "long.csv"
    table.to_csv(path, index=False)
    with pytest.raises(FeedError) as info:
        read_feed(path, FeedLayout(), tail_bytes=20_000)
    assert info.value.line == len(table) - 2 + 1  # header is line 1


def test_huge_feed_is_refused_without_reading_it(capsys, tmp_path):
    """A whole-file command refuses a feed over the size cap before reading it; replay, which
    streams, refuses a file that is not text at its first bytes, before hashing it all."""
    path = tmp_path / "huge.csv"
    with path.open("wb") as fh:  # a sparse 1.2 GB file: costs no disk, would cost memory to read
        fh.write(b"time,wind_mean_ms,wind_gust_ms,air_temp_c,rel_humidity_pct\n")
        fh.write(b"2026-01-01T00:00:00Z,1.0,2.0,3.0,50\n" * 200)
        fh.truncate(1_200_000_000)
    status = main(["outlook", "--feed", str(path), "--forecast", str(path)])
    err = capsys.readouterr().err
    assert status == 2 and "split the archive" in err and len(err.strip().splitlines()) == 1
    os.unlink(path)
    with path.open("wb") as fh:
        fh.write(b"time,wind_mean_ms,wind_gust_ms,air_temp_c,rel_humidity_pct\n")
        fh.truncate(1_200_000_000)
    status = main(["replay", "--feed", str(path)])
    err = capsys.readouterr().err
    assert status == 2 and "NUL bytes" in err and len(err.strip().splitlines()) == 1
    os.unlink(path)
