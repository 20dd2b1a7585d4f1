"""An honest call: the surface requirement, unreachable targets, no correction needed, complete
blocked-by, a choice that agrees with the figures shown, and messages that follow their rule.

Physics used as check values:
* Ruze (1966), Proc. IEEE 54, 633: eta = exp(-(4 pi sigma / lambda)^2); sigma = lambda/16 gives
  eta = exp(-(pi/4)^2) = 0.5396 (by hand), the common requirement (common practice).
* lambda = c / f with c = 299 792 458 m/s.
The weather is synthetic (tests/conftest.py): it only puts the decision in a known state.
"""

from __future__ import annotations

import math
from dataclasses import replace

import pandas as pd
import pytest

from advisor.catalogue import CATALOGUE
from advisor.rules.loader import default_rule_files, lint_texts

from .conftest import NIGHT_UTC, registry_at, weather_table

C = 299_792_458.0


def lambda_over(n: float, freq_ghz: float) -> float:
    """lambda / n [µm]."""
    return C / (freq_ghz * 1e9) * 1e6 / n


@pytest.fixture
def fresh_reference():
    table = weather_table()
    return table, registry_at(NIGHT_UTC - pd.Timedelta(hours=1), table["air_temp_c"].iloc[-1])


def test_requirement_is_lambda_over_the_site_fraction(call_for, fresh_reference):
    table, registry = fresh_reference
    call = call_for(table, registry=registry, freq_ghz=100.0)
    assert call.features["required_surface_rms_um"] == pytest.approx(lambda_over(16, 100.0), rel=1e-9)
    assert call.features["surface_requirement_fraction"] == 16.0
    for method in ("scan", "astronomical"):
        cand = call.candidates[method]
        assert cand["requirement_margin_um"] == pytest.approx(lambda_over(16, 100.0) - cand["surface_rms_um"], abs=0.11)
        assert cand["meets_requirement"] == (cand["surface_rms_um"] <= lambda_over(16, 100.0))


def test_a_scan_that_misses_lambda_over_16_says_so_in_the_headline_and_a_caution(call_for, fresh_reference):
    table, registry = fresh_reference
    call = call_for(table, registry=registry, freq_ghz=115.0)
    scan = call.candidates["scan"]
    assert scan["surface_rms_um"] > lambda_over(16, 115.0)  # the demo laser budget misses it
    assert call.verdict in ("scan", "astronomical")
    chosen = call.candidates[call.verdict]
    if not chosen["meets_requirement"]:
        assert "misses λ/16" in call.headline
    rule = "laser_misses_requirement"
    fired = [r for r in call.reasons if r.rule == rule]
    assert fired and fired[0].effect == "warn" and f"{lambda_over(16, 115.0):.0f} µm" in fired[0].message


def test_a_site_can_make_the_requirement_block(call_for, fresh_reference, demo_site, tmp_path):
    from advisor.rules.loader import load_rules

    table, registry = fresh_reference
    strict = tmp_path / "strict.yaml"
    strict.write_text(
        "rules:\n  - id: laser_misses_requirement\n    effect: block\n"
        "  - id: holography_misses_requirement\n    effect: block\n"
    )
    rules = load_rules([(p, "default") for p in default_rule_files()] + [(strict, "site")], CATALOGUE)
    from advisor.evaluation.evaluate import evaluate
    from advisor.explain import explain
    from advisor.io.feed import canonical_frame
    from advisor.io.site import FeedLayout

    feed = canonical_frame(table, FeedLayout(max_feed_age_min=15))
    call = explain(evaluate(feed.frame, pd.DatetimeIndex([NIGHT_UTC]), demo_site, registry, rules, 115.0), 0)
    assert call.verdict == "postpone"
    assert "laser_misses_requirement" in call.candidates["scan"]["blocked_by"]


def test_an_unreachable_frequency_says_so_instead_of_waiting_for_weather(call_for, fresh_reference):
    table, registry = fresh_reference
    call = call_for(table, registry=registry, freq_ghz=230.0)
    assert call.verdict == "postpone"
    assert call.headline.startswith("Not reachable at 230 GHz")
    for method in ("scan", "astronomical"):
        assert "target.unreachable" in call.candidates[method]["blocked_by"]
    reason = next(r for r in call.reasons if r.rule == "target.unreachable")
    assert reason.effect == "block" and "No weather changes that" in reason.message
    # Ruze at the best the site can do (180 µm holography) at 230 GHz is below the site's 0.30
    best_eta = math.exp(-(((4 * math.pi * 180.0) / (C / 230e9 * 1e6)) ** 2))
    assert best_eta < 0.30 and f"η {best_eta:.2f}" in reason.message


