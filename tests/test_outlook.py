"""advisor outlook: every forecast step evaluated, gaps unknown, margins applied, and its outputs.

The weather here is synthetic (tests/conftest.py) and only puts the decision in a known state.
Trade figures used: a mean wind of about 4 m/s is a usual upper limit for high-frequency
observing on large dishes (common practice; the demo site's
``high_frequency_wind_limit_ms``).  The humidity check compares with psychrolib (ASHRAE
Handbook—Fundamentals formulas).
"""

from __future__ import annotations

import importlib.util
import json
import sys
from dataclasses import replace
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from advisor.decision import VERDICTS
from advisor.errors import SiteError
from advisor.evaluation.outlook import apply_forecast_margins, combine_frames, compute_outlook
from advisor.io.feed import canonical_frame
from advisor.io.site import FeedLayout, load_site
from advisor.views.context import Context
from advisor.views.outlook_plain import render_plain_outlook

from .conftest import NIGHT_UTC, registry_at, run_cli, weather_table

ROOT = Path(__file__).resolve().parent.parent
LAYOUT = FeedLayout(max_feed_age_min=15.0)


def forecast_table(hours=6.0, step_min=10.0, start=NIGHT_UTC, drop_minutes=(), issued=None, **weather):
    """Forecast rows every ``step_min`` after ``start`` (canonical names), optionally with holes."""
    table = weather_table(end=start + pd.Timedelta(hours=hours), hours=hours, step_min=step_min, **weather).iloc[1:]
    minutes = ((pd.to_datetime(table["time"], utc=True) - start).dt.total_seconds() / 60.0).round().astype(int)
    table = table[~minutes.isin(list(drop_minutes)).to_numpy()].copy()
    table["kind"] = "forecast"
    if issued is not None:
        table["issued"] = pd.Timestamp(issued).strftime("%Y-%m-%dT%H:%M:%SZ")
    return table


def frame_of(forecast, observed=None, issued=None):
    observed = weather_table() if observed is None else observed
    fc = canonical_frame(forecast, LAYOUT).frame
    if issued is not None:
        fc["issued_utc"] = pd.Timestamp(issued)
    return combine_frames(canonical_frame(observed, LAYOUT).frame, fc)


@pytest.fixture()
def site(demo_site):
    def make(**forecast):
        # a 2 h session: on the calm synthetic night the quick laser scan is the call
        return replace(
            demo_site,
            forecast=replace(demo_site.forecast, **forecast),
            thresholds=replace(demo_site.thresholds, session_hours=2.0),
        )

    return make


def outlook_of(frame, site, rules, hours=6.0, **kw):
    registry = registry_at(NIGHT_UTC - pd.Timedelta(hours=2), 2.8)
    return compute_outlook(frame, NIGHT_UTC, hours, site, registry, rules, 86.0, **kw)


def test_every_step_is_evaluated_on_the_forecast_grid(site, default_rules):
    out = outlook_of(frame_of(forecast_table()), site(), default_rules)
    times = pd.DatetimeIndex(out.steps["time"])
    assert out.step_min == 10.0
    assert len(times) == 36
    assert times[0] == NIGHT_UTC and times[-1] == NIGHT_UTC + pd.Timedelta(minutes=350)
    assert (np.diff(times.asi8) == 600_000_000_000).all()
    assert set(out.steps["verdict"]) == {"scan"}  # calm clear night, fresh reference
    assert out.steps["source"].iloc[0] == "observed" and (out.steps["source"].iloc[1:] == "forecast").all()


