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
