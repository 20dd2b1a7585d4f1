"""The site model file: strict reading, numpy inference, and the reasons it gives.

Expected values here come from the model's definition (a standardised logistic regression,
``p = 1 / (1 + exp(-(b + Σ w (t - m) / s)))``) or from scikit-learn itself; no number produced by
the invented demo history is used as a check value.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from advisor.errors import ModelError
from advisor.evaluation.evaluate import evaluate
from advisor.explain import explain
from advisor.io.feed import canonical_frame
from advisor.io.site import FeedLayout
from advisor.model.inference import MethodModel, SiteModel, Term, term_matrix
from advisor.model.modelfile import MAX_MODEL_BYTES, dumps_model, load_model, model_to_dict, parse_model

from .conftest import NIGHT_UTC, registry_at, weather_table

ROOT = Path(__file__).resolve().parent.parent
BUNDLED = ROOT / "example_weather" / "larch_basin_model.json"

GUST_SQ = Term("wind_gust_ms", "square")
SATURATION = Term("dew_point_spread_c", "shortfall", 3.0)
DRIFT = Term("air_temp_rate_c_per_h", "abs")


def hand_model(scan_intercept=2.0, astro_intercept=2.0) -> SiteModel:
    """A model with chosen numbers (not trained): what the tests below compute by hand."""
    terms = (GUST_SQ, SATURATION, DRIFT)
    mean, scale = np.array([16.0, 0.5, 0.6]), np.array([30.0, 1.0, 0.5])
    scan = MethodModel(terms, mean, scale, np.array([-1.8, -0.9, 0.1]), scan_intercept)
    astro = MethodModel(terms, mean, scale, np.array([-1.0, 0.0, -0.3]), astro_intercept)
    features = (("wind_gust_ms", "m/s"), ("dew_point_spread_c", "delta_degC"), ("air_temp_rate_c_per_h", "degC/h"))
    return SiteModel(features, {"scan": scan, "astronomical": astro}, {"note": "hand-made for a test"})


def bundled_doc() -> dict:
    return json.loads(BUNDLED.read_text(encoding="utf-8"))


# --- inference ------------------------------------------------------------------------------


def test_numpy_inference_equals_the_fitted_model():
    """The exported JSON, read back and applied with numpy, reproduces the fit's own odds to 1e-9."""
    from advisor.io.site import load_site
    from advisor.model.training import history_features, read_history, train

    site = load_site(None)
    history = read_history(ROOT / "example_weather" / "larch_basin_history.csv")
    features = history_features(history, site).features
    result = train(history, features)
    model = parse_model(dumps_model(result.model), "round-trip")
    rng = np.random.default_rng(3)
    probe = pd.DataFrame(
        {
            "wind_gust_ms": rng.uniform(0, 20, 500),
            "dew_point_spread_c": rng.uniform(-0.5, 15, 500),
            "air_temp_rate_c_per_h": rng.uniform(-4, 4, 500),
        }
    )
    for frame in (features[features["data_ok"]], probe):
        for method, fit in result.fits.items():
            expected = fit.predict_terms(term_matrix(frame, fit.terms))
            got = model.methods[method].predict(frame)
            np.testing.assert_allclose(got, expected, rtol=0, atol=1e-9)


def test_unbounded_fit_is_scikit_learns_logistic_regression():
    """With every term free, the fit minimises scikit-learn's L2 objective: the same coefficients
    as ``StandardScaler`` + ``LogisticRegression(C=10)`` (the reference implementation) to 1e-6."""
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    from advisor.io.site import load_site
    from advisor.model.logistic import fit_logistic
    from advisor.model.training import DEFAULT_TERMS, history_features, read_history

    site = load_site(None)
    history = read_history(ROOT / "example_weather" / "larch_basin_history.csv")
    features = history_features(history, site).features
    for method in ("scan", "astronomical"):
        rows = (history.frame["method"] == method).to_numpy()
        X = term_matrix(features[rows], DEFAULT_TERMS[method])
        y = history.frame["usable"].to_numpy()[rows].astype(int)
        ours = fit_logistic(X, y, 10.0)
        pipe = make_pipeline(StandardScaler(), LogisticRegression(C=10.0, tol=1e-12, max_iter=100_000)).fit(X, y)
        reference = pipe.named_steps["logisticregression"]
        np.testing.assert_allclose(ours.coef, reference.coef_[0], rtol=0, atol=1e-6)
        assert ours.intercept == pytest.approx(reference.intercept_[0], abs=1e-6)
        np.testing.assert_allclose(ours.predict(X), pipe.predict_proba(X)[:, 1], rtol=0, atol=1e-7)