def test_gap_in_the_forecast_is_unknown_never_good_and_splits_windows(site, default_rules):
    # rows at +120 .. +170 min are missing: six 10-minute steps have no forecast of their own
    table = forecast_table(drop_minutes=range(120, 180, 10))
    out = outlook_of(frame_of(table), site(), default_rules)
    steps = out.steps
    gap_times = pd.DatetimeIndex(steps.loc[steps["gap"], "time"])
    assert list(gap_times) == list(pd.date_range(NIGHT_UTC + pd.Timedelta(minutes=120), periods=6, freq="10min"))
    assert (steps.loc[steps["gap"], "verdict"] == "undetermined").all()
    assert not steps.loc[steps["gap"], "scan_feasible"].any()
    scan = out.windows["scan"]
    assert len(scan) == 2
    assert scan.iloc[0]["end_utc"] == NIGHT_UTC + pd.Timedelta(minutes=120)
    assert scan.iloc[1]["start_utc"] == NIGHT_UTC + pd.Timedelta(minutes=180)
    assert any("gap" in note for note in out.notes)


def test_calm_spell_shorter_than_a_scan_needs_is_not_offered(site, default_rules):
    # windy (mean above the ~4 m/s high-frequency limit, common practice) except one 20-min lull
    table = forecast_table(wind_mean_ms=6.0, wind_gust_ms=7.5)
    lull = pd.to_datetime(table["time"], utc=True).between(
        NIGHT_UTC + pd.Timedelta(minutes=60), NIGHT_UTC + pd.Timedelta(minutes=70)
    )
    table.loc[lull.to_numpy(), ["wind_mean_ms", "wind_gust_ms"]] = [1.0, 1.8]
    out = outlook_of(frame_of(table), site(), default_rules)
    lull_steps = out.steps[
        pd.DatetimeIndex(out.steps["time"]).isin([NIGHT_UTC + pd.Timedelta(minutes=m) for m in (60, 70)])
    ]
    assert lull_steps["scan_feasible"].all()  # the steps themselves are fine ...
    assert out.min_window_min["scan"] == 12.0 + 10.0  # ... but 12 min scan + 10 min settling
    assert len(out.windows["scan"]) == 0 and out.next_window["scan"] is None
    longer = outlook_of(frame_of(table), site(settling_min=0.0), default_rules, min_duration_min=15.0)
    assert len(longer.windows["scan"]) == 1  # 20 min >= max(12 + 0, 15)


def test_wind_margin_is_applied_before_the_rules_and_said(site, default_rules):
    # 3.6 m/s is inside the ~4 m/s high-frequency limit (common practice); +20 % makes it 4.3 m/s
    table = forecast_table(wind_mean_ms=3.6, wind_gust_ms=3.9)
    plain = outlook_of(frame_of(table), site(wind_margin_pct=0.0, dew_point_margin_c=0.0), default_rules)
    careful = outlook_of(frame_of(table), site(wind_margin_pct=20.0, dew_point_margin_c=0.0), default_rules)
    assert (plain.steps["verdict"].iloc[1:] != "postpone").all()
    assert (careful.steps["verdict"].iloc[1:] == "postpone").all()
    assert careful.steps["wind_mean_ms"].iloc[-1] == pytest.approx(3.6 * 1.2)
    assert careful.steps["wind_mean_ms"].iloc[0] < 3.0  # observed rows are not touched
    assert careful.margins["applied"] and not plain.margins["applied"]
    assert any("wind and gusts +20 %" in note for note in careful.notes)


def test_dew_point_margin_keeps_humidity_consistent_with_psychrolib():
    """RH after raising the dew point equals the ASHRAE relation (psychrolib) within 0.5 %RH."""
    import psychrolib

    psychrolib.SetUnitSystem(psychrolib.SI)
    frame = canonical_frame(forecast_table(rel_humidity_pct=80.0), LAYOUT).frame
    out = apply_forecast_margins(frame, 0.0, 1.0)
    temp, dew = out["air_temp_c"].to_numpy(), out["dew_point_c"].to_numpy()
    assert dew == pytest.approx(frame["dew_point_c"].to_numpy() + 1.0)
    expected = [100.0 * psychrolib.GetRelHumFromTDewPoint(t, d) for t, d in zip(temp, dew)]
    assert out["rel_humidity_pct"].to_numpy() == pytest.approx(expected, abs=0.5)
    capped = apply_forecast_margins(frame, 0.0, 10.0)  # never above the air temperature
    assert (capped["dew_point_c"] <= capped["air_temp_c"] + 1e-9).all()


