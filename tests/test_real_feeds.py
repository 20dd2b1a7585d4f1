"""Real measured station files, read as shipped through a site file alone.

Data (test-only extra): pvlib 0.16.1 ships ``pvlib/data/703165TY.csv`` — a TMY3 typical-year
file (NSRDB): hourly, a metadata line above the header, date (MM/DD/YYYY) and time (HH:MM) in two
columns, hour-ending stamps with 24:00, local standard time UTC-09:00, ``-9900`` for a missing
value in two optional columns (visibility: 2,987 rows; precipitation: 8,011 rows), no gust
sensor, precipitation as a depth over a number of hours given per row.  It is read through
``tests/real_feeds/tmy3_703165.yaml`` and replayed for its whole year; every figure the advisor
reports is checked against the same figure computed here with pandas straight from the CSV.
``pvlib/data/723170TYA.CSV`` (same layout, UTC-05:00, no missing codes) serves the guessed layout.

The reference-scan registry is invented (one scan at 01:00 local each day): it only keeps the
laser method available; no check value comes from it.
"""

from __future__ import annotations

import contextlib
import io
import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from advisor.commands.main import main

pvlib = pytest.importorskip("pvlib")

DATA = Path(pvlib.__file__).parent / "data"
TMY3 = DATA / "703165TY.csv"  # pvlib 0.16.1, pvlib/data/703165TY.csv
TMY3_OTHER = DATA / "723170TYA.CSV"  # pvlib 0.16.1, pvlib/data/723170TYA.CSV
SITE = Path(__file__).parent / "real_feeds" / "tmy3_703165.yaml"
LAT, LON = 55.317, -160.517  # the file's metadata line
WIND_LIMIT_MS = 4.0  # the site file's thresholds
FOG_SPREAD_C, FOG_RH_PCT, FOG_VIS_M, RAIN_MM_H = 1.0, 97.0, 1000.0, 0.1
GAP_LIMIT_H = 2.5  # max(10 min, 2.5 × the 60-min cadence)
CODE = -9900


def run(*argv) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        status = main([str(a) for a in argv])
    return status, out.getvalue(), err.getvalue()


@pytest.fixture(scope="module")
def raw() -> pd.DataFrame:
    """The CSV as pandas reads it, with UTC times built independently of the advisor."""
    d = pd.read_csv(TMY3, skiprows=1)
    end_of_day = d["Time (HH:MM)"] == "24:00"
    local = pd.to_datetime(
        d["Date (MM/DD/YYYY)"] + " " + d["Time (HH:MM)"].where(~end_of_day, "00:00"), format="%m/%d/%Y %H:%M"
    ) + pd.to_timedelta(end_of_day.astype(int), unit="D")
    d["utc"] = (local + pd.Timedelta(hours=9)).dt.tz_localize("UTC")  # UTC-09:00 standard time
    d = d.sort_values("utc", kind="stable").reset_index(drop=True)
    step_h = d["utc"].diff().shift(-1).dt.total_seconds() / 3600
    step_h.iloc[-1] = step_h.median()
    d["hours"] = np.where(step_h <= GAP_LIMIT_H, step_h, 0.0)  # a row stands for the time to the next
    return d


@pytest.fixture(scope="module")
def replayed(raw, tmp_path_factory):
    folder = tmp_path_factory.mktemp("tmy3")
    first = raw[raw["Time (HH:MM)"] == "01:00"]
    refs = pd.DataFrame(
        {
            "time": first["utc"].dt.strftime("%Y-%m-%dT%H:%M:%SZ"),
            "air_temp_c": first["Dry-bulb (C)"],
            "note": "invented, keeps the laser available",
        }
    )
    refs.to_csv(folder / "refs.csv", index=False)
    status, out, err = run(
        "replay",
        "--site",
        SITE,
        "--feed",
        TMY3,
        "--references",
        folder / "refs.csv",
        "--json",
        "--csv",
        folder / "verdicts.csv",
        "--no-cache",
    )
    assert status == 0, err
    verdicts = pd.read_csv(folder / "verdicts.csv")
    verdicts["utc"] = pd.to_datetime(verdicts["time"], utc=True)
    return json.loads(out), raw.merge(verdicts[["utc", "verdict"]], on="utc", how="left"), folder


