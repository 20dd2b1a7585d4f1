"""advisor plan: the schedule of corrections over a session, and the alternatives it is compared with.

The weather here is synthetic (tests/conftest.py builders): it only puts the session in a known
state (a calm night, a clear sunrise, a calibrator that rises later, a low frequency); no check
value comes from it.  Checks against definitions:
* Ruze (1966), Proc. IEEE 54, 633: eta = exp(-(4 pi sigma / lambda)^2).
* The radiometer equation (Dicke 1946, Rev. Sci. Instrum. 17, 268): integration time to a given
  sensitivity scales as 1/eta^2, so a session is worth the mean of eta^2.
* Bellman's principle (Bellman 1957, Dynamic Programming): the backward induction's value equals
  the best over every schedule, found here by brute force on small grids.
"""

from __future__ import annotations

import io
import itertools
import json
from dataclasses import replace
from xml.etree import ElementTree

import numpy as np
import pandas as pd
import pytest

from advisor.evaluation.outlook import combine_frames
from advisor.evaluation.plan import compute_plan
from advisor.evaluation.schedule import NO_ACTION, Problem, evaluate, fixed_policy, solve, state_index, success_path
from advisor.io.feed import canonical_frame
from advisor.io.site import Calibrator, FeedLayout
from advisor.physics.sky import source_elevation_deg
from advisor.physics.sun import solar_position
from advisor.physics.thermal import clear_sky_irradiance_wm2
from advisor.views.context import Context
from advisor.views.plan_data import plan_json
from advisor.views.plan_svg import plan_svg
from advisor.views.plan_text import render_plain_plan

from .conftest import NIGHT_UTC, registry_at, run_cli, weather_table

LAYOUT = FeedLayout(max_feed_age_min=15.0)


def session_frame(start, hours_after=7.0, temp_c=None, solar_wm2=None, **weather):
    """Observed minutes for 6 h before ``start``, then forecast rows every 10 min after it.

    ``temp_c`` / ``solar_wm2`` are functions of the times (DatetimeIndex) replacing the builder's.
    """
    observed = weather_table(end=start, hours=6.0, **weather)
    ahead = dict(weather)  # the forecast continues the observed temperature trend
    ahead["air_temp_c"] = weather.get("air_temp_c", 2.0) + weather.get("temp_rate_c_per_h", -0.4) * hours_after
    forecast = (
        weather_table(end=start + pd.Timedelta(hours=hours_after), hours=hours_after, step_min=10.0, **ahead)
        .iloc[1:]
        .copy()
    )
    for table in (observed, forecast):
        times = pd.DatetimeIndex(pd.to_datetime(table["time"], utc=True))
        if temp_c is not None:
            table["air_temp_c"] = temp_c(times)
        if solar_wm2 is not None:
            table["solar_wm2"] = solar_wm2(times)
    forecast["kind"] = "forecast"
    return combine_frames(canonical_frame(observed, LAYOUT).frame, canonical_frame(forecast, LAYOUT).frame)


def plan_for(frame, start, hours, site, rules, freq_ghz=86.0, registry=None, ref_temp_c=None):
    if registry is None:
        obs = frame[frame["kind"] == "observed"]
        temp = obs["air_temp_c"].iloc[-1] if ref_temp_c is None else ref_temp_c
        registry = registry_at(start - pd.Timedelta(hours=1), temp)
    return compute_plan(frame, start, hours, site, registry, rules, freq_ghz)


def _ctx(site):
    return Context(
        site_name=site.name, time_zone=site.time_zone, feed_source="synthetic", is_demo=False, data_quality={}
    )


# --------------------------------------------------------------------------- the search itself


def _random_problem(rng, n=7, p=1.0):
    methods = 2
    S = 1 + methods * (n + 1)
    steps = np.array([1, 3])
    gain = np.zeros((S, n))
    gain[0] = rng.uniform(0.0, 0.2, n) * (rng.uniform() < 0.5)
    for m in range(methods):
        for c in range(steps[m], n + 1):
            level = rng.uniform(0.3, 0.9)
            decay = rng.uniform(0.0, 0.1)
            i = np.arange(n)
            gain[state_index(m, c, n)] = np.where(i >= c - 1, np.clip(level - decay * (i - c), 0, 1), 0.0)
    start_ok = rng.uniform(size=(methods, n)) < 0.7
    for m in range(methods):
        start_ok[m, n - steps[m] + 1 :] = False
    p_success = np.full((methods, n), p) if p == 1.0 else rng.uniform(0.5, 1.0, (methods, n))
    return Problem(gain, start_ok, p_success, steps, np.array([0.4, 0.5]))


