"""check and tick look ahead: how long a correction holds, until when a postpone lasts, and the
forecast against the latest observation.

The weather is synthetic (tests/conftest.py builders) and only puts the call in a known state.
Checks against definitions:
* Ruze (1966), Proc. IEEE 54, 633: adding delta in quadrature multiplies eta by exp(-(4 pi delta/lambda)^2).
* A first-order lag driven by a steady ramp r follows it at the same rate r once settled (the
  ramp response, Ogata, Modern Control Engineering), so the structure's change since a
  correction is r t and a correction holds t = sqrt(limit^2 - sigma0^2) / (k r).
"""

from __future__ import annotations

import json
import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from advisor.evaluation.decay import correction_holds, holding_limit_um, structure_temperature_c
from advisor.evaluation.forecastcheck import compare_with_forecast, trust_observation
from advisor.evaluation.outlook import combine_frames, compute_outlook
from advisor.io.feed import canonical_frame
from advisor.io.site import FeedLayout

from .conftest import NIGHT_UTC, registry_at, run_cli, weather_table

LAYOUT = FeedLayout(max_feed_age_min=15.0)
C = 299_792_458.0


def forecast_rows(start, hours=8.0, **weather):
    """Forecast rows every 10 min after ``start``, continuing the builder's temperature trend."""
    ahead = dict(weather)
    ahead["air_temp_c"] = weather.get("air_temp_c", 2.0) + weather.get("temp_rate_c_per_h", -0.4) * hours
    table = weather_table(end=start + pd.Timedelta(hours=hours), hours=hours, step_min=10.0, **ahead).iloc[1:].copy()
    table["kind"] = "forecast"
    return table


def frame_of(observed, forecast=None):
    obs = canonical_frame(observed, LAYOUT).frame
    return combine_frames(obs, None if forecast is None else canonical_frame(forecast, LAYOUT).frame)


# --------------------------------------------------------------------------- how long a correction holds


def test_the_holding_limit_is_the_requirement_or_the_allowed_efficiency_loss():
    freq = 115.0
    lam_um = C / (freq * 1e9) * 1e6
    sigma0 = 200.0  # misses lambda/16 = 163 µm already
    limit = float(holding_limit_um(sigma0, freq, lam_um / 16, 0.10))
    ratio = math.exp(-((4 * math.pi * limit / lam_um) ** 2)) / math.exp(-((4 * math.pi * sigma0 / lam_um) ** 2))
    assert ratio == pytest.approx(0.90, rel=1e-9)  # Ruze: exactly the 10 % allowed
    # at a low frequency the requirement is the larger bound
    assert float(holding_limit_um(sigma0, 22.0, C / 22e9 * 1e6 / 16, 0.10)) == pytest.approx(C / 22e9 * 1e6 / 16)


def test_the_structure_follows_the_air_with_its_lag(demo_site):
    # air steps from 0 to 5 °C; after one time constant the structure has made 1 - 1/e of the step
    times = pd.date_range("2026-01-16T00:00Z", periods=8 * 60 + 1, freq="1min")
    temp = np.where(times >= pd.Timestamp("2026-01-16T02:00Z"), 5.0, 0.0)
    rows = pd.DataFrame({"time": times, "air_temp_c": temp, "solar_wm2": 0.0, "good": True})
    tau = demo_site.structure.time_constant_h
    at = pd.DatetimeIndex([pd.Timestamp("2026-01-16T02:00Z") + pd.Timedelta(hours=tau)])
    t_s = structure_temperature_c(rows, at, demo_site)[0]
    assert t_s == pytest.approx(5.0 * (1 - math.exp(-1)), abs=0.1)  # the 1-min sampling smooths the step