def test_a_year_replays_through_the_site_file_alone_with_hours_for_every_row(replayed, raw):
    summary, rows, _ = replayed
    assert rows["verdict"].notna().all()  # every row of the file evaluated
    assert sum(summary["hours"].values()) == pytest.approx(raw["hours"].sum())
    # every row has wind, temperature and humidity: nothing is undetermined
    required = raw[["Wspd (m/s)", "Dry-bulb (C)", "RHum (%)"]]
    assert not (required == CODE).any().any() and required.notna().all().all()
    assert summary["hours"]["undetermined"] == 0.0
    assert summary["hours"]["scan"] > 1000 and summary["hours"]["postpone"] > 1000


def test_hours_of_mean_wind_above_the_limit_match_pandas(replayed, raw):
    summary, _, _ = replayed
    expected = raw.loc[raw["Wspd (m/s)"] > WIND_LIMIT_MS, "hours"].sum()  # the hourly value is the 1-h mean
    assert summary["weather"]["wind_above_limit"] == pytest.approx(expected)


def _fog_like(temp_c, dew_c, rh_pct, vis_m) -> pd.Series:
    """Fog-like rows computed independently: spread to saturation below 1 °C with RH >= 97 %,
    over water at or above 0 °C and over ice below (the hygrometer's RH is over water: WMO-No. 8,
    ch. 4), or visibility below 1 km.  Saturation vapour pressures over water and over ice from
    metpy 1.7 (``saturation_vapor_pressure``, ``phase="solid"``); the frost-point spread is below
    1 °C exactly when the vapour pressure exceeds e_ice(T - 1 °C)."""
    import metpy.calc as mc
    from metpy.units import units as mu

    t = np.asarray(temp_c, dtype=float)
    e = mc.saturation_vapor_pressure(np.asarray(dew_c, dtype=float) * mu.degC).m_as("hPa")
    e_ice = mc.saturation_vapor_pressure(t * mu.degC, phase="solid").m_as("hPa")
    e_ice_1 = mc.saturation_vapor_pressure((t - FOG_SPREAD_C) * mu.degC, phase="solid").m_as("hPa")
    over_water = ((t - np.asarray(dew_c)) < FOG_SPREAD_C) & (np.asarray(rh_pct) >= FOG_RH_PCT)
    over_ice = (e > e_ice_1) & (100.0 * e / e_ice >= FOG_RH_PCT)
    humid = np.where(t < 0.0, over_ice, over_water)
    vis = np.asarray(vis_m)
    return pd.Series(humid | ((vis != CODE) & (vis < FOG_VIS_M)), index=pd.Index(temp_c.index))


def test_hours_of_fog_like_conditions_match_pandas(replayed, raw):
    summary, _, _ = replayed
    fog = _fog_like(raw["Dry-bulb (C)"], raw["Dew-point (C)"], raw["RHum (%)"], raw["Hvis (m)"])
    # a few hours may sit on a threshold where Magnus (ours) and metpy's Bolton form differ by < 0.1 °C
    assert abs(summary["weather"]["fog"] - raw.loc[fog.to_numpy(), "hours"].sum()) <= 3.0


def test_night_hours_match_the_sun_of_an_independent_ephemeris(replayed, raw):
    """Night: the sun's centre below -0.833° (geometric; refraction and semi-diameter).  Source:
    pvlib.solarposition.get_solarposition, NREL SPA (Reda & Andreas 2004, Solar Energy 76, 577)."""
    summary, _, _ = replayed
    sun = pvlib.solarposition.get_solarposition(pd.DatetimeIndex(raw["utc"]), LAT, LON, altitude=7)
    night = (sun["elevation"] < -0.833).to_numpy()
    expected = raw.loc[night, "hours"].sum()
    assert abs(summary["weather"]["night"] - expected) <= 3.0  # rows within seconds of sunrise or sunset
    assert expected > 3000


def test_precipitation_depths_over_their_hours_and_codes_are_never_rain_or_no_rain(replayed, raw):
    summary, _, _ = replayed
    depth, hours = raw["Lprecip depth (mm)"], raw["Lprecip quantity (hr)"]
    known = (depth != CODE) & (hours != CODE) & (hours > 0)
    rate = depth.where(known) / hours.where(known)
    assert summary["weather"]["precipitation"] == pytest.approx(raw.loc[rate >= RAIN_MM_H, "hours"].sum())
    assert summary["not_seen"]["precip_mm_h"]["hours"] == pytest.approx(raw.loc[~known, "hours"].sum())
    vis_missing = raw["Hvis (m)"] == CODE
    assert summary["not_seen"]["visibility_m"]["hours"] == pytest.approx(raw.loc[vis_missing, "hours"].sum())