def test_reachable_frequencies_are_not_called_unreachable(call_for, fresh_reference):
    table, registry = fresh_reference
    for freq in (86.0, 100.0, 115.0):
        call = call_for(table, registry=registry, freq_ghz=freq)
        assert all("target.unreachable" not in c["blocked_by"] for c in call.candidates.values())


def test_no_correction_needed_when_the_uncorrected_surface_meets_the_requirement(call_for, demo_site, fresh_reference):
    table, registry = fresh_reference
    site = replace(demo_site, astronomical=replace(demo_site.astronomical, uncorrected_surface_rms_um=400.0))
    low = call_for(table, registry=registry, freq_ghz=30.0, site=site)
    assert lambda_over(16, 30.0) >= 400.0
    assert low.verdict == "no_correction" and "No correction needed at 30 GHz" in low.headline
    high = call_for(table, registry=registry, freq_ghz=86.0, site=site)
    assert high.verdict != "no_correction"


def test_no_correction_never_hides_bad_data(call_for, demo_site):
    site = replace(demo_site, astronomical=replace(demo_site.astronomical, uncorrected_surface_rms_um=400.0))
    stale = weather_table(end=NIGHT_UTC - pd.Timedelta(minutes=40))
    assert call_for(stale, freq_ghz=30.0, site=site).verdict == "undetermined"


def test_every_infeasible_method_says_what_blocks_it(call_for, fresh_reference, site_with):
    table, registry = fresh_reference
    # efficiency minimum: gusty (6 m/s) but reachable at 100 GHz (the best, 180 µm, gives eta 0.57)
    gusty = weather_table(wind_mean_ms=3.0, wind_gust_ms=6.0)
    call = call_for(gusty, registry=registry, freq_ghz=100.0, site=site_with(min_ruze_efficiency=0.5))
    for method, cand in call.candidates.items():
        assert not cand["feasible"] and cand["blocked_by"], method
    assert "efficiency.min" in call.candidates["astronomical"]["blocked_by"]
    assert "target.unreachable" not in call.candidates["astronomical"]["blocked_by"]
    # data: a stale feed blocks both, and says so
    stale = call_for(weather_table(end=NIGHT_UTC - pd.Timedelta(minutes=40)), registry=registry)
    assert all("data" in c["blocked_by"] for c in stale.candidates.values())


def _value(eta: float, p, duration_min: float, session_min: float) -> float:
    """eta^2 x observed share x odds: integration time to a given sensitivity scales as 1/eta^2
    (radiometer equation, Dicke 1946, Rev. Sci. Instrum. 17, 268)."""
    return eta**2 * max(session_min - duration_min, 0.0) / session_min * (1.0 if p is None else round(p, 2))


def test_the_choice_agrees_with_the_figures_it_shows(call_for, fresh_reference, site_with):
    table, registry = fresh_reference
    seen = set()
    for hours in (1.0, 4.0, 12.0):
        for freq in (43.0, 86.0, 100.0, 115.0):
            call = call_for(table, registry=registry, freq_ghz=freq, site=site_with(session_hours=hours))
            choice = [r for r in call.reasons if r.rule == "choice"]
            if not choice:
                continue
            values = {
                m: _value(round(c["ruze_efficiency"], 2), c["p_usable"], c["duration_min"], 60.0 * hours)
                for m, c in call.candidates.items()
            }
            if call.verdict == "scan":
                assert values["scan"] >= values["astronomical"] - 1e-12
            else:
                assert values["astronomical"] > values["scan"]
            assert f"{hours:g} h session" in choice[0].message
            seen.add(call.verdict)
    assert seen == {"scan", "astronomical"}  # the session length decides, both ways


def test_without_a_session_length_the_fixed_margin_decides(call_for, fresh_reference, site_with):
    table, registry = fresh_reference
    for freq in (43.0, 86.0, 100.0, 115.0):
        call = call_for(table, registry=registry, freq_ghz=freq, site=site_with(session_hours=0.0))
        choice = [r for r in call.reasons if r.rule == "choice"]
        if not choice:
            continue
        scan = round(call.candidates["scan"]["ruze_efficiency"], 2)
        astro = round(call.candidates["astronomical"]["ruze_efficiency"], 2)
        if call.verdict == "scan":
            assert astro - scan <= 0.08 + 1e-9
        else:
            assert astro - scan > 0.08 + 1e-9
            assert f"{astro - scan:.2f} better" in choice[0].message