def test_a_steady_warming_trend_gives_the_holding_time_of_the_ramp(demo_site):
    rate = 2.0  # °C/h, at night (no sun)
    observed = weather_table(hours=8.0, temp_rate_c_per_h=rate)
    frame = frame_of(observed)
    features = {
        "air_temp_c": 2.0,
        "solar_wm2": 0.0,
        "air_temp_rate_c_per_h": rate,
        "freq_ghz": 86.0,
        "required_surface_rms_um": C / 86e9 * 1e6 / 16,
    }
    candidates = {
        "scan": {"surface_rms_um": 199.0, "duration_min": 12.0},
        "astronomical": {"surface_rms_um": 181.0, "duration_min": 45.0},
    }
    holds = correction_holds(frame, NIGHT_UTC, candidates, features, demo_site)
    k = demo_site.structure.drift_um_per_c
    for method, sigma0 in (("scan", 199.0), ("astronomical", 181.0)):
        limit = holds[method]["limit_um"]
        expected_min = math.sqrt(limit**2 - sigma0**2) / (k * rate) * 60.0
        assert holds[method]["basis"] == "trend"
        assert holds[method]["holds_min"] == pytest.approx(expected_min, abs=3.0)
        assert holds[method]["structure_rate_c_per_h"] == pytest.approx(rate, abs=0.05)


def test_a_night_check_sees_the_sunrise_coming(demo_site):
    # 04:50 local (MDT) on 16 June, flat air temperature, no forecast: the clear sky after sunrise
    # (about 05:40) warms the structure, so the correction does not hold the morning
    at = pd.Timestamp("2026-06-16T10:50:00Z")
    frame = frame_of(weather_table(end=at, hours=8.0, temp_rate_c_per_h=0.0))
    features = {
        "air_temp_c": 2.0,
        "solar_wm2": 0.0,
        "air_temp_rate_c_per_h": 0.0,
        "freq_ghz": 150.0,
        "required_surface_rms_um": C / 150e9 * 1e6 / 16,
    }
    holds = correction_holds(frame, at, {"scan": {"surface_rms_um": 199.0, "duration_min": 12.0}}, features, demo_site)[
        "scan"
    ]
    assert holds["holds_min"] is not None and pd.Timestamp(holds["until_utc"]) > pd.Timestamp("2026-06-16T11:40:00Z")
    night = pd.Timestamp("2026-01-16T04:00:00Z")
    quiet = correction_holds(
        frame_of(weather_table(end=night, hours=8.0, temp_rate_c_per_h=0.0)),
        night,
        {"scan": {"surface_rms_um": 199.0, "duration_min": 12.0}},
        features,
        demo_site,
    )["scan"]
    assert quiet["holds_min"] is None  # mid-night, flat: holds past the horizon


# --------------------------------------------------------------------------- the forecast against the mast


def test_a_windier_mast_than_forecast_is_reported_and_trusted(demo_site):
    site = replace(demo_site, forecast=replace(demo_site.forecast, wind_margin_pct=20.0, trust_observation_h=2.0))
    observed = weather_table(wind_mean_ms=8.2, wind_gust_ms=10.0)
    forecast = forecast_rows(NIGHT_UTC, wind_mean_ms=1.0, wind_gust_ms=1.6)
    frame = frame_of(observed, forecast)
    d = compare_with_forecast(frame, site)
    assert d is not None and set(d.worse) == {"wind_mean_ms", "wind_gust_ms"} and not d.better
    assert "Trusting the observation" in d.text() and "8.2 m/s observed" in d.text()
    fc = frame[frame["kind"] == "forecast"]
    pulled = trust_observation(fc, d)
    hours = (pd.DatetimeIndex(fc["time"]) - NIGHT_UTC).total_seconds().to_numpy() / 3600.0
    expected = 1.0 + (8.2 - 1.0) * np.exp(-hours / 2.0)  # the bias, fading with tau = 2 h
    assert np.allclose(pulled["wind_mean_ms"].to_numpy(), expected, atol=1e-6)
    assert (pulled["wind_gust_ms"].to_numpy() >= pulled["wind_mean_ms"].to_numpy()).all()


def test_a_calmer_mast_keeps_the_forecast_as_it_is(demo_site):
    frame = frame_of(
        weather_table(wind_mean_ms=1.0, wind_gust_ms=1.5), forecast_rows(NIGHT_UTC, wind_mean_ms=6.0, wind_gust_ms=8.0)
    )
    d = compare_with_forecast(frame, demo_site)
    assert d is not None and d.worse == {} and "wind_mean_ms" in d.better
    assert trust_observation(frame, d) is frame  # never made more optimistic
    assert "kept as it is" in d.text()


