"""`advisor rules lint|show|explain|features` and how every command refuses a rejected rule set.

No physics is checked here: the numbers come from synthetic weather and only have to be shown.
"""

from __future__ import annotations

import importlib.util
from pathlib import Path

import pandas as pd
import pytest

from advisor.commands.rules import rule_files
from advisor.commands.session import load_ruleset
from advisor.features import CATALOGUE, FEATURES
from advisor.io.site import load_site
from advisor.rules.loader import lint_files

from .conftest import NIGHT_UTC, run_cli, weather_table

ROOT = Path(__file__).resolve().parent.parent
DEFAULT_FILES = [(p, "default") for p in __import__("advisor.rules.loader", fromlist=["x"]).default_rule_files()]
#: The default rule set's size and files, counted rather than typed (adding a default rule must not break these tests).
N_DEFAULT = len(lint_files(DEFAULT_FILES, CATALOGUE).ruleset)
N_FILES = len(DEFAULT_FILES)
N_ASTRONOMICAL = sum(r.applies("astronomical") for r in lint_files(DEFAULT_FILES, CATALOGUE).ruleset)
GOOD = """rules:
  - id: gusts_shake_structure
    condition: wind_gust_ms > 16 kn
  - id: early_night
    enabled: false
  - id: frost_on_panels
    applies_to: scan
    condition: air_temp_c < 2.5 degC and dew_point_spread_c < 5 degC
    effect: add_error
    error_um: 25
    message: "Frost likely ({air_temp_c:.1f} °C)."
"""
BAD = """rules:
  - id: a
    applies_to: scan
    condition: wind_gust > 8 kn
    effect: warn
    message: "x"
  - id: b
    applies_to: scan
    condition: visibility_m < 3 km and visibility_m > 5 km
    effect: warn
    message: "{visibilty_m}"
"""


run = run_cli


@pytest.fixture()
def files(tmp_path):
    (tmp_path / "good.yaml").write_text(GOOD, encoding="utf-8")
    (tmp_path / "bad.yaml").write_text(BAD, encoding="utf-8")
    (tmp_path / "warn.yaml").write_text("rules:\n  - id: early_nigt\n    enabled: false\n", encoding="utf-8")
    feed = tmp_path / "feed.csv"
    weather_table().to_csv(feed, index=False)
    refs = tmp_path / "refs.csv"
    refs.write_text(f"time,air_temp_c,note\n{(NIGHT_UTC - pd.Timedelta(hours=2)):%Y-%m-%dT%H:%M:%SZ},2.8,test\n")
    return tmp_path


# --------------------------------------------------------------------------- lint


def test_lint_clean_exits_zero_and_summarises(capsys, files):
    status, out, err = run(capsys, "rules", "lint", str(files / "good.yaml"))
    assert status == 0 and err == ""
    assert out.strip() == (
        f"ok: {N_DEFAULT} rules in effect ({N_DEFAULT - 2} default, 2 command line, 1 disabled) "
        f"from {N_FILES + 1} files"
    )


def test_lint_reports_every_error_with_position_and_exits_two(capsys, files):
    bad = files / "bad.yaml"
    status, out, _ = run(capsys, "rules", "lint", str(files / "good.yaml"), str(bad))
    assert status == 2
    got = out.splitlines()
    assert got[0] == f"{bad}:4:16: error: rule a.condition: unknown name 'wind_gust' (did you mean 'wind_gust_ms'?)"
    assert got[1].startswith(f"{bad}:9:16: error: rule b.condition: the condition can never be true")
    assert got[2].startswith(f"{bad}:11:15: error: rule b.message: the message names '{{visibilty_m}}'")
    assert got[3] == f"3 errors in 1 of {N_FILES + 2} files: the rule set would be refused"


def test_warnings_exit_zero_unless_strict(capsys, files):
    status, out, _ = run(capsys, "rules", "lint", str(files / "warn.yaml"))
    assert status == 0 and "warning: rule early_nigt.enabled" in out and "did you mean 'early_night'?" in out
    status, _, _ = run(capsys, "rules", "lint", "--strict", str(files / "warn.yaml"))
    assert status == 2


def test_lint_without_files_checks_the_defaults_strictly_clean(capsys):
    status, out, _ = run(capsys, "rules", "lint", "--strict")
    assert status == 0 and out.startswith(f"ok: {N_DEFAULT} rules in effect ({N_DEFAULT} default)")


def test_lint_layers_exactly_what_every_command_loads(files):
    site = load_site(None)
    extra = [str(files / "good.yaml")]
    linted = lint_files(rule_files(site, extra), CATALOGUE).ruleset
    loaded = load_ruleset(site, extra)
    assert [(r.id, r.condition_text, r.layer) for r in linted] == [(r.id, r.condition_text, r.layer) for r in loaded]


def test_lint_follows_the_site_rule_files_and_a_missing_one_is_an_error(capsys, tmp_path):
    """A site file naming a rule file that is not there stops lint and check alike."""
    site = tmp_path / "site.yaml"
    site.write_text(
        "site:\n  name: T\n  latitude_deg: 47\n  longitude_deg: -114\n  dish_diameter_m: 50\n"
        "rules:\n  - missing_rules.yaml\n",
        encoding="utf-8",
    )
    status, out, _ = run(capsys, "rules", "lint", "--site", str(site))
    assert status == 2 and "missing_rules.yaml: error: rule file not found" in out
    feed = tmp_path / "feed.csv"
    weather_table().to_csv(feed, index=False)
    status, _, err = run(capsys, "check", "--site", str(site), "--feed", str(feed))
    assert status == 2 and "missing_rules.yaml: rule file not found" in err  # no fallback to defaults