def test_prediction_follows_the_logistic_formula():
    """p = 1/(1 + exp(-(b + Σ w (t - m)/s))) with t the terms (definition of the model)."""
    model = hand_model()
    frame = pd.DataFrame(
        {"wind_gust_ms": [2.0, 7.8], "dew_point_spread_c": [5.0, 0.4], "air_temp_rate_c_per_h": [-0.8, 1.5]}
    )
    t = np.array([[4.0, 0.0, 0.8], [7.8**2, 2.6, 1.5]])
    logit = 2.0 + ((t - [16.0, 0.5, 0.6]) / [30.0, 1.0, 0.5] * [-1.8, -0.9, 0.1]).sum(axis=1)
    np.testing.assert_allclose(model.methods["scan"].predict(frame), 1 / (1 + np.exp(-logit)), rtol=1e-12)


def test_plain_coefficients_give_the_same_log_odds():
    m = hand_model().methods["scan"]
    b, w = m.plain_coefficients()
    t = np.array([[49.0, 1.2, 0.3]])
    np.testing.assert_allclose(b + t @ w, m.intercept + m.contributions(t).sum(axis=1), rtol=1e-12)


def test_missing_input_gives_no_odds_not_a_guess():
    frame = pd.DataFrame({"wind_gust_ms": [3.0], "dew_point_spread_c": [4.0], "air_temp_rate_c_per_h": [np.nan]})
    odds = hand_model().odds(frame)
    assert np.isnan(odds["scan"][0])
    assert "no odds (air_temp_rate_c_per_h not available)" in odds.notes["scan"][0]


def test_json_round_trip_is_exact():
    model = hand_model()
    again = parse_model(dumps_model(model))
    assert model_to_dict(again) == model_to_dict(model)


# --- reasons --------------------------------------------------------------------------------


def _evaluate(model, **weather):
    table = weather_table(**weather)
    feed = canonical_frame(table, FeedLayout(max_feed_age_min=15))
    from advisor.features import CATALOGUE
    from advisor.io.site import load_site
    from advisor.rules.loader import default_rule_files, load_rules

    rules = load_rules([(p, "default") for p in default_rule_files()], CATALOGUE)
    site = load_site(None)
    registry = registry_at(NIGHT_UTC - pd.Timedelta(hours=2), table["air_temp_c"].iloc[-1] + 0.8)
    decisions = evaluate(
        feed.frame, pd.DatetimeIndex([NIGHT_UTC]), site, registry, rules, 86.0, model.odds if model else None
    )
    return decisions, explain(decisions, 0)


def test_reason_names_the_feature_that_pushed_the_odds_most_in_words_with_numbers():
    """Gusts of 7.8 m/s: the gust² term adds w (7.8² - m)/s = -1.8 (60.84 - 16)/30 = -2.69 log-odds."""
    decisions, call = _evaluate(hand_model(), wind_mean_ms=3.0, wind_gust_ms=7.8)
    notes = [r.message for r in call.reasons if r.rule == "model.scan" and r.effect == "info"]
    assert len(notes) == 1
    assert notes[0].startswith("laser scan: gusts 7.8 m/s lowered the site model's odds most (-2.7 log-odds")
    assert call.candidates["scan"]["p_usable"] is not None


def test_low_odds_make_the_method_infeasible_with_a_reason():
    """Below thresholds.min_p_usable the method is not recommended (docs/design.md)."""
    decisions, call = _evaluate(hand_model(scan_intercept=-3.0))
    assert call.candidates["scan"]["p_usable"] < 0.5
    assert call.candidates["scan"]["feasible"] is False
    assert call.verdict != "scan"
    assert any(r.rule == "model.scan" and r.effect == "block" for r in call.reasons)


def test_calm_night_keeps_the_scan_with_good_odds():
    decisions, call = _evaluate(hand_model())
    assert call.verdict == "scan"
    assert call.candidates["scan"]["p_usable"] > 0.5
    assert any(r.rule == "model.scan" and "raised the site model's odds most" in r.message for r in call.reasons)


def test_notes_are_lazy_and_index_like_a_list():
    frame = pd.DataFrame(
        {
            "wind_gust_ms": [1.0, 9.0, 4.0],
            "dew_point_spread_c": [6.0, 6.0, 6.0],
            "air_temp_rate_c_per_h": [0.6, 0.6, 0.6],
        }
    )
    notes = hand_model().odds(frame).notes["scan"]
    assert len(notes) == 3
    assert notes[1] == notes[-2] == notes[1:2][0]
    assert "gusts 9.0 m/s lowered" in notes[1] and "gusts 1.0 m/s raised" in notes[0]


# --- strict reading -------------------------------------------------------------------------


def test_bundled_model_reads_and_lists_features_with_units():
    model = load_model(BUNDLED)
    assert set(model.methods) == {"scan", "astronomical"}
    assert dict(model.features) == {
        "wind_gust_ms": "m/s",
        "dew_point_spread_c": "delta_degC",
        "air_temp_rate_c_per_h": "degC/h",
    }
    for key in ("history", "libraries", "rows_used"):
        assert key in model.training


def _mutate(doc: dict, path: str, value):
    node = doc
    keys = path.split(".")
    for key in keys[:-1]:
        node = node[int(key)] if isinstance(node, list) else node[key]
    last = keys[-1]
    if value is _DELETE:
        del node[last]
    elif isinstance(node, list):
        node[int(last)] = value
    else:
        node[last] = value
    return doc