def test_agreement_within_the_margins_says_nothing(demo_site):
    frame = frame_of(
        weather_table(wind_mean_ms=1.5, wind_gust_ms=2.5), forecast_rows(NIGHT_UTC, wind_mean_ms=1.6, wind_gust_ms=2.4)
    )
    assert compare_with_forecast(frame, demo_site) is None


def test_a_higher_dew_point_than_forecast_raises_the_forecast_humidity(demo_site):
    observed = weather_table(rel_humidity_pct=95.0)
    frame = frame_of(observed, forecast_rows(NIGHT_UTC, rel_humidity_pct=60.0))
    d = compare_with_forecast(frame, demo_site)
    assert d is not None and "dew_point_c" in d.worse
    pulled = trust_observation(frame, d)
    fc = (pulled["kind"] == "forecast").to_numpy()
    assert (pulled.loc[fc, "rel_humidity_pct"].to_numpy() > 60.0).all()
    assert (pulled.loc[fc, "dew_point_c"].to_numpy() <= pulled.loc[fc, "air_temp_c"].to_numpy() + 1e-9).all()


def test_the_outlook_trusts_the_mast_too(demo_site, default_rules):
    frame = frame_of(
        weather_table(wind_mean_ms=8.2, wind_gust_ms=10.0), forecast_rows(NIGHT_UTC, wind_mean_ms=1.0, wind_gust_ms=1.6)
    )
    registry = registry_at(NIGHT_UTC - pd.Timedelta(hours=1), 2.0)
    out = compute_outlook(frame, NIGHT_UTC, 8.0, demo_site, registry, default_rules, 86.0)
    assert any("disagrees with the forecast" in note for note in out.notes)
    start = pd.Timestamp(out.next_window["scan"]["start_utc"])
    assert start - NIGHT_UTC >= pd.Timedelta(hours=1.5)  # not 10 minutes ahead


# --------------------------------------------------------------------------- check and tick


def make_site(folder: Path, forecast: pd.DataFrame | None = None, **weather) -> Path:
    """A site with a synthetic canonical feed, a fresh reference and (optionally) a forecast file."""
    weather_table(**weather).to_csv(folder / "feed.csv", index=False)
    (folder / "refs.csv").write_text(
        f"time,air_temp_c,note\n{NIGHT_UTC - pd.Timedelta(hours=1):%Y-%m-%dT%H:%M:%SZ},2.4,test\n"
    )
    text = (
        "site:\n  name: test site (invented)\n  latitude_deg: 47.12\n  longitude_deg: -114.0\n"
        "  elevation_m: 1050\n  time_zone: America/Denver\n  dish_diameter_m: 90\n"
        "feed:\n  path: feed.csv\nreferences:\n  path: refs.csv\n"
        'calibrators:\n  - {name: "0716+714", ra: "07h21m53.45s", dec: "+71d20m36.4s"}\n'
    )
    if forecast is not None:
        forecast.to_csv(folder / "forecast.csv", index=False)
        text += "forecast:\n  path: forecast.csv\n  wind_margin_pct: 20\n"
    (folder / "site.yaml").write_text(text)
    return folder / "site.yaml"


def check_json(capsys, site, *extra):
    status, out, err = run_cli(
        capsys, "check", "--site", site, "--at", NIGHT_UTC.strftime("%Y-%m-%dT%H:%M:%SZ"), "--json", *extra
    )
    return status, json.loads(out), err


def test_check_says_how_long_the_correction_holds_and_for_what_session(capsys, tmp_path):
    site = make_site(tmp_path, forecast_rows(NIGHT_UTC))
    status, doc, _ = check_json(capsys, site, "--session-hours", "2")
    assert doc["schema_version"] == 5 and status == 0 and doc["verdict"] == "scan"
    ahead = doc["look_ahead"]
    assert ahead["session_hours"] == 2.0 and ahead["forecast_source"].endswith("forecast.csv")
    assert ahead["holds"]["scan"]["basis"] == "forecast"
    holds = next(r for r in doc["reasons"] if r["rule"] == "holds.scan")
    assert "A laser correction made now would hold" in holds["message"] and "by the forecast" in holds["message"]
    assert "2 h session" in next(r for r in doc["reasons"] if r["rule"] == "choice")["message"]
    _, long, _ = check_json(capsys, site, "--session-hours", "8")
    assert long["verdict"] == "astronomical"  # holography pays back in 8 h