def test_holography_pays_back_its_extra_minutes_in_a_long_enough_session(call_for, fresh_reference, demo_site):
    """Figures of the trade (common practice): holography leaves about 230 um; the laser adds about
    100 um in quadrature (about 250 um).  At 100 GHz (Ruze 1966) that is eta 0.39 against 0.33:
    observing with the laser's surface needs (0.39/0.33)^2 = 1.40x the integration time, so
    holography's extra 33 min pay back after 33 / 0.40 = about 80 min of observing."""
    table, registry = fresh_reference
    site = replace(
        demo_site,
        astronomical=replace(
            demo_site.astronomical, surface_rms_um=230.0, wind_term_um_per_ms2=0.0, thermal_drift_um_per_c=0.0
        ),
        scan=replace(
            demo_site.scan,
            noise_um_at_calm=100.0,
            wind_term_um_per_ms2=0.0,
            reference_ageing_um_per_day=0.0,
            reference_mismatch_um_per_c=0.0,
        ),
    )
    eta_holo = math.exp(-((4 * math.pi * 230.0 / lambda_over(1, 100.0)) ** 2))
    eta_laser = math.exp(-((4 * math.pi * math.hypot(230.0, 100.0) / lambda_over(1, 100.0)) ** 2))
    assert (round(eta_holo, 2), round(eta_laser, 2)) == (0.39, 0.33)
    payback_min = 33.0 / ((0.39 / 0.33) ** 2 - 1.0)
    assert 75.0 < payback_min < 85.0
    long = call_for(
        table,
        registry=registry,
        freq_ghz=100.0,
        site=replace(site, thresholds=replace(site.thresholds, session_hours=4.0)),
    )
    assert long.verdict == "astronomical"
    text = next(r for r in long.reasons if r.rule == "choice").message
    assert "1.40× the integration time" in text and "about 80 min of observing" in text
    # a session shorter than holography + its payback (45 + 83 min): the laser
    short = call_for(
        table,
        registry=registry,
        freq_ghz=100.0,
        site=replace(site, thresholds=replace(site.thresholds, session_hours=2.0)),
    )
    assert short.verdict == "scan"
    assert "more than the 2 h session leaves" in next(r for r in short.reasons if r.rule == "choice").message


# --------------------------------------------------------------------------- messages follow their rule


def _lint(*texts):
    docs = [(p.read_text(), str(p), "default") for p in default_rule_files()]
    docs += [(t, f"site{i}.yaml", "site") for i, t in enumerate(texts)]
    return lint_texts(docs, CATALOGUE)


def test_overriding_a_threshold_never_leaves_a_stale_number_unwarned():
    report = _lint("rules:\n  - id: high_frequency_wind_limit\n    condition: wind_mean_ms > 5 kn\n")
    warnings = [p for p in report.problems if p.severity == "warning"]
    assert any("hf_wind_limit_ms" in p.message and "does not read" in p.message for p in warnings)


def test_a_hard_coded_number_the_condition_does_not_use_is_a_warning():
    report = _lint(
        "rules:\n  - id: windy\n    applies_to: scan\n    condition: wind_gust_ms > 10 m/s\n"
        '    effect: warn\n    message: "Gusts above 8 m/s."\n'
    )
    assert any("'8 m/s'" in p.message for p in report.problems if p.severity == "warning")
    clean = _lint(
        "rules:\n  - id: windy\n    applies_to: scan\n    condition: wind_gust_ms > 10 m/s\n"
        '    effect: warn\n    message: "Gusts above {limit}."\n'
    )
    assert clean.problems == ()


def test_limit_fields_show_the_condition_as_written(call_for, tmp_path, demo_site, fresh_reference):
    from advisor.rules.loader import load_rules

    table, registry = fresh_reference
    site_rules = tmp_path / "site.yaml"
    site_rules.write_text(
        "rules:\n  - id: calm_check\n    applies_to: scan\n    condition: wind_gust_ms > 1 kn\n"
        '    effect: warn\n    message: "Gusts {wind_gust_ms:.1f} m/s above {limit}."\n'
    )
    rules = load_rules([(p, "default") for p in default_rule_files()] + [(site_rules, "site")], CATALOGUE)
    fired = next(r for r in rules if r.id == "calm_check")
    assert fired.message_for({"wind_gust_ms": 2.5}) == "Gusts 2.5 m/s above 1 kn."
    bad = _lint(
        "rules:\n  - id: x\n    applies_to: scan\n    condition: wind_gust_ms > 1 kn\n"
        '    effect: warn\n    message: "{limit_2}"\n'
    )
    assert any(p.severity == "error" and "limit_2" in p.message for p in bad.problems)