_DELETE = object()

BAD_DOCS = [
    ("schema_version", 3, "schema version 3 is not supported"),
    ("schema_version", "1", "expected an integer"),
    ("format", "something-else", "not an advisor site model"),
    ("features.0.name", "wind_gusts_ms", "unknown feature 'wind_gusts_ms'"),
    ("features.0.unit", "kn", "is in 'kn' in the model but in 'm/s'"),
    ("methods.astronomical.logistic.coef", [-1.0, -2.0], "expected 3 numbers (one per term), got 2"),
    ("methods.scan.logistic.intercept", True, "expected a finite number"),
    ("methods.scan.logistic.intercept", "2.5", "expected a finite number"),
    ("methods.astronomical.scaler.scale", [1.0, 0.0, 1.0], "every scale must be positive"),
    ("methods.scan.terms.0.transform", "exp", "unknown transform 'exp'"),
    ("methods.scan.terms.0.name", "gust_sq", "does not match its definition"),
    ("methods.scan.terms.0.unit", "m/s", "does not match '(m/s)^2'"),
    ("methods.scan.terms.1.knot", _DELETE, "a shortfall term needs a 'knot'"),
    ("methods.scan.terms.0.feature", "air_temp_c", "not in the model's feature list"),
    ("methods.scan.pickle", "x", "unknown key 'pickle'"),
    ("methods.scan.terms.0.direction", "down", "unknown direction 'down'"),
    ("methods.scan.terms.0.direction", _DELETE, "missing key 'direction'"),
    ("methods.scan.logistic.coef.0", 0.5, "contradicts its declared direction (lowers)"),
    ("methods.scan.feature_range", _DELETE, "missing key 'feature_range'"),
    ("methods.scan.feature_range.min", [0.0], "expected a list of 2 numbers or nulls"),
    ("methods.scan.feature_range.max.0", -5.0, "a minimum is above its maximum"),
    ("methods.holography", {}, "unknown method"),
    ("features", [], "expected a non-empty list"),
    ("methods", {}, "expected an object with 'scan' and/or 'astronomical'"),
]


@pytest.mark.parametrize("path, value, message", BAD_DOCS, ids=[f"{p}={v!r}"[:40] for p, v, _ in BAD_DOCS])
def test_mismatched_model_is_a_clear_error(tmp_path, path, value, message):
    bad = tmp_path / "model.json"
    bad.write_text(json.dumps(_mutate(bundled_doc(), path, value)), encoding="utf-8")
    with pytest.raises(ModelError) as info:
        load_model(bad)
    assert message in info.value.one_line()
    assert info.value.one_line().startswith(str(bad))


def test_truncated_file_says_so_with_line(tmp_path):
    text = BUNDLED.read_text(encoding="utf-8")
    bad = tmp_path / "model.json"
    bad.write_text(text[: len(text) // 2], encoding="utf-8")
    with pytest.raises(ModelError, match="truncated JSON") as info:
        load_model(bad)
    assert info.value.line is not None


@pytest.mark.parametrize(
    "content, message",
    [
        ("", "model file is empty"),
        ('{"format": NaN}', "non-finite number NaN"),
        ('{"a": 1, "a": 2}', "duplicate key 'a'"),
        ("[1, 2, 3]", "expected a JSON object at the top"),
        ("not json at all", "invalid JSON"),
    ],
)
def test_garbage_is_a_clear_error(tmp_path, content, message):
    bad = tmp_path / "model.json"
    bad.write_text(content, encoding="utf-8")
    with pytest.raises(ModelError, match=message):
        load_model(bad)


def test_non_finite_numbers_in_a_valid_shape_are_refused(tmp_path):
    text = BUNDLED.read_text(encoding="utf-8")
    doc = bundled_doc()
    first = repr(doc["methods"]["scan"]["logistic"]["intercept"])
    bad = tmp_path / "model.json"
    bad.write_text(text.replace(first, "Infinity", 1), encoding="utf-8")
    with pytest.raises(ModelError, match="non-finite number Infinity"):
        load_model(bad)


def test_pickle_bytes_are_never_unpickled(tmp_path):
    import pickle

    bad = tmp_path / "model.json"
    bad.write_bytes(pickle.dumps({"format": "advisor-site-model"}))
    with pytest.raises(ModelError):
        load_model(bad)


def test_huge_file_is_refused_before_reading(tmp_path):
    bad = tmp_path / "model.json"
    bad.write_text(BUNDLED.read_text(encoding="utf-8") + " " * MAX_MODEL_BYTES, encoding="utf-8")
    with pytest.raises(ModelError, match="above the 1,000,000-byte limit"):
        load_model(bad)


def test_missing_file_and_directory(tmp_path):
    with pytest.raises(ModelError, match="model file not found"):
        load_model(tmp_path / "nope.json")
    with pytest.raises(ModelError, match="is a directory"):
        load_model(tmp_path)