# --------------------------------------------------------------------------- every command refuses


@pytest.mark.parametrize("command", [["check"], ["rules", "show"], ["rules", "explain"]])
def test_commands_refuse_a_rejected_rule_set_printing_every_error(capsys, files, command):
    bad = files / "bad.yaml"
    status, out, err = run(capsys, *command, "--rules", str(bad))
    assert status == 2 and out == ""
    got = err.splitlines()
    assert len(got) == 3 and all(line.startswith(f"advisor: error: {bad}:") for line in got)
    assert got[0].startswith(f"advisor: error: {bad}:4:16: rule a.condition: unknown name 'wind_gust'")


def test_yaml_tag_in_a_rule_file_is_refused_by_check(capsys, tmp_path):
    marker = tmp_path / "made"
    f = tmp_path / "tag.yaml"
    f.write_text(f"rules: !!python/object/apply:os.system ['touch {marker}']\n", encoding="utf-8")
    status, _, err = run(capsys, "check", "--rules", str(f))
    assert status == 2 and "tag not allowed" in err and not marker.exists()


# --------------------------------------------------------------------------- show


def test_show_lists_rules_with_layer_source_and_filter(capsys, files):
    status, out, _ = run(capsys, "rules", "show", "--rules", str(files / "good.yaml"), "--for", "astronomical")
    assert status == 0
    # early_night is off
    assert (
        out.splitlines()[0] == f"{N_ASTRONOMICAL - 1} rules in effect for astronomical ({N_ASTRONOMICAL - 1} default)"
    )
    assert "frost_on_panels" not in out and "gusts_shake_structure" not in out  # scan-only rules
    assert "turbulent_wind  [both · add_error 10 * (gust_factor - 1) µm]\n    when gust_factor" in out
    assert "disabled:\n  early_night  by command line " in out
    status, out, _ = run(capsys, "rules", "show", "--rules", str(files / "good.yaml"), "--for", "scan")
    assert (
        f"gusts_shake_structure  [scan · block]\n    when wind_gust_ms > 16 kn\n"
        f"    from command line {files / 'good.yaml'}:2\n    overrides default "
    ) in out


# --------------------------------------------------------------------------- explain


def test_explain_shows_every_rule_value_and_agrees_with_check(capsys, files):
    argv = [
        "--feed",
        str(files / "feed.csv"),
        "--references",
        str(files / "refs.csv"),
        "--at",
        "2026-01-16T04:00:00Z",
        "--rules",
        str(files / "good.yaml"),
    ]
    status, out, _ = run(capsys, "rules", "explain", *argv)
    assert status == 0
    blocks = out.split("\n\n")[1:]
    shown = {b.split()[1]: b.split()[0] for b in blocks}
    assert len(shown) == N_DEFAULT
    status, check_json, _ = run(capsys, "check", "--json", *argv)
    import json

    fired = {r["rule"] for r in json.loads(check_json)["reasons"] if r["rule"] in shown}
    assert {rid for rid, mark in shown.items() if mark == "TRUE"} == fired
    frost = next(b for b in blocks if b.split()[1] == "frost_on_panels")
    assert "air_temp_c < 2.5 degC: true  (2 °C < 2.5 °C)" in frost  # the numbers behind it
    assert "error term: 25 µm (added)" in frost and "says: Frost likely (2.0 °C)." in frost
    gusts = next(b for b in blocks if b.split()[1] == "gusts_shake_structure")
    assert "wind_gust_ms > 16 kn: false  (2.5 m/s > 8.23 m/s)" in gusts  # 16 kn = 8.23 m/s


def test_rules_without_action_is_usage_exit_two(capsys):
    status, _, err = run(capsys, "rules")
    assert status == 2 and "choose an action" in err


# --------------------------------------------------------------------------- features


def test_features_lists_every_catalogue_entry_with_unit_and_meaning(capsys):
    status, out, _ = run(capsys, "rules", "features")
    assert status == 0
    rows = {line.split()[0]: line for line in out.splitlines()[1:] if line.startswith("  ")}
    assert list(rows) == [f.name for f in FEATURES]
    for spec in FEATURES:
        assert rows[spec.name].split()[1] == spec.unit and rows[spec.name].endswith(spec.meaning)
    assert "calibrator_name" in out


# --------------------------------------------------------------------------- benchmark stays runnable


def test_benchmark_rule_file_lints_clean_and_has_fifty_rules(tmp_path):
    spec = importlib.util.spec_from_file_location("bench_rules", ROOT / "benchmarks" / "bench_rules.py")
    bench = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(bench)
    f = tmp_path / "bench.yaml"
    f.write_text(bench.site_rules_yaml(bench.RULES - N_DEFAULT), encoding="utf-8")
    defaults = [(p, "default") for p in __import__("advisor.rules.loader", fromlist=["x"]).default_rule_files()]
    report = lint_files(defaults + [(f, "site")], CATALOGUE)
    assert report.problems == () and len(report.ruleset) == bench.RULES