def _brute_force_best(problem):
    """The best value over every schedule, when every correction succeeds (exhaustive)."""
    n = problem.n
    best = -1.0

    def walk(i, state, value):
        nonlocal best
        if i >= n:
            best = max(best, value)
            return
        walk(i + 1, state, value + problem.gain[state, i] / n)
        for m in range(problem.methods):
            if problem.start_ok[m, i]:
                end = i + int(problem.steps[m])
                target = state_index(m, end, n)
                walk(end, target, value + problem.tail[m] * problem.gain[target, end - 1] / n)

    walk(0, 0, 0.0)
    return best


@pytest.mark.parametrize("seed", range(12))
def test_the_search_finds_the_best_schedule_of_all(seed):
    problem = _random_problem(np.random.default_rng(seed))
    policy = solve(problem)
    assert evaluate(problem, policy).value == pytest.approx(_brute_force_best(problem), abs=1e-12)


@pytest.mark.parametrize("seed", range(8))
def test_with_odds_the_plan_is_at_least_as_good_as_any_fixed_schedule(seed):
    rng = np.random.default_rng(100 + seed)
    problem = _random_problem(rng, n=6, p=0.5)
    best = evaluate(problem, solve(problem)).value
    n = problem.n
    choices = [(i, m) for i in range(n) for m in range(problem.methods) if problem.start_ok[m, i]]
    for k in (0, 1, 2):
        for combo in itertools.combinations(choices, k):
            assert evaluate(problem, fixed_policy(problem, list(combo))).value <= best + 1e-12


def test_a_failed_correction_leaves_the_surface_as_it_was():
    # one step to correct, odds 0.5, then three steps observing: 0.5 x 0.81 x 3/4 expected
    n = 4
    gain = np.zeros((1 + 1 * (n + 1), n))
    gain[state_index(0, 1, n)] = [0.0, 0.81, 0.81, 0.81]
    problem = Problem(
        gain, np.array([[True, False, False, False]]), np.full((1, n), 0.5), np.array([1]), np.array([0.0])
    )
    outcome = evaluate(problem, fixed_policy(problem, [(0, 0)]))
    assert outcome.value == pytest.approx(0.5 * 0.81 * 3 / 4)
    assert outcome.corrections == 1.0
    assert outcome.lost_steps == pytest.approx(1 + 0.5 * 3)  # the correction, and a failed session after it
    actions, states = success_path(problem, fixed_policy(problem, [(0, 0)]))
    assert actions == [(0, 0)] and states[0] == -1 and (states[1:] == state_index(0, 1, n)).all()


def test_no_action_is_taken_for_less_than_the_least_gain():
    # correcting during a step that observes nothing anyway gains 0.001 on two steps (value 0.00067)
    n = 3
    gain = np.zeros((1 + (n + 1), n))
    gain[0] = [0.0, 0.5, 0.5]
    gain[state_index(0, 1, n)] = [0.0, 0.501, 0.501]
    problem = Problem(
        gain, np.array([[True, False, False]]), np.ones((1, n)), np.array([1]), np.array([0.0]), min_gain=0.01
    )
    assert (solve(problem)[:, 0] == NO_ACTION).all()  # from the reachable state: keep observing
    assert solve(replace(problem, min_gain=0.0))[0, 0] == 0  # without the least gain it would correct


# --------------------------------------------------------------------------- sessions