def _dropout(values: pd.Series, times: pd.Series, hold_h: float = 3.0, run: int = 3) -> np.ndarray:
    """Pandas/loop version of "an optional sensor fell silent after reporting steadily": missing now,
    last value at most ``hold_h`` earlier and ending at least ``run`` reports in a row."""
    out = np.zeros(len(values), dtype=bool)
    streak, last_run, last_time = 0, 0, None
    for i, (v, t) in enumerate(zip(values.to_numpy(), times)):
        if v != CODE:
            streak += 1
            last_run, last_time = streak, t
        else:
            streak = 0
            out[i] = last_time is not None and (t - last_time) <= pd.Timedelta(hours=hold_h) and last_run >= run
    return out


def test_postpone_hours_match_the_weather(replayed, raw):
    _, rows, _ = replayed
    wind = rows["Wspd (m/s)"]
    depth, hours = rows["Lprecip depth (mm)"], rows["Lprecip quantity (hr)"]
    rain = ((depth != CODE) & (hours != CODE) & (hours > 0)) & (depth / hours.where(hours > 0) >= RAIN_MM_H)
    fog = _fog_like(rows["Dry-bulb (C)"], rows["Dew-point (C)"], rows["RHum (%)"], rows["Hvis (m)"])
    dropout = _dropout(rows["Hvis (m)"], rows["utc"]) | _dropout(rows["Lprecip depth (mm)"], rows["utc"])
    # the wind pointing error of holography (1.2" at 4 m/s gusts, ∝ gust²; gusts = 1.6 × mean) beyond a
    # tenth of the 86-GHz beam of a 90-m dish (1.2 λ/D): the site file's figures, not a check value
    beam_arcsec = np.degrees(1.2 * (299_792_458 / 86e9) / 90) * 3600
    gusty = 1.2 * (1.6 * wind / 4.0) ** 2 > 0.1 * beam_arcsec
    verdict = rows["verdict"]
    assert (verdict[(wind > WIND_LIMIT_MS) | rain] == "postpone").all()
    for method in ("scan", "astronomical"):
        assert not ((verdict == method) & ((wind > WIND_LIMIT_MS) | rain)).any(), method
    assert not ((verdict == "scan") & (fog | dropout)).any()  # no scan in fog or on a sensor dropout
    # every other postpone hour has weather against each method: the laser in fog or on a dropout,
    # holography in gusty wind
    other = (verdict == "postpone") & ~((wind > WIND_LIMIT_MS) | rain)
    assert (fog | dropout | gusty)[other].all()
    assert other.sum() > 0


def test_no_silent_no_rain_rules_that_need_precipitation_stay_undecided(raw):
    """In-process over the same year: where precipitation is not seen, the rain rule neither
    fires nor clears, and a scan near saturation gets the caution."""
    from advisor.commands.session import load_ruleset
    from advisor.evaluation.evaluate import Scenario
    from advisor.io.feed import read_feed
    from advisor.io.references import Registry
    from advisor.io.site import load_site

    site = load_site(SITE)
    frame = read_feed(TMY3, site.feed).frame
    first = raw[raw["Time (HH:MM)"] == "01:00"]
    registry = Registry(pd.DatetimeIndex(first["utc"]), first["Dry-bulb (C)"].to_numpy(dtype=float), ("test",))
    decisions = Scenario(site, registry, load_ruleset(site), 86.0).evaluate(frame, pd.DatetimeIndex(frame["time"]))
    unseen = ~np.isfinite(decisions.features["precip_mm_h"].to_numpy())
    by_time = raw.set_index("utc")
    codes = (by_time.loc[pd.DatetimeIndex(frame["time"]), "Lprecip depth (mm)"] == CODE).to_numpy()
    assert (unseen == codes).all()
    assert decisions.rule_eval.unknown["rain_stops_both"][unseen].all()
    assert not decisions.rule_eval.fired["rain_stops_both"][unseen].any()
    f = decisions.features
    near = unseen & (f["dew_point_spread_c"].to_numpy() < 2) & (f["rel_humidity_pct"].to_numpy() >= 90)
    scan = decisions.verdict == "scan"
    assert (scan & near).any()
    assert decisions.rule_eval.fired["rain_unknown_near_saturation"][scan & near].all()