def test_rows_beyond_the_horizon_are_flagged(site, default_rules):
    issued = NIGHT_UTC - pd.Timedelta(hours=1)
    out = outlook_of(frame_of(forecast_table(), issued=issued), site(horizon_h=4.0), default_rules)
    beyond = out.steps["beyond_horizon"].to_numpy()
    row_age_h = (pd.DatetimeIndex(out.steps["time"]) - issued).total_seconds().to_numpy() / 3600.0
    expected = (row_age_h > 4.0) & (out.steps["source"] == "forecast").to_numpy()
    assert (beyond == expected).all() and beyond.any() and not beyond[:18].any()
    assert out.issued_utc == (issued,)
    assert out.windows["scan"]["beyond_horizon"].any()


def test_plain_view_reads_without_colour(site, default_rules):
    out = outlook_of(frame_of(forecast_table(drop_minutes=range(120, 150, 10))), site(), default_rules)
    ctx = Context(site_name="test site", time_zone="America/Denver", feed_source="x", is_demo=False, data_quality={})
    text = render_plain_outlook(out, ctx, width=80)
    assert "\x1b[" not in text
    strip = [line for line in text.splitlines() if line.startswith("      S")]
    assert strip and "???" in "".join(strip)
    assert "UTC   " in text and "MST   " in text
    assert all(len(line) <= 80 for line in text.splitlines()[:20])


# --- the command line ----------------------------------------------------------------------
run = run_cli


@pytest.fixture()
def files(tmp_path):
    feed = tmp_path / "feed.csv"
    table = pd.concat(
        [weather_table().assign(kind="observed", issued=""), forecast_table(drop_minutes=(60, 70), issued=NIGHT_UTC)],
        ignore_index=True,
    )
    table.to_csv(feed, index=False)
    refs = tmp_path / "refs.csv"
    refs.write_text(f"time,air_temp_c,note\n{(NIGHT_UTC - pd.Timedelta(hours=2)):%Y-%m-%dT%H:%M:%SZ},2.8,test\n")
    return feed, refs


def test_csv_has_one_row_per_step_with_iso_utc_time_and_verdict(capsys, files):
    feed, refs = files
    status, out, err = run(
        capsys,
        "outlook",
        "--feed",
        str(feed),
        "--references",
        str(refs),
        "--from",
        "2026-01-16T04:00:00Z",
        "--hours",
        "6",
        "--csv",
    )
    assert status == 0 and err == ""
    lines = out.splitlines()
    header = lines[0].split(",")
    assert header[:2] == ["time", "verdict"]
    rows = [line.split(",") for line in lines[1:]]
    assert len(rows) == 36
    times = pd.to_datetime([r[0] for r in rows], format="%Y-%m-%dT%H:%M:%SZ", utc=True)
    assert times[0] == NIGHT_UTC and (np.diff(times.as_unit("s").asi8) == 600).all()
    assert {r[1] for r in rows} <= set(VERDICTS)
    gap_col = header.index("gap")
    assert [r[1] for r in rows if r[gap_col] == "true"] == ["undetermined", "undetermined"]  # CSV booleans: true/false