def test_a_postpone_says_until_when_the_forecast_opens_a_window(capsys, tmp_path):
    forecast = forecast_rows(NIGHT_UTC)
    hours = (pd.to_datetime(forecast["time"], utc=True) - NIGHT_UTC).dt.total_seconds() / 3600.0
    forecast.loc[(hours <= 2.0).to_numpy(), ["wind_mean_ms", "wind_gust_ms"]] = [6.0, 7.5]  # windy 2 more hours
    site = make_site(tmp_path, forecast, wind_mean_ms=6.0, wind_gust_ms=7.5)
    status, doc, _ = check_json(capsys, site)
    assert doc["verdict"] == "postpone" and status == 11
    assert doc["look_ahead"]["postpone"]["until"] == "window"
    until = pd.Timestamp(doc["look_ahead"]["postpone"]["postpone_until_utc"])
    assert pd.Timedelta(hours=2) <= until - NIGHT_UTC <= pd.Timedelta(hours=2, minutes=20)
    text = next(r for r in doc["reasons"] if r["rule"] == "postpone.until")["message"]
    assert text.startswith("Postpone until about ") and "window then" in text


def test_a_postpone_says_when_the_forecast_does_not_reach_a_window(capsys, tmp_path):
    site = make_site(
        tmp_path, forecast_rows(NIGHT_UTC, wind_mean_ms=6.0, wind_gust_ms=7.5), wind_mean_ms=6.0, wind_gust_ms=7.5
    )
    _, doc, _ = check_json(capsys, site)
    assert doc["verdict"] == "postpone" and doc["look_ahead"]["postpone"]["until"] == "beyond_forecast"
    assert (
        "opens no window for either method"
        in next(r for r in doc["reasons"] if r["rule"] == "postpone.until")["message"]
    )


def test_a_postpone_without_a_forecast_says_it_cannot_tell(capsys, tmp_path):
    site = make_site(tmp_path, None, wind_mean_ms=6.0, wind_gust_ms=7.5)
    _, doc, _ = check_json(capsys, site)
    assert doc["look_ahead"]["postpone"]["until"] == "no_forecast" and doc["next_window"] is None
    assert "cannot be said" in next(r for r in doc["reasons"] if r["rule"] == "postpone.until")["message"]


def test_check_reports_a_forecast_the_mast_contradicts(capsys, tmp_path):
    site = make_site(
        tmp_path, forecast_rows(NIGHT_UTC, wind_mean_ms=1.0, wind_gust_ms=1.6), wind_mean_ms=8.2, wind_gust_ms=10.0
    )
    _, doc, _ = check_json(capsys, site)
    disagreement = doc["look_ahead"]["forecast_disagreement"]
    assert "wind_mean_ms" in disagreement["worse"] and disagreement["forecast_adjusted"]
    assert any(r["rule"] == "forecast.disagrees" for r in doc["reasons"])
    until = pd.Timestamp(doc["look_ahead"]["postpone"]["postpone_until_utc"])
    assert until - NIGHT_UTC >= pd.Timedelta(hours=1.5)  # the mast is trusted, not the calm forecast


def test_tick_carries_the_look_ahead_and_the_session_option(capsys, tmp_path):
    site = make_site(tmp_path, forecast_rows(NIGHT_UTC))
    state = tmp_path / "state"
    status, out, err = run_cli(
        capsys,
        "tick",
        "--site",
        site,
        "--state-dir",
        state,
        "--session-hours",
        "2",
        "--at",
        NIGHT_UTC.strftime("%Y-%m-%dT%H:%M:%SZ"),
    )
    assert status == 0, err
    doc = json.loads((state / "advisory.json").read_text())
    assert doc["look_ahead"]["session_hours"] == 2.0 and doc["look_ahead"]["holds"]["scan"] is not None


@pytest.mark.parametrize("bad", ["-1", "x", "1000"])
def test_a_bad_session_length_is_one_line_exit_2(capsys, tmp_path, bad):
    site = make_site(tmp_path)
    status, out, err = run_cli(capsys, "check", "--site", site, "--session-hours", bad)
    assert status == 2 and out == "" and err.startswith("advisor: error:") and "--session-hours" in err
