"""A logger's file as exported, described by the site file alone: lines above the header, date
and time in two columns, strftime layouts, period-ending stamps with 24:00, fixed-offset zones,
precipitation depths, no gust sensor, step limits, cadence-based limits, and where the site file
is found.  (The files here are invented; they only exercise the reader.)"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from advisor.errors import FeedError, SiteError
from advisor.io.feed import canonical_frame, read_feed
from advisor.io.feedlayout import ColumnMap, FeedLayout, parse_time_zone
from advisor.io.site import load_site

from .conftest import NIGHT_UTC, registry_at, run_cli, weather_table

HOURLY = FeedLayout(
    skip_lines=1, time_column=("Date", "Time"), time_format="%m/%d/%Y %H:%M", time_label="end", time_zone="Etc/GMT+5"
)


def _hourly_file(path, rows: list[str], meta: str = 'id,"A STATION",XX,-5.0') -> None:
    path.write_text(
        meta + "\nDate,Time,wind_mean_ms,wind_gust_ms,air_temp_c,rel_humidity_pct\n" + "".join(r + "\n" for r in rows)
    )


def test_metadata_line_split_date_time_and_hour_ending_24_00(tmp_path):
    path = tmp_path / "hourly.csv"
    _hourly_file(path, [f"01/15/2026,{h:02d}:00,1.0,2.0,3.0,70" for h in range(1, 25)])
    frame = read_feed(path, HOURLY).frame
    assert len(frame) == 24
    assert frame["time"].iloc[0] == pd.Timestamp("2026-01-15T06:00:00Z")  # 01:00 at UTC-05:00
    assert frame["time"].iloc[-1] == pd.Timestamp("2026-01-16T05:00:00Z")  # 24:00 = next day 00:00


def test_24_00_needs_time_label_end_and_a_minute_of_24_is_not_midnight(tmp_path):
    path = tmp_path / "hourly.csv"
    _hourly_file(path, ["01/15/2026,23:00,1,2,3,70", "01/15/2026,24:00,1,2,3,70"])
    with pytest.raises(FeedError) as err:
        read_feed(
            path, FeedLayout(skip_lines=1, time_column=("Date", "Time"), time_format="%m/%d/%Y %H:%M", time_zone="UTC")
        )
    assert err.value.line == 4 and "time_label: end" in err.value.hint
    minutes = tmp_path / "minutes.csv"
    minutes.write_text(
        "time,wind_mean_ms,wind_gust_ms,air_temp_c,rel_humidity_pct\n"
        "15.01.2026 03:24:00,1,2,3,70\n15.01.2026 03:25:00,1,2,3,70\n"
    )
    frame = read_feed(minutes, FeedLayout(time_format="%d.%m.%Y %H:%M:%S", time_label="end", time_zone="UTC")).frame
    assert frame["time"].iloc[0] == pd.Timestamp("2026-01-15T03:24:00Z")


def test_time_format_mismatch_and_skipped_lines_give_true_file_lines(tmp_path):
    path = tmp_path / "hourly.csv"
    _hourly_file(path, ["01/15/2026,01:00,1,2,3,70", "2026-01-15,02:00,1,2,3,70"])
    with pytest.raises(FeedError) as err:
        read_feed(path, HOURLY)
    assert err.value.line == 4 and "does not match time_format" in err.value.message
    with pytest.raises(FeedError) as err:
        read_feed(path, FeedLayout(skip_lines=1, time_column=("Date", "Hour"), time_format="%m/%d/%Y %H:%M"))
    assert err.value.line == 2 and "no time column 'Hour'" in err.value.message  # the header, below one line


def test_period_start_stamps_move_to_the_period_end():
    table = weather_table(step_min=60.0, hours=5.0)
    start = canonical_frame(table, FeedLayout(time_label="start")).frame
    instant = canonical_frame(table, FeedLayout()).frame
    assert (start["time"] - instant["time"] == pd.Timedelta(hours=1)).all()


@pytest.mark.parametrize(
    "written, name, offset_h",
    [
        ("UTC-05:00", "Etc/GMT+5", -5),
        ("UTC+5", "Etc/GMT-5", 5),
        ("Etc/GMT+5", "Etc/GMT+5", -5),
        ("UTC+05:30", "UTC+05:30", 5.5),
        ("UTC+00:00", "UTC", 0),
    ],
)
def test_fixed_offset_zones(written, name, offset_h):
    assert parse_time_zone(written) == name
    table = weather_table(hours=0.1)
    table["time"] = pd.to_datetime(table["time"]).dt.tz_localize(None).dt.strftime("%Y-%m-%dT%H:%M:%S")
    frame = canonical_frame(table, FeedLayout(time_zone=name)).frame
    wall = pd.Timestamp(table["time"].iloc[0])
    assert frame["time"].iloc[0] == (wall - pd.Timedelta(hours=offset_h)).tz_localize("UTC")


def test_precipitation_depth_over_fixed_and_per_row_hours():
    table = weather_table(step_min=60.0, hours=3.0)
    table["depth"] = [6.0, 6.0, -9900, 3.0]
    table["period"] = [6, 3, 6, 0]
    per_row = FeedLayout(
        missing=(-9900.0,), columns=(ColumnMap("precip_mm_h", "depth", "mm", over_hours_from="period"),)
    )
    rate = canonical_frame(table.drop(columns=["precip_mm_h"]), per_row).frame["precip_mm_h"].to_numpy()
    assert rate[:2].tolist() == [1.0, 2.0] and np.isnan(rate[2]) and np.isnan(rate[3])  # coded; zero hours
    fixed = FeedLayout(columns=(ColumnMap("precip_mm_h", "depth", "in", over_hours=1.0),))
    table["depth"] = [0.1, 0.0, 0.2, 0.0]
    rate = canonical_frame(table.drop(columns=["precip_mm_h"]), fixed).frame["precip_mm_h"].to_numpy()
    assert rate == pytest.approx([2.54, 0.0, 5.08, 0.0])  # 1 in = 25.4 mm (definition)


def test_a_station_without_gust_sensor_gets_estimated_gusts(call_for, demo_site):
    table = weather_table(wind_mean_ms=3.0).drop(columns=["wind_gust_ms"])
    feed = canonical_frame(table, FeedLayout(gust_factor=1.5))
    assert feed.frame["wind_gust_ms"].to_numpy() == pytest.approx(4.5) and feed.frame["gust_estimated"].all()
    with pytest.raises(FeedError, match="gust_factor"):
        canonical_frame(table, FeedLayout())
    call = call_for(table, layout=FeedLayout(gust_factor=1.5))
    assert call.features["gust_estimated"]
    assert any("gusts estimated" in r.message for r in call.reasons if r.rule == "gusts_add_vibration")


def test_a_one_minute_humidity_jump_is_implausible_and_named(tmp_path, capsys):
    """Step limit 10 %/min for relative humidity (Zahumenský 2004, WMO AWS QC guidelines, from memory)."""
    table = weather_table(hours=1.0, rel_humidity_pct=60.0)
    table.loc[table.index[-1], "rel_humidity_pct"] = 99.0
    feed = canonical_frame(table, FeedLayout())
    assert feed.frame["q_implausible"].iloc[-1] and feed.quality.implausible_by_column == {"rel_humidity_pct": 1}
    path = tmp_path / "jump.csv"
    table.to_csv(path, index=False)
    status, out, _ = run_cli(capsys, "check", "--feed", path, "--at", NIGHT_UTC.isoformat(), "--json")
    doc = json.loads(out)
    assert status == 12 and doc["verdict"] == "undetermined"
    message = next(r["message"] for r in doc["reasons"] if r["rule"] == "data")
    assert "'rel_humidity_pct' changed from 60 to 99 % in 1 min (limit 10 %/min)" in message
    # a site may set its own limit
    relaxed = canonical_frame(table, FeedLayout(max_change_per_min=(("rel_humidity_pct", 50.0),)))
    assert not relaxed.frame["q_implausible"].iloc[-1]


def test_an_implausible_latest_value_names_its_column_and_value(tmp_path, capsys):
    table = weather_table(hours=1.0)
    table.loc[table.index[-1], "air_temp_c"] = 85.0
    path = tmp_path / "hot.csv"
    table.to_csv(path, index=False)
    status, out, _ = run_cli(capsys, "check", "--feed", path, "--at", NIGHT_UTC.isoformat(), "--json")
    message = next(r["message"] for r in json.loads(out)["reasons"] if r["rule"] == "data")
    assert status == 12 and "'air_temp_c' = 85 °C is outside the plausible -60..60 °C" in message


def test_an_hourly_feed_is_not_stale_between_samples_and_its_limits_follow_the_cadence(call_for, demo_site):
    from dataclasses import replace

    site = replace(demo_site, feed=FeedLayout())  # no limits set: from the cadence
    table = weather_table(step_min=60.0, hours=12.0)
    registry = registry_at(NIGHT_UTC - pd.Timedelta(hours=1), 2.0)
    between = call_for(table, at=NIGHT_UTC + pd.Timedelta(minutes=59), registry=registry, site=site)
    assert between.features["data_ok"] and between.features["wind_window_min"] == 60
    late = call_for(table, at=NIGHT_UTC + pd.Timedelta(minutes=100), registry=registry, site=site)
    assert late.verdict == "undetermined"
    assert "limit 1 h 30 min" in next(r.message for r in late.reasons if r.rule == "data")
    feed = canonical_frame(table.drop(index=[3, 4]), FeedLayout())
    assert feed.quality.cadence_min == 60 and feed.quality.n_gaps == 1  # a 3-h step; 2.5 h allowed


def test_site_from_advisor_site_then_the_config_folder_then_the_demo(tmp_path, monkeypatch, capsys):
    feed = tmp_path / "feed.csv"
    weather_table(hours=1.0).to_csv(feed, index=False)
    site = tmp_path / "mine.yaml"
    site.write_text(
        "site:\n  name: My station\n  latitude_deg: 47.1\n  longitude_deg: -114.0\n  dish_diameter_m: 90\n"
        f"feed:\n  path: {feed}\n"
    )
    at = NIGHT_UTC.isoformat()
    _, out, _ = run_cli(capsys, "check", "--at", at, "--json")
    assert json.loads(out)["demo_data"] is True
    config = tmp_path / "config" / "advisor"
    config.mkdir(parents=True)
    (config / "site.yaml").write_text(site.read_text().replace("My station", "Config station"))
    monkeypatch.setenv("XDG_CONFIG_HOME", str(tmp_path / "config"))
    _, out, _ = run_cli(capsys, "check", "--at", at, "--json")
    assert json.loads(out)["site"] == "Config station"
    monkeypatch.setenv("ADVISOR_SITE", str(site))
    _, out, _ = run_cli(capsys, "check", "--at", at, "--json")
    assert json.loads(out)["site"] == "My station"
    monkeypatch.setenv("ADVISOR_SITE", str(tmp_path / "nowhere.yaml"))
    status, _, err = run_cli(capsys, "check", "--at", at)
    assert status == 2 and "ADVISOR_SITE" in err and len(err.strip().splitlines()) == 1


def test_todo_left_in_a_site_file_is_refused(tmp_path):
    path = tmp_path / "site.yaml"
    path.write_text("site:\n  name: x\n  latitude_deg: 47\n  longitude_deg: 1\n  dish_diameter_m: TODO\n")
    with pytest.raises(SiteError) as err:
        load_site(path)
    assert err.value.line == 5 and "still says TODO" in err.value.message
