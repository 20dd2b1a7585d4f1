"""Fail-safe outputs: model arithmetic that overflows, message formats that would print megabytes,
and terminal control characters from files that would reach a terminal or cron mail.

The weather is synthetic (tests/conftest.py) and only puts the call in a known state.
"""

from __future__ import annotations

import json
import re
import sys
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from advisor.model.inference import parse_model

from .conftest import run_cli

ROOT = Path(__file__).resolve().parent.parent
BUNDLED_MODEL = ROOT / "example_weather" / "larch_basin_model.json"
AT = "2026-01-16T04:00:00Z"


def overflowing_model_doc() -> dict:
    """The bundled model with coefficients and scales that overflow float64 for any input."""
    doc = json.loads(BUNDLED_MODEL.read_text(encoding="utf-8"))
    for method in doc["methods"].values():
        n = len(method["logistic"]["coef"])
        method["logistic"]["coef"] = [-1e308] * n  # every term lowers the odds (its declared direction)
        method["scaler"]["scale"] = [1e-300] * n
    return doc


def _features(n: int = 3) -> pd.DataFrame:
    return pd.DataFrame(
        {
            "wind_gust_ms": np.linspace(2.0, 9.0, n),
            "dew_point_spread_c": np.full(n, 0.5),
            "air_temp_rate_c_per_h": np.full(n, -0.8),
        }
    )


# --- model arithmetic -----------------------------------------------------------------------


def test_overflowing_model_gives_no_odds_and_says_why_without_numpy_warnings():
    model = parse_model(json.dumps(overflowing_model_doc()), "overflow.json")
    features = _features()
    features.loc[1, "wind_gust_ms"] = np.nan  # one row really lacks an input
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # any RuntimeWarning fails the test
        odds = model.odds(features)
        notes = {m: [odds.notes[m][i] for i in range(len(features))] for m in odds}
    for method, p in odds.items():
        assert np.isnan(p).all(), p  # never a confident 0 or 1 from inf
        assert "arithmetic failed (overflow) for these inputs: rules only" in notes[method][0]
        assert "arithmetic failed" not in notes[method][1]  # a missing input is said as such
        assert "wind_gust_ms" in notes[method][1] and "not available" in notes[method][1]


def test_finite_model_still_gives_its_odds():
    model = parse_model(BUNDLED_MODEL.read_text(encoding="utf-8"), "demo.json")
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        odds = model.odds(_features())
    for p in odds.values():
        assert np.isfinite(p).all() and ((p > 0) & (p < 1)).all()


def test_check_with_an_overflowing_model_rests_on_rules_and_prints_no_warning(capsys, tmp_path):
    from .test_tick import make_site

    site = make_site(tmp_path)
    model = tmp_path / "overflow.json"
    model.write_text(json.dumps(overflowing_model_doc()))
    status, out, err = run_cli(capsys, "check", "--site", site, "--at", AT, "--model", model, "--json")
    assert err == ""
    doc = json.loads(out)
    assert all(c["p_usable"] is None for c in doc["candidates"].values())
    notes = [r["message"] for r in doc["reasons"] if r["rule"].startswith("model.")]
    assert len(notes) == 2 and all("arithmetic failed (overflow)" in n for n in notes)
    assert not any("not available" in n for n in notes)  # the old, untrue note
    status_rules_only, out2, _ = run_cli(capsys, "check", "--site", site, "--at", AT, "--model", "none", "--json")
    assert status == status_rules_only and json.loads(out2)["verdict"] == doc["verdict"]


# --- message formats ------------------------------------------------------------------------


def _rule_file(folder: Path, message: str) -> Path:
    path = folder / "extra.yaml"
    path.write_text(
        "rules:\n  - id: loud\n    applies_to: both\n    condition: wind_mean_ms >= 0\n"
        f"    effect: warn\n    message: {json.dumps(message)}\n"
    )
    return path


@pytest.mark.parametrize(
    "spec, words",
    [
        (">1000000", "format width 1000000 is above 40"),
        ("^41", "format width 41 is above 40"),
        (".500f", "format precision 500 is above 12"),
        ("x<" + "9" * 5000 + ".1f", "(5000 digits) is above 40"),
    ],
)
def test_lint_refuses_message_formats_that_would_print_megabytes(capsys, tmp_path, spec, words):
    rules = _rule_file(tmp_path, "Wind {wind_mean_ms:" + spec + "} now.")
    status, out, err = run_cli(capsys, "rules", "lint", rules)
    assert status == 2 and words in out, out
    status, out, err = run_cli(capsys, "check", "--at", AT, "--rules", rules)
    assert status == 2 and out == "" and len(err.splitlines()) == 1 and words in err


@pytest.mark.parametrize("spec", [">40", "^40.12f", "+.3f", ",.0f", "0>8.2f"])
def test_reasonable_formats_pass_lint(capsys, tmp_path, spec):
    status, out, _ = run_cli(capsys, "rules", "lint", _rule_file(tmp_path, "Wind {wind_mean_ms:" + spec + "} now."))
    assert status == 0, out