def test_a_calm_night_needs_one_laser_correction_that_holds(demo_site, default_rules):
    start = NIGHT_UTC  # about four hours after sunset
    frame = session_frame(start)
    plan = plan_for(frame, start, 3.0, demo_site, default_rules)
    assert plan.verdict == "correct"
    assert [c.method for c in plan.corrections] == ["scan"]
    first = plan.corrections[0]
    assert first.start_utc == start and first.holds_until_utc is None
    assert "holds for the whole session" in plan.headline
    by_key = {a.key: a for a in plan.alternatives}
    assert plan.alternatives[0].key == "plan"
    assert by_key["plan"].efficiency == pytest.approx(by_key["scan_now"].efficiency)
    assert by_key["plan"].efficiency >= by_key["astronomical_now"].efficiency
    # lost: the laser's 12 minutes (odds taken as certain: no model)
    assert by_key["plan"].lost_min == pytest.approx(demo_site.scan.duration_min)
    # the session's efficiency is the root of the mean of eta^2 over the steps (Ruze x pointing), the
    # 12-minute scan taking two 10-minute steps of which the last 8 minutes are observed
    eta = plan.steps["efficiency"].to_numpy(dtype=float)
    assert np.isnan(eta[:2]).all() and np.isfinite(eta[2:]).all()
    assert by_key["plan"].efficiency == pytest.approx(
        np.sqrt((np.sum(eta[2:] ** 2) + 0.8 * eta[2] ** 2) / len(eta)), rel=1e-3
    )


def test_a_morning_session_re_corrects_as_the_sun_rises(demo_site, default_rules):
    # 04:30 local (MDT) on 16 June, a clear sky: the sun rises near 05:40 and the air, at 8 °C before
    # dawn, warms 3 °C/h after it; the laser's reference scan is from yesterday evening at 14 °C.
    site = demo_site
    start, warming = pd.Timestamp("2026-06-16T10:30:00Z"), pd.Timestamp("2026-06-16T11:30:00Z")

    def sun(times):
        return np.asarray(clear_sky_irradiance_wm2(solar_position(times, site.latitude_deg, site.longitude_deg)[0]))

    def temp(times):
        return 8.0 + 3.0 * np.clip((times - warming).total_seconds().to_numpy() / 3600.0, 0.0, None)

    frame = session_frame(start, temp_c=temp, solar_wm2=sun)
    plan = plan_for(frame, start, 6.0, site, default_rules, ref_temp_c=14.0)
    assert plan.verdict == "correct"
    assert len(plan.corrections) >= 2, plan.headline
    sunrise = plan.sun_events.loc[plan.sun_events["event"] == "sunrise", "time_utc"].iloc[0]
    assert all(c.start_utc > sunrise for c in plan.corrections[1:])
    first = plan.corrections[0]
    assert first.holds_until_utc is not None and first.holds_until_utc < plan.corrections[1].start_utc + pd.Timedelta(
        hours=1
    )
    # the structure warms faster and faster after sunrise: the decay the re-correction answers
    t_struct = plan.steps["structure_temp_c"].to_numpy()
    assert np.diff(t_struct)[-6:].mean() > 3 * max(np.diff(t_struct)[:6].mean(), 0.01)
    by_key = {a.key: a for a in plan.alternatives}
    best_single = max(by_key[k].efficiency for k in ("scan_now", "astronomical_now") if by_key[k].efficiency)
    assert by_key["plan"].efficiency > 1.03 * best_single
    assert by_key["plan"].expected_corrections >= 2


def _calibrator_rising(site, start, minutes, dec_deg=30.0):
    """A made-up source that climbs through the site's minimum elevation ``minutes`` after ``start``."""
    ra = np.arange(0.0, 360.0, 0.05)
    at = pd.DatetimeIndex([start + pd.Timedelta(minutes=minutes)])
    el_then = np.asarray(
        source_elevation_deg(at, ra, np.full_like(ra, dec_deg), site.latitude_deg, site.longitude_deg)
    ).ravel()
    el_now = np.asarray(
        source_elevation_deg(
            pd.DatetimeIndex([start]), ra, np.full_like(ra, dec_deg), site.latitude_deg, site.longitude_deg
        )
    ).ravel()
    rising = el_then > el_now
    k = np.argmin(np.where(rising, np.abs(el_then - (site.astronomical.min_calibrator_elevation_deg + 0.5)), np.inf))
    return Calibrator("test source", float(ra[k]), dec_deg)