def test_json_carries_steps_windows_and_next_window(capsys, files):
    feed, refs = files
    status, out, _ = run(
        capsys,
        "outlook",
        "--feed",
        str(feed),
        "--references",
        str(refs),
        "--from",
        "2026-01-16T04:00:00Z",
        "--hours",
        "6",
        "--json",
    )
    doc = json.loads(out)
    assert status == 0
    for key in (
        "schema_version",
        "from_utc",
        "to_utc",
        "step_min",
        "steps",
        "windows",
        "next_window",
        "forecast",
        "counts",
        "notes",
        "cautions",
    ):
        assert key in doc
    assert len(doc["steps"]) == 36 and doc["step_min"] == 10.0
    assert {"time_utc", "verdict", "gap", "beyond_horizon"} <= set(doc["steps"][0])
    assert set(doc["next_window"]) == {"scan", "astronomical"}
    assert doc["forecast"]["issued_utc"] == ["2026-01-16T04:00:00Z"]
    scan = [w for w in doc["windows"] if w["method"] == "scan"]
    assert [w["end_utc"] for w in scan][:1] == ["2026-01-16T05:00:00Z"]  # the gap at +60 min ends it
    assert doc["next_window"]["scan"]["start_utc"] == "2026-01-16T04:00:00Z"
    assert doc["counts"]["gap"] == 2


def test_svg_is_written_and_a_bad_path_is_one_line_exit_2(capsys, files, tmp_path):
    feed, refs = files
    target = tmp_path / "outlook.svg"
    args = ["outlook", "--feed", str(feed), "--references", str(refs), "--from", "2026-01-16T04:00:00Z", "--hours", "3"]
    status, out, err = run(capsys, *args, "--svg", str(target))
    assert status == 0 and target.read_text().startswith("<svg") and "saved" in err
    assert "S" in out and "Next window" in out
    status, _, err = run(capsys, *args, "--svg", str(tmp_path / "nowhere" / "x.svg"))
    assert status == 2 and err.startswith("advisor: error:") and len(err.strip().splitlines()) == 1
    assert not (tmp_path / "nowhere").exists()


@pytest.mark.parametrize(
    "bad",
    [
        ["--hours", "-3"],
        ["--hours", "lots"],
        ["--min-duration-min", "x"],
        ["--from", "tomorrow"],
        ["--from", "2027-06-01T00:00:00Z"],
    ],
)
def test_bad_options_are_one_line_exit_2(capsys, files, bad):
    feed, refs = files
    status, out, err = run(capsys, "outlook", "--feed", str(feed), "--references", str(refs), *bad)
    assert status == 2 and out == ""
    assert err.startswith("advisor: error:") and len(err.strip().splitlines()) == 1


def test_check_shows_the_next_window_when_the_feed_has_future_rows(capsys, files):
    feed, refs = files
    status, out, _ = run(
        capsys, "check", "--feed", str(feed), "--references", str(refs), "--at", "2026-01-16T04:00:00Z", "--json"
    )
    doc = json.loads(out)
    assert status == 0 and doc["verdict"] == "scan"
    assert doc["next_window"]["scan"]["start_utc"] == "2026-01-16T04:00:00Z"
    assert doc["next_window"]["scan"]["end_utc"] == "2026-01-16T05:00:00Z"


# --- the demo forecast -----------------------------------------------------------------------
def test_demo_outlook_shows_every_verdict_and_says_it_applied_margins(capsys):
    status, out, _ = run(capsys, "outlook", "--json")
    doc = json.loads(out)
    assert status == 0 and doc["demo_data"] is True
    assert set(doc["counts"]) == {*VERDICTS, "gap"}
    assert all(doc["counts"][v] > 0 for v in ("scan", "astronomical", "postpone", "undetermined", "gap"))
    assert doc["forecast"]["margins"]["applied"] and any("margins applied" in n for n in doc["notes"])
    assert doc["forecast"]["steps_beyond_horizon"] > 0


def _load(name, path):
    spec = importlib.util.spec_from_file_location(name, path)
    module = importlib.util.module_from_spec(spec)
    sys.modules[name] = module
    spec.loader.exec_module(module)
    return module


