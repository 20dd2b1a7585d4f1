"""Shared builders: synthetic canonical weather for the demo site, and a one-call evaluator.

The weather built here is synthetic and serves only to put the decision in a known state; no
check value comes from it.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pandas as pd
import pytest

from advisor.evaluation.evaluate import evaluate
from advisor.explain import explain
from advisor.features import CATALOGUE
from advisor.io.feed import canonical_frame
from advisor.io.references import Registry
from advisor.io.site import FeedLayout, load_site
from advisor.rules.loader import default_rule_files, load_rules

# A winter night at the demo site: sunset is near 00:05 UTC on 15 Jan, so 04:00 UTC on the
# 16th is about four hours after sunset.
NIGHT_UTC = pd.Timestamp("2026-01-16T04:00:00Z")


def weather_table(
    end=NIGHT_UTC,
    hours=3.0,
    step_min=1.0,
    wind_mean_ms=1.5,
    wind_gust_ms=2.5,
    air_temp_c=2.0,
    temp_rate_c_per_h=-0.4,
    rel_humidity_pct=70.0,
    precip_mm_h=0.0,
    visibility_m=30000.0,
    solar_wm2=0.0,
    **extra,
) -> pd.DataFrame:
    """A canonical-name table (SI, ISO times with Z) ending at ``end``."""
    n = int(hours * 60 / step_min) + 1
    times = pd.date_range(end=end, periods=n, freq=pd.Timedelta(minutes=step_min))
    hours_before = (times - end).total_seconds().to_numpy() / 3600.0
    table = pd.DataFrame(
        {
            "time": times.strftime("%Y-%m-%dT%H:%M:%SZ"),
            "wind_mean_ms": np.full(n, wind_mean_ms),
            "wind_gust_ms": np.full(n, wind_gust_ms),
            "air_temp_c": air_temp_c + temp_rate_c_per_h * hours_before,
            "rel_humidity_pct": np.full(n, rel_humidity_pct),
            "precip_mm_h": np.full(n, precip_mm_h),
            "visibility_m": np.full(n, visibility_m),
            "solar_wm2": np.full(n, solar_wm2),
        }
    )
    for k, v in extra.items():
        table[k] = v
    return table


@pytest.fixture(scope="session")
def demo_site():
    return load_site(None)


@pytest.fixture(scope="session")
def default_rules():
    return load_rules([(p, "default") for p in default_rule_files()], CATALOGUE)


def registry_at(time_utc, air_temp_c) -> Registry:
    return Registry(
        pd.DatetimeIndex([pd.Timestamp(time_utc)]).tz_convert("UTC"), np.array([float(air_temp_c)]), ("test",)
    )


@pytest.fixture()
def call_for(demo_site, default_rules):
    """Evaluate a canonical table at ``at`` for the demo site and return the explained call.

    Without ``site``: the demo site for a 2-hour session, so that on the calm synthetic night the
    quick laser scan is the call (holography's better surface pays back only in longer sessions;
    tests of that choice pass a site with their own ``session_hours``).
    """
    short_session = replace(demo_site, thresholds=replace(demo_site.thresholds, session_hours=2.0))

    def run(table, at=NIGHT_UTC, registry=None, freq_ghz=86.0, site=None, layout=None):
        site = site or short_session
        feed = canonical_frame(table, layout or FeedLayout(max_feed_age_min=site.feed.max_feed_age_min))
        if registry is None:
            registry = registry_at(pd.Timestamp(at) - pd.Timedelta(hours=2), table["air_temp_c"].iloc[-1] + 0.8)
        decisions = evaluate(feed.frame, pd.DatetimeIndex([pd.Timestamp(at)]), site, registry, default_rules, freq_ghz)
        assert len(decisions.verdict) == 1, "one evaluation time, one verdict"
        return explain(decisions, 0)

    return run


@pytest.fixture()
def site_with(demo_site):
    def make(**thresholds):
        return replace(demo_site, thresholds=replace(demo_site.thresholds, **thresholds))

    return make


@pytest.fixture(autouse=True)
def _replay_cache_in_tmp(tmp_path_factory, monkeypatch):
    """Tests never write to the user's ~/.cache: the replay feature cache lives in a temp folder;
    and never read the user's site: no $ADVISOR_SITE, an empty configuration folder."""
    monkeypatch.setenv("ADVISOR_CACHE_DIR", str(tmp_path_factory.getbasetemp() / "advisor-cache"))
    monkeypatch.delenv("ADVISOR_SITE", raising=False)
    monkeypatch.setenv("XDG_CONFIG_HOME", str(tmp_path_factory.getbasetemp() / "no-config"))


def run_cli(capsys, *argv):
    """Run the advisor's command line in-process: (exit status, stdout, stderr)."""
    from advisor.commands.main import main

    status = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return status, out, err