def test_waiting_forty_minutes_for_holography_beats_the_laser_now(demo_site, default_rules):
    # the only calibrator climbs above the site's minimum elevation 40 min into the session, and the
    # laser's reference scan was taken 6 °C warmer (its air path and mount add tens of µm)
    start = NIGHT_UTC
    site = replace(demo_site, calibrators=(_calibrator_rising(demo_site, start, 40.0),))
    frame = session_frame(start)
    temp_now = frame.loc[frame["kind"] == "observed", "air_temp_c"].iloc[-1]
    plan = plan_for(frame, start, 6.0, site, default_rules, ref_temp_c=temp_now + 6.0)
    by_key = {a.key: a for a in plan.alternatives}
    assert by_key["astronomical_now"].efficiency is None and "no_calibrator" in by_key["astronomical_now"].why_not
    assert by_key["scan_now"].efficiency is not None  # the laser could go now
    wait = by_key["wait_astronomical"]
    assert (wait.corrections[0][1] - start) == pd.Timedelta(minutes=40)
    assert wait.efficiency > by_key["scan_now"].efficiency + 0.05  # waiting beats the laser now
    # the plan uses the laser while it waits, and takes holography once the calibrator is up (a
    # little later than its first minute: higher up, it leaves less gravity residual at the session's 45°)
    holography = [c for c in plan.corrections if c.method == "astronomical"]
    assert holography, plan.headline
    assert pd.Timedelta(minutes=40) <= holography[0].start_utc - start <= pd.Timedelta(minutes=70), plan.headline
    assert by_key["plan"].efficiency >= wait.efficiency


def test_low_frequency_needs_no_correction_for_the_whole_session(demo_site, default_rules):
    site = replace(demo_site, astronomical=replace(demo_site.astronomical, uncorrected_surface_rms_um=400.0))
    frame = session_frame(NIGHT_UTC)
    plan = plan_for(frame, NIGHT_UTC, 6.0, site, default_rules, freq_ghz=30.0)
    assert plan.verdict == "no_correction" and plan.corrections == ()
    assert plan.headline.startswith("No correction needed at 30 GHz for the whole session")
    # lambda/16 at 30 GHz = 299792458 / 30e9 m / 16 = 624.57 µm (by hand) >= 400 µm
    assert "625 µm" in plan.headline
    high = plan_for(frame, NIGHT_UTC, 6.0, site, default_rules, freq_ghz=86.0)
    assert high.verdict == "correct"
    assert any(a.key == "no_correction" for a in high.alternatives)  # priced, with the uncorrected surface


def test_no_possible_correction_says_postpone_and_why(demo_site, default_rules):
    frame = session_frame(NIGHT_UTC, precip_mm_h=2.0, rel_humidity_pct=96.0, visibility_m=5000.0)
    plan = plan_for(frame, NIGHT_UTC, 3.0, demo_site, default_rules)
    assert plan.verdict == "not_possible" and plan.corrections == ()
    assert "rain_stops_both" in plan.headline and "postpone" in plan.headline


def test_a_forecast_contradicted_by_the_mast_is_pulled_towards_it(demo_site, default_rules):
    # the forecast says calm; the mast says 8.2 m/s: the first hours of the plan trust the mast
    start = NIGHT_UTC
    observed = weather_table(end=start, hours=6.0, wind_mean_ms=8.2, wind_gust_ms=10.0)
    forecast = (
        weather_table(end=start + pd.Timedelta(hours=7), hours=7.0, step_min=10.0, wind_mean_ms=1.0, wind_gust_ms=1.6)
        .iloc[1:]
        .copy()
    )
    forecast["kind"] = "forecast"
    frame = combine_frames(canonical_frame(observed, LAYOUT).frame, canonical_frame(forecast, LAYOUT).frame)
    plan = plan_for(frame, start, 6.0, demo_site, default_rules)
    assert any("disagrees with the forecast" in note and "Trusting the observation" in note for note in plan.notes)
    first = plan.corrections[0]
    # with wind 1 + 7.2 exp(-t / 2 h) m/s (x 1.2 margin) the 4 m/s limit clears after about 2 h
    assert first.start_utc - start >= pd.Timedelta(hours=1.5)


# --------------------------------------------------------------------------- views and command


@pytest.fixture()
def night_plan(demo_site, default_rules):
    return plan_for(session_frame(NIGHT_UTC), NIGHT_UTC, 4.0, demo_site, default_rules)


