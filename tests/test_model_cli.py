"""The site model as a user meets it: train, model show, and check with good and bad model files."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from advisor.model.modelfile import MAX_MODEL_BYTES, load_model

from .conftest import run_cli

ROOT = Path(__file__).resolve().parent.parent
HISTORY = ROOT / "example_weather" / "larch_basin_history.csv"
BUNDLED = ROOT / "example_weather" / "larch_basin_model.json"


run = run_cli


def test_train_on_the_demo_history_rebuilds_the_bundled_model(tmp_path, capsys):
    out_path = tmp_path / "model.json"
    status, out, err = run(capsys, "train", "--history", HISTORY, "--out", out_path)
    assert status == 0, err
    assert "ROC AUC" in out and "Brier score" in out and "reliability" in out
    assert f"wrote {out_path}" in out
    rebuilt, bundled = load_model(out_path), load_model(BUNDLED)
    assert rebuilt.features == bundled.features
    assert set(rebuilt.methods) == set(bundled.methods) == {"scan", "astronomical"}
    for method, m in bundled.methods.items():
        r = rebuilt.methods[method]
        assert r.terms == m.terms
        for a, b in ((r.mean, m.mean), (r.scale, m.scale), (r.coef, m.coef), ([r.intercept], [m.intercept])):
            np.testing.assert_allclose(a, b, rtol=1e-7, atol=1e-10)
        assert r.metrics["attempts"] == m.metrics["attempts"]
        assert r.metrics["roc_auc"] == pytest.approx(m.metrics["roc_auc"], abs=1e-3)
    assert rebuilt.training["history"]["sha256"] == bundled.training["history"]["sha256"]


def test_train_refuses_thin_history_and_writes_nothing(tmp_path, capsys):
    lines = HISTORY.read_text(encoding="utf-8").splitlines()
    small = tmp_path / "small.csv"
    small.write_text("\n".join(lines[:41]) + "\n", encoding="utf-8")
    out_path = tmp_path / "model.json"
    out_path.write_text("keep", encoding="utf-8")
    status, out, err = run(capsys, "train", "--history", small, "--out", out_path)
    assert status == 2
    assert err.startswith(f"advisor: error: {small}: ") and err.count("\n") == 1
    assert "need at least 30 to fit honestly" in err
    assert out_path.read_text(encoding="utf-8") == "keep"


def test_model_show_prints_metadata_metrics_and_plain_coefficients(capsys):
    status, out, err = run(capsys, "model", "show", BUNDLED)
    assert status == 0, err
    doc = json.loads(BUNDLED.read_text(encoding="utf-8"))
    assert doc["training"]["history"]["sha256"] in out
    for text in (
        "larch_basin_history.csv, 420 rows",
        "scikit-learn",
        "numpy",
        "ROC AUC",
        "Brier score",
        "laser scan:",
        "astronomical:",
        "gusts squared",
        "per (m/s)²",
        "per °C/h",
        "wind_gust_ms [m/s]",
        "intercept",
    ):
        assert text in out, text


def test_model_show_of_a_damaged_file_is_one_line(tmp_path, capsys):
    bad = tmp_path / "model.json"
    bad.write_text(BUNDLED.read_text(encoding="utf-8")[:300], encoding="utf-8")
    status, out, err = run(capsys, "model", "show", bad)
    assert status == 2 and out == ""
    assert err.startswith(f"advisor: error: {bad}:") and "truncated JSON" in err and err.count("\n") == 1


def test_model_without_action_is_usage(capsys):
    status, _, err = run(capsys, "model")
    assert status == 2 and "choose an action" in err


def test_demo_check_shows_model_odds_and_reasons(capsys):
    status, out, _ = run(capsys, "check", "--json")
    doc = json.loads(out)
    assert doc["verdict"] == "scan" and status == 0  # the demo story: calm evening → scan
    for cand in doc["candidates"].values():
        assert 0.0 < cand["p_usable"] < 1.0
    notes = [r for r in doc["reasons"] if r["rule"] == "model.scan" and r["effect"] == "info"]
    assert len(notes) == 1 and "the site model's odds most" in notes[0]["message"]
    status, out, _ = run(capsys, "check")
    table = [line for line in out.splitlines() if line.startswith("laser scan")]
    assert table and "%" in table[0]


def _damaged(tmp_path) -> dict:
    text = BUNDLED.read_text(encoding="utf-8")
    doc = json.loads(text)
    files = {
        "truncated": text[: len(text) // 3],
        "wrong_feature": text.replace('"dew_point_spread_c"', '"dewpoint_spread_c"'),
        "wrong_unit": text.replace('"degC/h"', '"degF/h"', 1),
        "wrong_schema": text.replace('"schema_version": 2', '"schema_version": 7', 1),
        "huge": text + " " * (MAX_MODEL_BYTES + 10),
        "shapes": json.dumps(
            {**doc, "methods": {"scan": {**doc["methods"]["scan"], "logistic": {"coef": [0.1], "intercept": 0.0}}}}
        ),
    }
    paths = {}
    for name, content in files.items():
        paths[name] = tmp_path / f"{name}.json"
        paths[name].write_text(content, encoding="utf-8")
    return paths


@pytest.mark.parametrize("kind", ["truncated", "wrong_feature", "wrong_unit", "wrong_schema", "huge", "shapes"])
def test_check_with_a_bad_model_falls_back_to_rules_and_says_so(tmp_path, capsys, kind):
    bad = _damaged(tmp_path)[kind]
    rules_only, plain_rules, _ = run(capsys, "check", "--model", "none")
    status, out, err = run(capsys, "check", "--model", bad)
    assert status == rules_only
    assert err.startswith(f"advisor: warning: {bad}") and "falling back to rules only" in err
    words = " ".join(out.split())  # the screen folds long notes
    assert "Site model not used" in words and "rules and the error budget only" in words
    status, out, _ = run(capsys, "check", "--model", bad, "--json")
    doc = json.loads(out)
    assert all(c["p_usable"] is None for c in doc["candidates"].values())
    assert any("Site model not used" in n for n in doc["notes"])
    assert not any(r["rule"].startswith("model.") for r in doc["reasons"])


def test_site_model_path_that_is_missing_falls_back(tmp_path, capsys):
    site = (ROOT / "example_weather" / "larch_basin.yaml").read_text(encoding="utf-8")
    demo = ROOT / "example_weather"
    site = site.replace("path: larch_basin_model.json", "path: no_such_model.json")
    site = site.replace("path: larch_basin_mast.csv", f"path: {demo / 'larch_basin_mast.csv'}")
    site = site.replace("path: references.csv", f"path: {demo / 'references.csv'}")
    path = tmp_path / "site.yaml"
    path.write_text(site, encoding="utf-8")
    status, out, err = run(capsys, "check", "--site", path, "--at", "2026-12-01T03:00:00Z")
    assert "model file not found" in err and "Site model not used" in out
    assert status in (0, 10)  # a call on the rules and error budget alone (scan or astronomical)


def test_check_never_imports_scikit_learn():
    """The check path is numpy-only inference: scikit-learn (and test-only astropy) stay unloaded."""
    code = (
        "import sys\n"
        "from advisor.commands.main import main\n"
        "status = main(['check', '--json'])\n"
        "heavy = sorted(m for m in sys.modules if m.split('.')[0] in ('sklearn', 'astropy', 'scipy'))\n"
        "print('HEAVY', heavy, file=sys.stderr)\n"
        "assert 'advisor.model.inference' in sys.modules\n"
        "assert not heavy, heavy\n"
    )
    env = {**os.environ, "PYTHONPATH": str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", "")}
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT, env=env, timeout=120)
    assert proc.returncode == 0, proc.stderr
    assert "HEAVY []" in proc.stderr
    assert json.loads(proc.stdout)["candidates"]["scan"]["p_usable"] is not None


def test_train_from_an_archive_feed_computes_features_at_each_attempt(tmp_path, capsys):
    """--feed: features come from the archive (demo logger layout) at each attempt's time."""
    import importlib.util

    import pandas as pd

    from advisor.features import compute_features
    from advisor.io.feed import read_feed
    from advisor.io.references import Registry
    from advisor.io.site import load_site

    spec = importlib.util.spec_from_file_location("make_demo_for_model_cli", ROOT / "example_weather" / "make_demo.py")
    make_demo = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(make_demo)
    archive = tmp_path / "archive.csv"
    make_demo.synth_mast("2026-03-01", "2026-03-05", scenario=None).to_csv(archive, index=False)
    times = pd.date_range("2026-03-01T02:00Z", periods=48, freq="113min")
    site = load_site(None)
    feed = read_feed(archive, site.feed)
    gust = compute_features(feed.frame, pd.DatetimeIndex(times), site, Registry.empty(), 86.0)["wind_gust_ms"]
    # gustier attempts fail (every seventh outcome flipped, so the classes overlap)
    calm = gust.to_numpy() < np.quantile(gust, 0.6)
    usable = np.where(calm ^ (np.arange(48) % 7 == 0), "yes", "no")
    history = tmp_path / "attempts.csv"
    pd.DataFrame({"time": times.strftime("%Y-%m-%dT%H:%M:%SZ"), "method": "scan", "usable": usable}).to_csv(
        history, index=False
    )
    out_path = tmp_path / "model.json"
    status, out, err = run(
        capsys, "train", "--history", history, "--feed", archive, "--method", "scan", "--out", out_path
    )
    assert status == 0, err
    assert f"48 computed from the feed {archive}" in out
    model = load_model(out_path)
    assert set(model.methods) == {"scan"} and model.methods["scan"].metrics["attempts"] == 48
    assert model.training["feed"]["file"] == "archive.csv" and len(model.training["feed"]["sha256"]) == 64
    # the scaler's mean of gust² is the mean over the attempts of the archive's 10-min max gust, squared
    scan = model.methods["scan"]
    assert scan.terms[0].name == "wind_gust_ms_sq" and scan.coef[0] < 0
    assert scan.mean[0] == pytest.approx(float(np.mean(gust.to_numpy() ** 2)), rel=1e-12)
