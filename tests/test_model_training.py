"""Training: the pipeline recovers a known mechanism, refuses thin data, and reads histories strictly.

The check values are the ground-truth coefficients *stated* in example_weather/make_history.py
(``GROUND_TRUTH``), never numbers produced from the invented data.  Tolerances use the
asymptotic standard errors of a logistic-regression fit, the square roots of the diagonal of
the inverse Fisher information (X' W X)^-1 with W = p (1 - p) (standard maximum-likelihood
theory; e.g. Hosmer, Lemeshow & Sturdivant, *Applied Logistic Regression*, 3rd ed., Wiley 2013,
section 2.4 — cited from memory).
"""

from __future__ import annotations

import importlib.util
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from advisor.model.inference import term_matrix
from advisor.model.training import HistoryError, history_features, read_history, train

ROOT = Path(__file__).resolve().parent.parent
HISTORY = ROOT / "example_weather" / "larch_basin_history.csv"
TERM_KEYS = ("wind_gust_ms_sq", "dew_point_spread_c_shortfall_below_3", "abs_air_temp_rate_c_per_h")


def _load_make_history():
    spec = importlib.util.spec_from_file_location(
        "make_history_under_test", ROOT / "example_weather" / "make_history.py"
    )
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module
    spec.loader.exec_module(module)
    return module


mh = _load_make_history()


@pytest.fixture(scope="module")
def weather():
    """The demo generator's year of weather, read by the advisor's feed code (about 5 s)."""
    return mh.year_of_weather()


def _fit(frame: pd.DataFrame, tmp_path: Path, site):
    path = tmp_path / "history.csv"
    frame.to_csv(path, index=False)
    history = read_history(path)
    return train(history, history_features(history, site).features)


def _plain_and_se(fit, method_model):
    """(intercept, per-unit coefficients of the kept terms) and their asymptotic standard errors."""
    b, w = method_model.plain_coefficients()
    X1 = np.column_stack([np.ones(len(fit.X)), fit.X])
    p = fit.predict_terms(fit.X)
    cov = np.linalg.inv(X1.T @ (X1 * (p * (1 - p))[:, None]))
    return np.concatenate([[b], w]), np.sqrt(np.diag(cov))


def _truth(method, fit=None):
    """The stated truth: intercept, then each term (of ``fit``'s kept terms when given)."""
    t = mh.GROUND_TRUTH[method]
    keys = TERM_KEYS if fit is None else tuple(term.name for term in fit.terms)
    return np.array([t["intercept"], *(t[k] for k in keys)])


def _dropped_truths(method, fit):
    """The stated truth of every term the bounded fit left out."""
    return [mh.GROUND_TRUTH[method][d.term.name] for d in fit.dropped]


def test_terms_are_the_ones_the_mechanism_is_stated_in():
    from advisor.model.training import DEFAULT_TERMS

    for terms in DEFAULT_TERMS.values():
        assert tuple(t.name for t in terms) == TERM_KEYS


def test_large_history_recovers_the_ground_truth(weather, tmp_path):
    """4000 invented attempts: every kept coefficient within 3 standard errors of the stated truth,
    non-zero effects with the right sign and within 35 % of their size; a term is left out only
    where the truth has no effect."""
    site, _ = weather
    result = _fit(mh.make_history(seed=11, n_attempts=4000, weather=weather), tmp_path, site)
    for method, fit in result.fits.items():
        assert all(v == 0 for v in _dropped_truths(method, fit)), (method, fit.dropped)
        est, se = _plain_and_se(fit, result.model.methods[method])
        truth = _truth(method, fit)
        assert np.all(np.abs(est - truth) < 3 * se), (method, est, truth, se)
        nonzero = truth != 0
        assert np.all(np.sign(est[nonzero]) == np.sign(truth[nonzero])), (method, est)
        assert np.all(np.abs(est[nonzero] / truth[nonzero] - 1) < 0.35), (method, est, truth)
        assert fit.metrics["roc_auc"] > 0.65