def test_text_json_and_svg_views(night_plan, demo_site):
    ctx = _ctx(demo_site)
    text = render_plain_plan(night_plan, ctx, width=100)
    assert "Alternatives" in text and "laser scan now, never again" in text and "session η" in text
    doc = json.loads(json.dumps(plan_json(night_plan, ctx), allow_nan=False))
    assert doc["schema_version"] == 1 and doc["verdict"] == night_plan.verdict
    assert doc["alternatives"][0]["key"] == "plan" and doc["alternatives"][0]["integration_time_factor"] == 1.0
    assert len(doc["steps"]) == len(night_plan.steps)
    svg = plan_svg(night_plan, ctx)
    root = ElementTree.fromstring(svg)  # well-formed XML
    assert root.tag.endswith("svg")
    lowered = svg.lower()
    for forbidden in ("<script", "<image", "@import", "@font-face", 'href="http', "xlink:href", "<foreignobject"):
        assert forbidden not in lowered


def test_plan_command_on_the_demo(capsys, tmp_path):
    status, out, err = run_cli(capsys, "plan", "--hours", "6", "--json")
    assert status == 0, err
    doc = json.loads(out)
    assert doc["requested_hours"] == 6.0 and doc["target_freq_ghz"] == 86.0
    assert doc["verdict"] in ("correct", "no_correction", "not_possible", "undetermined")
    assert {a["key"] for a in doc["alternatives"]} >= {"plan", "scan_now", "astronomical_now"}
    svg = tmp_path / "plan.svg"
    status, out, err = run_cli(capsys, "plan", "--start", "2026-12-01T23:00:00Z", "--hours", "6", "--svg", svg)
    assert status == 0 and svg.read_text().startswith("<svg") and "Alternatives" in out


@pytest.mark.parametrize(
    "bad",
    [
        ["--hours", "0"],
        ["--hours", "x"],
        ["--elevation", "95"],
        ["--start", "tomorrow"],
        ["--svg", "/no/such/folder/p.svg"],
    ],
)
def test_bad_plan_options_are_one_line_exit_2(capsys, bad):
    status, out, err = run_cli(capsys, "plan", *bad)
    assert status == 2 and out == ""
    assert err.startswith("advisor: error:") and len(err.strip().splitlines()) == 1


@pytest.mark.parametrize(
    "start",
    [
        "2026-12-01T03:00:00Z",
        "2026-12-01T09:00:00Z",
        "2026-12-01T15:00:00Z",
        "2026-12-01T20:00:00Z",
        "2026-12-01T23:00:00Z",
        "2026-12-02T06:00:00Z",
    ],
)
def test_demo_plans_at_several_times_of_day_beat_every_simple_alternative(start):
    """On the demo forecast (invented): whatever the time of day, the plan is at least as good as
    each alternative priced the same way, and only plans corrections where the method can be done."""
    from advisor.commands import session

    request = session.Request()
    inputs = session.load_inputs(request, read="whole")
    frame, _ = session.with_site_forecast(inputs, request, [])
    plan = compute_plan(
        frame, pd.Timestamp(start), 6.0, inputs.site, inputs.registry, inputs.rules, 86.0, odds=inputs.odds
    )
    best = plan.alternatives[0]
    one_minute = 1.0 / (len(plan.steps) * plan.step_min)  # the least gain an action must bring
    for alternative in plan.alternatives[1:]:
        if alternative.efficiency is not None:
            assert best.efficiency**2 >= alternative.efficiency**2 - 2 * one_minute, alternative.label
    steps = plan.steps.set_index("time")
    for c in plan.corrections:
        assert steps.loc[c.start_utc, f"{c.method}_can_start"]
        assert c.end_utc <= plan.end_utc


@pytest.mark.parametrize("width", [80, 100])
def test_the_plan_text_fits_its_width_with_the_demo_banner(night_plan, demo_site, width):
    """An operator's 80-column terminal: no line of the plan (banner, table, legend) runs over."""
    from dataclasses import replace as with_fields

    ctx = with_fields(_ctx(demo_site), is_demo=True)
    text = render_plain_plan(night_plan, ctx, width=width)
    assert "DEMO DATA" in text and "time ×" in text
    assert all(len(line) <= width for line in text.splitlines()), text


def test_plain_text_width_follows_columns_and_else_the_readers_terminal(monkeypatch):
    from advisor.commands.options import text_width

    monkeypatch.setenv("COLUMNS", "72")
    assert text_width() == 72
    monkeypatch.delenv("COLUMNS")
    monkeypatch.setattr("sys.stdout", io.StringIO())  # piped, and no terminal behind stderr either
    monkeypatch.setattr("sys.stderr", io.StringIO())
    assert text_width() == 80