def test_committed_demo_forecast_matches_its_generator(tmp_path):
    mf = _load("make_forecast_under_test", ROOT / "example_weather" / "make_forecast.py")
    before = mf.md.DEMO_WEEK_OVERRIDES
    out = tmp_path / "forecast.csv"
    mf.write_forecast(out)
    assert mf.md.DEMO_WEEK_OVERRIDES is before  # the demo week's scenario is restored
    assert out.read_bytes() == (ROOT / "example_weather" / "larch_basin_forecast.csv").read_bytes()
    table = pd.read_csv(out)
    assert set(table["kind"]) == {"forecast"} and table["issued"].nunique() == 1


def test_site_forecast_section_is_validated(tmp_path):
    text = (ROOT / "example_weather" / "larch_basin.yaml").read_text()
    good = load_site(ROOT / "example_weather" / "larch_basin.yaml").forecast
    assert good.wind_margin_pct == 20 and good.path.name == "larch_basin_forecast.csv"
    for old, new in (("  wind_margin_pct: 20", "  wind_margin_pc: 20"), ("  horizon_h: 20", "  horizon_h: -1")):
        bad = tmp_path / "site.yaml"
        bad.write_text(text.replace(old, new))
        with pytest.raises(SiteError) as info:
            load_site(bad)
        assert info.value.field.startswith("forecast.") and info.value.line is not None


def test_implausible_forecast_row_is_undetermined_not_a_gap(site, default_rules):
    table = forecast_table()
    table.iloc[5, table.columns.get_loc("rel_humidity_pct")] = 140.0  # outside 0-100 %
    out = outlook_of(frame_of(table), site(), default_rules)
    bad = out.steps.iloc[6]  # step 0 is the observed row
    assert bad["verdict"] == "undetermined" and not bad["gap"]
    assert not out.steps["gap"].any()
    assert len(out.windows["scan"]) == 2


def test_observations_supersede_forecast_rows_for_the_same_hours(site, default_rules):
    # observed calm until +60 min, a (windy) forecast issued earlier covers the same hour and after
    observed = weather_table(end=NIGHT_UTC + pd.Timedelta(minutes=60), hours=4.0)
    forecast = forecast_table(start=NIGHT_UTC - pd.Timedelta(minutes=60), hours=4.0, wind_mean_ms=6.0, wind_gust_ms=7.5)
    out = outlook_of(frame_of(forecast, observed=observed), site(), default_rules, hours=3.0)
    minutes = (pd.DatetimeIndex(out.steps["time"]) - NIGHT_UTC).total_seconds() / 60.0
    early, late = out.steps[minutes <= 60], out.steps[minutes >= 70]
    assert (early["source"] == "observed").all() and (early["verdict"] == "scan").all()
    assert (late["source"] == "forecast").all() and (late["verdict"] == "postpone").all()
    assert any("hindsight" in note for note in out.notes)


def test_issue_times_are_read_with_the_feed_in_one_pass(tmp_path):
    """The feed reader carries each row's issue time, so nothing re-reads the file for it."""
    from advisor.errors import FeedError
    from advisor.io.feed import read_feed
    from advisor.io.site import FeedLayout

    table = weather_table(hours=1.0)
    table["kind"] = ["observed"] * 31 + ["forecast"] * 30
    table["issued"] = [""] * 31 + ["2026-01-16T03:30:00Z"] * 30
    path = tmp_path / "mixed.csv"
    table.to_csv(path, index=False)
    frame = read_feed(path, FeedLayout(), issue_time_column="issued").frame
    assert frame["issued_utc"].isna().sum() == 31
    assert (frame.loc[frame["kind"] == "forecast", "issued_utc"] == pd.Timestamp("2026-01-16T03:30:00Z")).all()
    table.loc[40, "issued"] = "2026-01-16T03:30:00"  # no offset
    table.to_csv(path, index=False)
    with pytest.raises(FeedError) as info:
        read_feed(path, FeedLayout(), issue_time_column="issued")
    assert info.value.line == 42 and info.value.field == "issued"