def test_format_message_bounds_its_output_even_past_lint():
    from advisor.rules.ruleset import MAX_MESSAGE_CHARS, format_message

    assert format_message("Wind {w:>1000000} m/s", {"w": 1.5}) == "Wind 1.5 m/s"  # width ignored
    assert format_message("{w:.99999f}", {"w": 1.5}) == "1.5"
    huge = format_message("x" * 3_000_000 + "{w:.1f}", {"w": 1.5})
    assert len(huge) <= MAX_MESSAGE_CHARS and huge.endswith("1.5")
    assert format_message("Fog\x1b[2J\x1b]0;pwned\x07 ahead {w:.1f}\r\n", {"w": 2.0}) == "Fog ahead 2.0 "


# --- terminal control characters from files ---------------------------------------------------

EVIL = "\x1b]0;owned\x07\x1b[2J\x9b31m\u202e\r"
_CONTROL = re.compile("[\x00-\x08\x0b-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069]")


def _hostile_site(folder: Path) -> tuple[Path, Path]:
    """A site whose name, calibrator names, rule message and feed path all carry escape sequences."""
    from .test_tick import make_site

    site = make_site(folder, name=f"Larch{EVIL} Basin [/bold] (invented)")
    text = site.read_text()
    text = text.replace('"3C 84"', json.dumps(f"3C{EVIL} 84")).replace('"0716+714"', json.dumps(f"0716{EVIL}+714"))
    (folder / "extra.yaml").write_text(
        "rules:\n  - id: noisy\n    applies_to: both\n    condition: wind_mean_ms >= 0\n    effect: warn\n"
        f"    message: {json.dumps('Look' + EVIL + ' out {calibrator_name} {wind_mean_ms:.1f} m/s')}\n"
    )
    site.write_text(text + "rules:\n  - extra.yaml\n")
    feed = folder / f"feed{EVIL.replace(chr(0), '')}.csv".replace("/", "")
    (folder / "feed.csv").rename(feed)
    return site, feed


def _assert_clean(text: str, where: str) -> None:
    found = _CONTROL.findall(text.replace("\n", "").replace("\t", ""))
    assert not found, f"{where}: control characters {found!r} in {text[:300]!r}"


def test_no_control_character_from_a_file_reaches_any_output(capsys, tmp_path):
    site, feed = _hostile_site(tmp_path)
    model = tmp_path / f"gone{EVIL}.json"
    base = ["--site", site, "--feed", feed, "--at", AT, "--model", model]
    status, out, err = run_cli(capsys, "check", *base, "--details")
    assert status in (0, 10, 11, 12), err
    assert "Larch Basin [/bold] (invented)" in out and "Look out 0716+714" in out
    _assert_clean(out, "check (plain)")
    status, out, err = run_cli(capsys, "check", *base, "--json")
    _assert_clean(out, "check --json")  # JSON escapes would be printed raw by the next tool
    doc = json.loads(out)
    for text in [doc["site"], *(r["message"] for r in doc["reasons"]), *doc["notes"], doc["data_quality"]["source"]]:
        _assert_clean(text, "check --json string")
    status, out, err = run_cli(capsys, "rules", "explain", *base)
    _assert_clean(out, "rules explain")
    status, out, err = run_cli(
        capsys, "outlook", "--site", site, "--feed", feed, "--from", "2026-01-16T01:00:00Z", "--hours", "2"
    )
    assert status == 0 and "Larch Basin [/bold] (invented)" in out, err
    _assert_clean(out + err, "outlook")


def test_tick_files_stdout_and_notify_payload_carry_no_control_characters(capsys, tmp_path):
    site, feed = _hostile_site(tmp_path)
    record = tmp_path / "record.py"
    record.write_text("import sys, pathlib\npathlib.Path(sys.argv[1]).write_text(sys.stdin.read())\n")
    payload = tmp_path / "payload.txt"
    site.write_text(
        site.read_text() + f"tick:\n  notify_command: [{json.dumps(sys.executable)}, "
        f"{json.dumps(str(record))}, {json.dumps(str(payload))}]\n"
    )
    state = tmp_path / "state"
    status, out, err = run_cli(capsys, "tick", "--site", site, "--feed", feed, "--at", AT, "--state-dir", state)
    assert status in (0, 10, 11, 12), err
    _assert_clean(out, "tick stdout")
    _assert_clean(payload.read_text(), "notify payload")
    for name in ("advisory.txt", "advisory.json", "advisory.html", "history.jsonl"):
        _assert_clean((state / name).read_text(), name)
    page = (state / "advisory.html").read_text()
    assert "Larch Basin [/bold] (invented)" in page and "<title>" in page


def test_rich_markup_in_a_site_name_is_shown_as_written_on_a_terminal(tmp_path):
    """A name with [brackets] once crashed the panel (a rich markup error); it is plain text."""
    import io

    from rich.console import Console

    from advisor.commands import session
    from advisor.views.panel import render_panel

    from .test_tick import make_site

    site = make_site(tmp_path, name="Bad [/bold] name [red]x (invented)")
    result = session.run_check(session.Request(site_path=site, at=session.parse_time(AT, "--at")))
    console = Console(file=io.StringIO(), width=120, color_system=None, force_terminal=True)
    console.print(render_panel(result.call, result.ctx))
    assert "Bad [/bold] name [red]x (invented)" in console.file.getvalue()