def test_bundled_history_recovers_signs_and_rough_sizes(weather):
    """The committed few-hundred-attempt history: the effects that exist come out with the right
    sign, within a factor of two, every kept coefficient within 3 standard errors of the truth,
    and only terms without an effect are left out."""
    site, _ = weather
    history = read_history(HISTORY)
    result = train(history, history_features(history, site).features)
    for method, fit in result.fits.items():
        assert all(v == 0 for v in _dropped_truths(method, fit)), (method, fit.dropped)
        est, se = _plain_and_se(fit, result.model.methods[method])
        truth = _truth(method, fit)
        assert np.all(np.abs(est - truth) < 3 * se), (method, est, truth, se)
        nonzero = truth != 0
        ratio = est[nonzero] / truth[nonzero]
        assert np.all((ratio > 0.5) & (ratio < 2.0)), (method, est, truth)


def test_bundled_history_is_what_the_script_writes(weather, tmp_path):
    """make_history.py is seeded: it regenerates the committed file byte for byte."""
    out = tmp_path / "history.csv"
    mh.make_history(weather=weather).to_csv(out, index=False, lineterminator="\n", float_format="%.10g")
    assert out.read_bytes() == HISTORY.read_bytes(), "regenerate with: python example_weather/make_history.py"


def test_history_weather_columns_give_the_archive_features(weather):
    """Features from the history's own columns match those the check code computes from the
    archive at the same instants (up to the history's rounding)."""
    from advisor.features import compute_features
    from advisor.io.references import Registry

    site, frame = weather
    history = read_history(HISTORY)
    from_history = history_features(history, site).features
    from_archive = compute_features(frame, pd.DatetimeIndex(history.frame["time"]), site, Registry.empty(), 86.0)
    for name, tol in (
        ("wind_gust_ms", 0.006),
        ("dew_point_spread_c", 0.05),
        ("air_temp_rate_c_per_h", 0.006),
        ("sun_elevation_deg", 1e-9),
        ("rel_humidity_pct", 0.06),
    ):
        np.testing.assert_allclose(from_history[name], from_archive[name], atol=tol, err_msg=name)
    assert (from_history["fog"] == from_archive["fog"]).mean() > 0.98


def test_terms_feed_the_pipeline_in_model_order(weather):
    site, _ = weather
    history = read_history(HISTORY)
    features = history_features(history, site).features
    result = train(history, features, methods=("scan",))
    fit = result.fits["scan"]
    rows = (history.frame["method"] == "scan").to_numpy()
    np.testing.assert_array_equal(fit.X, term_matrix(features[rows], fit.terms))
    assert set(result.model.methods) == {"scan"}


# --- refusing thin data ---------------------------------------------------------------------


def _history_rows(n_scan_ok, n_scan_bad, n_astro_ok=40, n_astro_bad=10):
    rows = []
    t0 = pd.Timestamp("2026-01-05T03:00:00Z")
    k = 0
    for method, ok, count in (
        ("scan", "yes", n_scan_ok),
        ("scan", "no", n_scan_bad),
        ("astronomical", "yes", n_astro_ok),
        ("astronomical", "no", n_astro_bad),
    ):
        for _ in range(count):
            gust = 2.0 + (k % 7) + (2.5 if ok == "no" else 0.0)  # failures come with stronger gusts
            rows.append(
                {
                    "time": (t0 + pd.Timedelta(hours=5 * k)).strftime("%Y-%m-%dT%H:%M:%SZ"),
                    "method": method,
                    "usable": ok,
                    "wind_mean_ms": gust / 1.6,
                    "wind_gust_ms": gust,
                    "air_temp_c": 1.0 + k % 5,
                    "rel_humidity_pct": 60 + 3 * (k % 11),
                    "air_temp_rate_c_per_h": -0.5 + 0.1 * (k % 9),
                }
            )
            k += 1
    return pd.DataFrame(rows)


