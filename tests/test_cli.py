"""The command line as a user meets it: exit codes, JSON contract, one-line errors."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest

from advisor.commands.session import parse_frequency_ghz
from advisor.errors import UsageError

from .conftest import NIGHT_UTC, run_cli, weather_table

ROOT = Path(__file__).resolve().parent.parent


run = run_cli


@pytest.fixture()
def night_files(tmp_path):
    feed = tmp_path / "feed.csv"
    weather_table().to_csv(feed, index=False)
    refs = tmp_path / "refs.csv"
    refs.write_text(f"time,air_temp_c,note\n{(NIGHT_UTC - pd.Timedelta(hours=2)):%Y-%m-%dT%H:%M:%SZ},2.8,test\n")
    return feed, refs


def test_demo_check_runs_and_is_labelled(capsys):
    status, out, err = run(capsys, "check")
    assert status in (0, 10, 11, 12)
    assert "DEMO DATA" in out
    assert "VERDICT:" in out and "Advisory only" in out
    status, out, err = run(capsys, "check", "--details")
    assert "VERDICT:" in out and "Stow the antenna" in out and "[budget.scan]" in out
    assert err == ""


def test_demo_check_json_contract(capsys):
    status, out, _ = run(capsys, "check", "--json")
    doc = json.loads(out)
    for key in (
        "verdict",
        "time_utc",
        "target_freq_ghz",
        "reasons",
        "features",
        "candidates",
        "data_quality",
        "next_window",
        "schema_version",
    ):
        assert key in doc
    assert set(doc["candidates"]) == {"scan", "astronomical"}
    for cand in doc["candidates"].values():
        assert {"feasible", "surface_rms_um", "ruze_efficiency", "p_usable", "duration_min"} <= set(cand)
    for key in (
        "sun_elevation_deg",
        "dew_point_c",
        "dew_point_spread_c",
        "wind_mean_ms",
        "wind_gust_ms",
        "air_temp_rate_c_per_h",
        "hours_since_sunset",
        "reference_age_h",
    ):
        assert key in doc["features"]
    assert all({"rule", "applies_to", "effect", "message"} <= set(r) for r in doc["reasons"])
    assert doc["exit_status"] == status
    assert doc["demo_data"] is True


def test_scan_exit_zero_and_json(capsys, night_files):
    feed, refs = night_files
    status, out, _ = run(
        capsys, "check", "--feed", str(feed), "--references", str(refs), "--at", "2026-01-16T04:00:00Z", "--json"
    )
    assert status == 0
    assert json.loads(out)["verdict"] == "scan"


@pytest.mark.parametrize("freq", ["86", "86GHz", "86 GHz", "3.486mm"])
def test_frequency_spellings(freq):
    assert parse_frequency_ghz(freq) == pytest.approx(86.0, rel=1e-3)


@pytest.mark.parametrize("freq", ["-5", "3THz", "fast", "0", "86 parsecs"])
def test_bad_frequency_is_usage_error(freq):
    with pytest.raises(UsageError):
        parse_frequency_ghz(freq)


def test_stale_feed_exit_12(capsys, night_files):
    feed, refs = night_files
    status, out, _ = run(
        capsys, "check", "--feed", str(feed), "--references", str(refs), "--at", "2026-01-16T06:00:00Z"
    )
    assert status == 12
    assert "UNDETERMINED" in out


@pytest.mark.parametrize(
    "content, expect",
    [
        ("", "empty"),
        ("time;wind_mean_ms;wind_gust_ms\n2026-01-01T00:00:00Z;1;2\n", "delimiter"),
        ("time,wind_mean_ms\n2026-01-01T00:00:00Z,1\n", "missing required column"),
        ("time,wind_mean_ms,wind_gust_ms,air_temp_c,rel_humidity_pct\nyesterday,1,2,3,50\n", "timestamp"),
        ("time,wind_mean_ms,wind_gust_ms,air_temp_c,rel_humidity_pct\n2026-01-01T00:00:00,1,2,3,50\n", "offset"),
    ],
)
def test_malformed_feed_is_one_line_exit_2(capsys, tmp_path, content, expect):
    feed = tmp_path / "bad.csv"
    feed.write_text(content)
    status, out, err = run(capsys, "check", "--feed", str(feed))
    assert status == 2
    assert out == ""
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("advisor: error: ")
    assert str(feed) in lines[0] and expect in lines[0].lower()


def test_malformed_site_names_key_path_and_line(capsys, tmp_path):
    site = tmp_path / "site.yaml"
    site.write_text("site:\n  name: X\n  latitude_deg: north\n  longitude_deg: 0\n  dish_diameter_m: 50\n")
    status, _, err = run(capsys, "check", "--site", str(site))
    assert status == 2
    assert f"{site}:3: site.latitude_deg: expected a number" in err


def test_site_yaml_tag_is_refused(capsys, tmp_path):
    site = tmp_path / "site.yaml"
    site.write_text("site: !!python/object/apply:os.system ['echo hacked']\n")
    status, out, err = run(capsys, "check", "--site", str(site))
    assert status == 2 and "hacked" not in out and "tag not allowed" in err


def test_malformed_rules_file_exit_2(capsys, tmp_path, night_files):
    feed, refs = night_files
    rules = tmp_path / "extra.yaml"
    rules.write_text(
        "rules:\n  - id: x\n    applies_to: scan\n    condition: wind_mean > 3\n    effect: block\n    message: hi\n"
    )
    status, _, err = run(capsys, "check", "--feed", str(feed), "--rules", str(rules))
    assert status == 2
    assert f"{rules}:4" in err and "wind_mean_ms" in err  # suggests the closest feature name


def test_reference_add_and_list(capsys, tmp_path):
    refs = tmp_path / "refs.csv"
    status, out, _ = run(
        capsys,
        "reference",
        "add",
        "--references",
        str(refs),
        "--time",
        "2026-01-16T02:00:00Z",
        "--air-temp-c",
        "2.5",
        "--note",
        "after holography",
    )
    assert status == 0 and refs.exists()
    status, out, _ = run(capsys, "reference", "list", "--references", str(refs), "--at", "2026-01-16T04:00:00Z")
    assert status == 0 and "2.0 h" in out and "after holography" in out


def test_reference_add_refuses_bad_time_and_keeps_file(capsys, tmp_path):
    refs = tmp_path / "refs.csv"
    refs.write_text("time,air_temp_c,note\n2026-01-16T02:00:00Z,2.5,x\n")
    before = refs.read_bytes()
    status, _, err = run(capsys, "reference", "add", "--references", str(refs), "--time", "soon", "--air-temp-c", "2")
    assert status == 2 and "--time" in err
    assert refs.read_bytes() == before


def test_installed_console_script_from_another_directory(tmp_path):
    """The README's first command: the installed `advisor check` works outside the checkout."""
    exe = Path(sys.executable).with_name("advisor")
    if not exe.exists():
        pytest.skip("advisor console script not installed in this environment")
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH",)}
    proc = subprocess.run(
        [str(exe), "check", "--json"], cwd=tmp_path, capture_output=True, text=True, env=env, timeout=120
    )
    assert proc.returncode in (0, 10, 11, 12), proc.stderr
    doc = json.loads(proc.stdout)
    assert doc["demo_data"] is True and doc["schema_version"] >= 1


class _FakeTTY:
    def isatty(self):
        return True


def test_colour_only_on_a_terminal_and_never_with_no_color(monkeypatch):
    from advisor.commands.session import want_color as _want_color

    monkeypatch.delenv("NO_COLOR", raising=False)
    assert _want_color(_FakeTTY())
    with open(os.devnull, "w") as devnull:
        assert not _want_color(devnull)
    monkeypatch.setenv("NO_COLOR", "1")
    assert not _want_color(_FakeTTY())