def test_a_call_on_the_real_file_says_what_it_could_not_see_and_that_gusts_are_estimated(replayed):
    _, rows, folder = replayed
    unseen_scan = rows[
        (rows["verdict"] == "scan")
        & (rows["Lprecip depth (mm)"] == CODE)
        & (rows["Dry-bulb (C)"] - rows["Dew-point (C)"] < 2)
        & (rows["RHum (%)"] >= 90)
    ]
    at = unseen_scan["utc"].iloc[len(unseen_scan) // 2].strftime("%Y-%m-%dT%H:%M:%SZ")
    argv = ("check", "--site", SITE, "--feed", TMY3, "--references", folder / "refs.csv", "--at", at)
    status, out, err = run(*argv, "--json")
    doc = json.loads(out)
    assert status == 0 and doc["verdict"] == "scan", err
    reasons = {r["rule"]: r for r in doc["reasons"]}
    assert "'Lprecip depth (mm)'" in reasons["data.unseen"]["message"]
    assert reasons["rain_unknown_near_saturation"]["effect"] == "warn"
    assert reasons["rain_stops_both"]["message"].startswith("Not checked")
    assert doc["features"]["gust_estimated"] is True and doc["features"]["wind_window_min"] == 60
    assert "precip_mm_h" in doc["data_quality"]["inputs_not_seen"]
    assert doc["data_quality"]["missing_codes"]["Hvis (m)"] == 2987
    assert doc["data_quality"]["rows_with_missing_codes"] == int(
        ((rows["Hvis (m)"] == CODE) | (rows["Lprecip depth (mm)"] == CODE)).sum()
    )
    status, text, _ = run(*argv)
    assert "wind (1-h mean)" in text and "gusts (estimated)" in text and "10-min" not in text


def test_a_wrong_time_zone_is_refused_naming_the_zone_that_fits(tmp_path):
    site = tmp_path / "site.yaml"
    site.write_text(
        SITE.read_text().replace("  time_zone: UTC-09:00            # local standard time all year", "  time_zone: UTC")
    )
    status, _, err = run("replay", "--site", site, "--feed", TMY3, "--json", "--no-cache")
    assert status == 2 and len(err.strip().splitlines()) == 1
    assert "irradiance contradicts the computed sun" in err and "UTC-09:00" in err
    hour_off = tmp_path / "hour.yaml"
    hour_off.write_text(
        SITE.read_text().replace(
            "  time_zone: UTC-09:00            # local standard time all year", "  time_zone: UTC-08:00"
        )
    )
    status, out, err = run("feed", "inspect", TMY3, "--site", hour_off)
    assert status == 0 and "time zone: DOUBTFUL" in out and "UTC-09:00" in out


def test_feed_inspect_reports_codes_cadence_and_zone_within_80_columns():
    status, out, err = run("feed", "inspect", TMY3, "--site", SITE)
    assert status == 0, err
    assert all(len(line) <= 80 for line in out.splitlines())
    assert "one sample every 60 min" in out and "rows: 8,760" in out
    assert "time zone: ok" in out and "8,070 rows affected" in " ".join(out.split())
    vis = next(line for line in out.splitlines() if line.startswith("visibility"))
    assert "5,773" in vis and "2,987" in vis  # values, codes
    status, out, _ = run("feed", "inspect", TMY3_OTHER)  # no site: a guessed layout
    assert status == 0 and "guessed (no --site)" in out and "TODO time_zone" in out
    assert "time_format: every sampled time reads as %m/%d/%Y %H:%M" in out


def test_site_new_drafts_a_file_refused_until_its_todos_are_filled(tmp_path):
    out_file = tmp_path / "site.yaml"
    status, out, err = run("site", "new", "--feed", TMY3, "--out", out_file)
    assert status == 0, err
    text = out_file.read_text()
    # every line fits 80 columns but the feed's path, which is as long as the folder it lives in
    assert all(len(line) <= 80 for line in text.splitlines() if str(TMY3) not in line)
    assert "skip_lines: 1" in text and 'time_format: "%m/%d/%Y %H:%M"' in text and "time_label: end" in text
    assert "missing: [-9900]" in text and 'over_hours_from: "Lprecip quantity (hr)"' in text
    status, _, err = run("rules", "lint", "--site", out_file)
    assert status == 2 and "still says TODO" in err and len(err.strip().splitlines()) == 1
    filled = (
        text.replace("name: TODO ", "name: Test station ")
        .replace("latitude_deg: TODO", f"latitude_deg: {LAT}")
        .replace("longitude_deg: TODO", f"longitude_deg: {LON}")
        .replace("elevation_m: TODO", "elevation_m: 7")
        .replace("time_zone: TODO", "time_zone: UTC-09:00")
        .replace("dish_diameter_m: TODO", "dish_diameter_m: 90")
        .replace("gust_factor: TODO", "gust_factor: 1.6")
        .replace("{name: TODO, ra: TODO, dec: TODO}", '{name: "3C 273", ra: "12h29m06.7s", dec: "+02d03m09s"}')
    )
    assert not [line for line in filled.splitlines() if "TODO" in line.split("#")[0]]
    (tmp_path / "filled.yaml").write_text(filled)
    assert run("rules", "lint", "--site", tmp_path / "filled.yaml")[0] == 0
    status, out, err = run("check", "--site", tmp_path / "filled.yaml", "--at", "2005-04-25T21:00:00-09:00", "--json")
    assert status in (10, 11) and json.loads(out)["features"]["gust_estimated"] is True, err
    status, _, err = run("site", "new", "--feed", TMY3, "--out", out_file)  # never overwritten
    assert status == 2 and "exists" in err and out_file.read_text() == text


def test_the_second_file_fits_its_own_zone_and_a_wrong_one_is_refused(tmp_path):
    """pvlib 0.16.1 data/723170TYA.CSV: metadata line gives 36.100 N, 79.950 W, UTC-05:00."""
    base = (
        SITE.read_text()
        .replace(f"latitude_deg: {LAT}", "latitude_deg: 36.100")
        .replace(f"longitude_deg: {LON}", "longitude_deg: -79.950")
        .replace("UTC-09:00", "UTC-05:00")
    )
    right, wrong = tmp_path / "right.yaml", tmp_path / "wrong.yaml"
    right.write_text(base)
    wrong.write_text(
        base.replace("  time_zone: UTC-05:00            # local standard time all year", "  time_zone: UTC-08:00")
    )
    status, out, err = run("feed", "inspect", TMY3_OTHER, "--site", right)
    assert status == 0 and "time zone: ok" in out, err
    status, _, err = run("replay", "--site", wrong, "--feed", TMY3_OTHER, "--json", "--no-cache")
    assert status == 2 and "UTC-05:00, not UTC-08:00" in err


def test_the_real_file_streamed_in_small_parts_gives_the_whole_reads_replay(tmp_path, monkeypatch):
    """The same year in time order (a typical-year file takes each month from another year), read
    in parts of 997 rows: two date and time columns, 24:00, a metadata line, -9900 codes and
    precipitation over per-row hours all cross part edges; the replay equals the whole read's."""
    import advisor.evaluation.replay_stream as replay_stream
    import advisor.io.archive as archive

    lines = TMY3.read_text(encoding="utf-8").splitlines(keepends=True)
    d = pd.read_csv(TMY3, skiprows=1)
    end_of_day = d["Time (HH:MM)"] == "24:00"
    local = pd.to_datetime(
        d["Date (MM/DD/YYYY)"] + " " + d["Time (HH:MM)"].where(~end_of_day, "00:00"), format="%m/%d/%Y %H:%M"
    ) + pd.to_timedelta(end_of_day.astype(int), unit="D")
    order = np.argsort(local.to_numpy(), kind="stable")
    sorted_file = tmp_path / "703165TY_in_time_order.csv"
    sorted_file.write_text("".join(lines[:2]) + "".join(lines[2 + i] for i in order), encoding="utf-8")
    argv = ["replay", "--site", SITE, "--feed", sorted_file, "--json", "--no-cache"]
    monkeypatch.setattr(archive, "STREAM_ABOVE_BYTES", 10**12)
    status, whole, err = run(*argv)
    assert status == 0, err
    monkeypatch.setattr(archive, "STREAM_ABOVE_BYTES", 0)
    monkeypatch.setattr(archive, "ARCHIVE_PART_ROWS", 997)
    monkeypatch.setattr(replay_stream, "DECIDE_CELLS", 20_000)

    def no_whole_read(self):
        raise AssertionError("the file was read whole, not in parts")

    monkeypatch.setattr(archive.ArchiveReader, "_whole", no_whole_read)
    status, streamed, err = run(*argv)
    assert status == 0, err
    assert json.loads(streamed) == json.loads(whole)