@pytest.mark.parametrize(
    "n_ok, n_bad, message",
    [
        (20, 9, "laser scan: only 29 attempts to learn from, need at least 30"),
        (40, 4, "laser scan: only 4 unusable attempts out of 44, need at least 5 of each outcome"),
        (4, 40, "laser scan: only 4 usable attempts out of 44"),
    ],
)
def test_too_little_data_is_refused(tmp_path, demo_site, n_ok, n_bad, message):
    path = tmp_path / "history.csv"
    _history_rows(n_ok, n_bad).to_csv(path, index=False)
    history = read_history(path)
    with pytest.raises(HistoryError) as info:
        train(history, history_features(history, demo_site).features)
    assert message in info.value.one_line()
    assert "--method astronomical" in info.value.one_line()


def test_enough_data_of_one_method_trains_that_method_alone(tmp_path, demo_site):
    path = tmp_path / "history.csv"
    _history_rows(20, 9).to_csv(path, index=False)
    history = read_history(path)
    result = train(history, history_features(history, demo_site).features, methods=("astronomical",))
    assert set(result.model.methods) == {"astronomical"}
    assert result.model.training["rows_used"] == {"astronomical": 50}


# --- reading histories ----------------------------------------------------------------------


def _write(tmp_path, text):
    path = tmp_path / "history.csv"
    path.write_text(text, encoding="utf-8")
    return path


@pytest.mark.parametrize(
    "text, message",
    [
        ("time,method,usable\n2026-01-01T03:00:00Z,laser,yes\n", ":2: method: method 'laser' is neither"),
        (
            "time,method,usable\n2026-01-01T03:00:00Z,scan,yes\n2026-01-01T04:00:00,scan,no\n",
            ":3: time: time '2026-01-01T04:00:00' has no UTC offset",
        ),
        ("time,method,usable\n2026-01-01T03:00:00Z,scan,maybe\n", ":2: usable: usable 'maybe' is not yes/no"),
        ("time,method\n2026-01-01T03:00:00Z,scan\n", ":1: no outcome column"),
        ("time,method,residual_rms_um\n2026-01-01T03:00:00Z,scan,150\n", ":2: usable: no 'usable' value and no limit"),
        ("time,method,usable,residual_rms_um\n2026-01-01T03:00:00Z,scan,,\n", ":2: usable: attempt has no outcome"),
        (
            "time,method,usable,wind_gust_ms\n2026-01-01T03:00:00Z,scan,yes,fast\n",
            ":2: wind_gust_ms: wind_gust_ms 'fast' is not a number",
        ),
        ("method,usable\nscan,yes\n", ":1: missing column 'time'"),
        ("", "history file is empty"),
    ],
)
def test_bad_history_is_a_one_line_error_with_its_line(tmp_path, text, message):
    path = _write(tmp_path, text)
    with pytest.raises(HistoryError) as info:
        read_history(path)
    assert message in info.value.one_line()


def test_measured_rms_decides_when_usable_is_blank(tmp_path):
    path = _write(
        tmp_path,
        "time,method,usable,residual_rms_um,usable_max_rms_um\n"
        "2026-01-01T03:00:00Z,scan,,150,200\n2026-01-01T04:00:00Z,scan,,250,200\n"
        "2026-01-01T05:00:00Z,scan,no,150,200\n2026-01-01T06:00:00Z,scan,,250,\n",
    )
    history = read_history(path, usable_below_um=300)
    assert history.frame["usable"].tolist() == [True, False, False, True]


def test_history_without_weather_needs_a_feed(tmp_path, demo_site):
    path = _write(tmp_path, "time,method,usable\n2026-01-01T03:00:00Z,scan,yes\n")
    with pytest.raises(HistoryError, match="no weather column 'wind_mean_ms' and no --feed"):
        history_features(read_history(path), demo_site)
