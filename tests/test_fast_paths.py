"""Each fast path of the feed reader and the physics gives the general path's numbers, to the bit.

Reference: the general path of the same code on the same input (both stay in the code): the
strict time reader, the sort and row filter of a feed, the gather of the step test, numpy's
floor remainder, the refraction formula evaluated as a whole.  The feeds are the invented demo
mast and an invented archive made by benchmarks/make_archive.py (no check value comes from them:
each side is compared with the other).
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import advisor.io.feedtimes as feedtimes
from advisor.io.feed import canonical_frame, read_feed
from advisor.io.feedvalues import kind_rows, step_basis, step_outliers
from advisor.io.site import load_site
from advisor.physics.ephemeris import _REFRACTION_SPLIT_SIZE, _refraction_deg
from advisor.physics.track import _wrap_180

ROOT = Path(__file__).resolve().parent.parent
SITE = ROOT / "example_weather" / "larch_basin.yaml"


@pytest.fixture(scope="module")
def archive(tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("archive") / "weeks.csv"
    subprocess.run(
        [sys.executable, str(ROOT / "benchmarks" / "make_archive.py"), "--start", "2026-03-01", "--days", "15"]
        + ["--out", str(out)],
        check=True,
        capture_output=True,
    )
    return out


def _same_feed(a, b) -> None:
    pd.testing.assert_frame_equal(a.frame, b.frame, check_exact=True)
    assert a.quality == b.quality


@pytest.mark.parametrize("which", ["demo", "archive"])
def test_the_canonical_frame_is_the_same_without_the_fast_time_path(which, archive, monkeypatch):
    site = load_site(SITE)
    path = ROOT / "example_weather" / "larch_basin_mast.csv" if which == "demo" else archive
    fast = read_feed(path, site.feed)
    monkeypatch.setattr(feedtimes, "uniform_iso_ns", lambda _values: None)
    strict = read_feed(path, site.feed)
    _same_feed(fast, strict)


def test_an_ordered_feed_skips_the_sort_and_gives_the_sorted_frame(archive):
    """Two rows swapped (sorted back) and one row repeated (dropped) give the in-order frame."""
    site = load_site(SITE)
    table = pd.read_csv(archive)
    ordered = canonical_frame(table, site.feed)
    assert ordered.quality.n_out_of_order == 0 and ordered.quality.n_duplicates == 0
    messy = pd.concat([table.iloc[:100], table.iloc[[101, 100]], table.iloc[[101]], table.iloc[102:]])
    fixed = canonical_frame(messy.reset_index(drop=True), site.feed)
    assert fixed.quality.n_out_of_order == 1 and fixed.quality.n_duplicates == 1
    pd.testing.assert_frame_equal(ordered.frame, fixed.frame, check_exact=True)


@pytest.mark.parametrize("kinds", [["observed"], ["observed", "forecast"]])
def test_the_step_test_by_shift_is_the_step_test_by_gather(kinds):
    rng = np.random.default_rng(7)
    n = 5000
    time_ns = np.cumsum(rng.integers(1, 4, n)) * 60_000_000_000
    values = rng.normal(0.0, 3.0, n)
    values[rng.random(n) < 0.05] = np.nan
    groups = kind_rows(rng.choice(np.array(kinds, dtype=object), n))
    has, prev, minutes = step_basis(time_ns, groups)
    gathered = (has, np.clip(np.arange(n) - 1, 0, None) if prev is None else prev, minutes)
    assert (prev is None) == (len(kinds) == 1)
    for limit in (0.3, 1.0, 4.0):
        assert np.array_equal(
            step_outliers(values, time_ns, groups, limit, (has, prev, minutes)),
            step_outliers(values, time_ns, groups, limit, gathered),
        )


def test_hour_angles_wrap_as_numpy_floor_remainder_does():
    rng = np.random.default_rng(11)
    f32 = np.float32
    edges = np.array([-540, -360, -180, 0, 180, 360, 540], dtype=f32)
    x = np.concatenate(
        [
            rng.uniform(-540, 540, 200_000).astype(f32),
            edges,
            np.nextafter(edges, f32(1e9)),
            np.nextafter(edges, f32(-1e9)),
            np.array([-0.0, 1e-40, -1e-40, -1e-6], dtype=f32),
        ]
    )
    for values in (x, np.append(x, f32(np.nan)), x * f32(3)):  # in range; NaN and out of range: np.mod
        got = values.copy()
        _wrap_180(got)
        want = np.mod(values + f32(180.0), f32(360.0)) - f32(180.0)
        assert np.array_equal(got.view(np.uint32), want.view(np.uint32))


def test_refraction_in_parts_is_refraction_as_a_whole():
    """Long arrays evaluate each branch only where it applies; short ones evaluate all three."""
    rng = np.random.default_rng(3)
    e = rng.uniform(-95.0, 95.0, 20_000)
    e[::7] = rng.uniform(-1.0, 6.0, len(e[::7]))
    e[:6] = [5.0, -0.575, 0.0, 90.0, -90.0, np.nan]
    pressure = rng.uniform(800.0, 1030.0, e.size)
    step = _REFRACTION_SPLIT_SIZE - 1
    for p, t in ((1010.0, 10.0), (pressure, -4.0)):
        whole = _refraction_deg(e, p, t)
        pieces = np.concatenate(
            [
                _refraction_deg(e[i : i + step], p if np.ndim(p) == 0 else p[i : i + step], t)
                for i in range(0, e.size, step)
            ]
        )
        assert np.array_equal(whole.view(np.int64), pieces.view(np.int64))


def test_the_float32_sun_separation_is_the_float64_one():
    from advisor.physics.track import sun_separation_over_deg

    times = pd.date_range("2026-03-01", periods=3000, freq="7min", tz="UTC").as_unit("ns").to_numpy().copy()
    times[[5, 2000]] = np.datetime64("NaT")
    ra, dec = np.array([10.0, 200.0, 350.5]), np.array([5.0, -30.0, 60.0])
    wide = sun_separation_over_deg(times, ra, dec, 45.0)
    narrow = sun_separation_over_deg(times, ra, dec, 45.0, as_float32=True)
    assert narrow.dtype == np.float32 and wide.dtype == np.float64
    assert np.array_equal(narrow.astype(float), wide, equal_nan=True)
