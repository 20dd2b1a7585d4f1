"""Fail-safe outputs: model arithmetic that overflows, message formats that would print megabytes,
and terminal control characters from files that would reach a terminal or cron mail.

The weather is synthetic (tests/conftest.py) and only puts the call in a known state.
"""

from __future__ import annotations

import json
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from advisor.model.inference import parse_model

from .conftest import NIGHT_UTC, run_cli, weather_table

ROOT = Path(__file__).resolve().parent.parent
BUNDLED_MODEL = ROOT / "example_weather" / "larch_basin_model.json"
AT = "2026-01-16T04:00:00Z"


def overflowing_model_doc() -> dict:
    """The bundled model with coefficients and scales that overflow float64 for any input."""
    doc = json.loads(BUNDLED_MODEL.read_text(encoding="utf-8"))
    for method in doc["methods"].values():
        n = len(method["logistic"]["coef"])
        method["logistic"]["coef"] = [1e308 if k % 2 == 0 else -1e308 for k in range(n)]
        method["scaler"]["scale"] = [1e-300] * n
    return doc


def _features(n: int = 3) -> pd.DataFrame:
    return pd.DataFrame({"wind_gust_ms": np.linspace(2.0, 9.0, n), "dew_point_spread_c": np.full(n, 0.5),
                         "air_temp_rate_c_per_h": np.full(n, -0.8)})


# --- model arithmetic -----------------------------------------------------------------------

def test_overflowing_model_gives_no_odds_and_says_why_without_numpy_warnings():
    model = parse_model(json.dumps(overflowing_model_doc()), "overflow.json")
    features = _features()
    features.loc[1, "wind_gust_ms"] = np.nan            # one row really lacks an input
    with warnings.catch_warnings():
        warnings.simplefilter("error")                  # any RuntimeWarning fails the test
        odds = model.odds(features)
        notes = {m: [odds.notes[m][i] for i in range(len(features))] for m in odds}
    for method, p in odds.items():
        assert np.isnan(p).all(), p                     # never a confident 0 or 1 from inf
        assert "arithmetic failed (overflow) for these inputs: rules only" in notes[method][0]
        assert "arithmetic failed" not in notes[method][1]        # a missing input is said as such
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
    assert not any("not available" in n for n in notes)   # the old, untrue note
    status_rules_only, out2, _ = run_cli(capsys, "check", "--site", site, "--at", AT, "--model", "none", "--json")
    assert status == status_rules_only and json.loads(out2)["verdict"] == doc["verdict"]


# --- message formats ------------------------------------------------------------------------

def _rule_file(folder: Path, message: str) -> Path:
    path = folder / "extra.yaml"
    path.write_text("rules:\n  - id: loud\n    applies_to: both\n    condition: wind_mean_ms >= 0\n"
                    f"    effect: warn\n    message: {json.dumps(message)}\n")
    return path


@pytest.mark.parametrize("spec, words", [
    (">1000000", "format width 1000000 is above 40"),
    ("^41", "format width 41 is above 40"),
    (".500f", "format precision 500 is above 12"),
    ("x<" + "9" * 5000 + ".1f", "(5000 digits) is above 40"),
])
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

    assert format_message("Wind {w:>1000000} m/s", {"w": 1.5}) == "Wind 1.5 m/s"   # width ignored
    assert format_message("{w:.99999f}", {"w": 1.5}) == "1.5"
    huge = format_message("x" * 3_000_000 + "{w:.1f}", {"w": 1.5})
    assert len(huge) <= MAX_MESSAGE_CHARS and huge.endswith("1.5")
    assert format_message("Fog\x1b[2J\x1b]0;pwned\x07 ahead {w:.1f}\r\n", {"w": 2.0}) == "Fog ahead 2.0 "
