"""Terms that can only lower the odds: the bounded fit, what it leaves out, and extrapolation.

Check values come from the definitions: the fit minimises scikit-learn's L2 logistic objective
under sign bounds, so its optimum is compared with scipy's L-BFGS-B on the same objective (a
reference optimiser) and with the Karush-Kuhn-Tucker conditions (Nocedal & Wright, *Numerical
Optimization*, 2nd ed., Springer 2006, theorem 12.1).  The synthetic attempts here are drawn
from a stated mechanism in the test itself.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from advisor.explain import explain
from advisor.model.inference import MethodModel, SiteModel, Term
from advisor.model.logistic import fit_logistic
from advisor.model.modelfile import dumps_model, parse_model
from advisor.model.training import fit_method

GUST_SQ = Term("wind_gust_ms", "square", None, "lowers")
DRIFT = Term("air_temp_rate_c_per_h", "abs", None, "lowers")


def _noisy_attempts(seed: int = 6, n: int = 120):
    """Failures grow with gust² (log-odds 2.5 - 0.04 gust²); |dT/dt| has no effect at all.

    With seed 6 the sample happens to pair calm temperature with failures, so an unbounded fit
    gives |dT/dt| a positive coefficient: noise, which would read "a fast temperature change
    raised the odds".
    """
    rng = np.random.default_rng(seed)
    gust = rng.uniform(0, 12, n)
    rate = rng.uniform(-2, 2, n)
    y = (rng.random(n) < 1 / (1 + np.exp(-(2.5 - 0.04 * gust**2)))).astype(int)
    return gust, rate, y


def test_noise_that_would_flip_a_coefficient_is_held_at_zero_and_the_term_left_out():
    gust, rate, y = _noisy_attempts()
    X = np.column_stack([gust**2, np.abs(rate)])
    free = fit_logistic(X, y, 10.0)
    assert free.per_unit[1] > 0.2, "precondition: without bounds the noise flips |dT/dt| to raising the odds"
    fit = fit_method("astronomical", X, y, (GUST_SQ, DRIFT), np.column_stack([gust, rate]))
    assert [t.name for t in fit.terms] == ["wind_gust_ms_sq"]
    assert [d.term.name for d in fit.dropped] == ["abs_air_temp_rate_c_per_h"]
    reason = fit.dropped[0].reason
    assert "would raise the odds" in reason and "can only lower them" in reason
    assert fit.dropped[0].unconstrained_per_unit == pytest.approx(free.per_unit[1])
    assert fit.model.coef[0] < 0
    assert fit.metrics["dropped_terms"][0]["term"] == "abs_air_temp_rate_c_per_h"
    assert 0.5 < fit.metrics["roc_auc"] <= 1 and 0.5 < fit.metrics["roc_auc_unconstrained"] <= 1
    # the exported model can never say a fast temperature change raised the odds
    model = parse_model(dumps_model(SiteModel((("wind_gust_ms", "m/s"),), {"astronomical": fit.model})))
    m = model.methods["astronomical"]
    frame = pd.DataFrame({"wind_gust_ms": [3.0, 3.0], "air_temp_rate_c_per_h": [0.0, 4.0]})
    assert m.predict(frame)[0] == m.predict(frame)[1]


def test_a_real_effect_keeps_its_term():
    """The same attempts, but failures also grow with |dT/dt|: the term stays, with its sign."""
    rng = np.random.default_rng(6)
    gust, rate = rng.uniform(0, 12, 400), rng.uniform(-2, 2, 400)
    y = (rng.random(400) < 1 / (1 + np.exp(-(2.5 - 0.04 * gust**2 - 1.2 * np.abs(rate))))).astype(int)
    fit = fit_method(
        "astronomical", np.column_stack([gust**2, np.abs(rate)]), y, (GUST_SQ, DRIFT), np.column_stack([gust, rate])
    )
    assert not fit.dropped and len(fit.terms) == 2
    assert np.all(fit.model.coef < 0)


@pytest.mark.parametrize("seed", range(6))
def test_bounded_fit_is_the_constrained_optimum(seed):
    """Same objective value as scipy's L-BFGS-B with the bounds, and the KKT conditions hold."""
    from scipy.optimize import minimize

    rng = np.random.default_rng(seed)
    n, d = 200, 4
    X = rng.normal(size=(n, d)) @ rng.normal(size=(d, d))  # correlated terms
    y = (rng.random(n) < 1 / (1 + np.exp(-(0.5 + X @ rng.normal(size=d))))).astype(int)
    signs = np.array([-1, 1, 0, -1])
    c = 10.0
    ours = fit_logistic(X, y, c, signs)
    Z = (X - ours.mean) / ours.scale

    def objective(theta):
        z = theta[-1] + Z @ theta[:-1]
        return 0.5 * theta[:-1] @ theta[:-1] + c * np.sum(np.logaddexp(0, np.where(y > 0, -z, z)))

    bounds = [(None, 0) if s < 0 else (0, None) if s > 0 else (None, None) for s in signs] + [(None, None)]
    ref = minimize(
        objective,
        np.zeros(d + 1),
        method="L-BFGS-B",
        bounds=bounds,
        options={"ftol": 1e-15, "gtol": 1e-12, "maxiter": 100_000},
    )
    theta = np.append(ours.coef, ours.intercept)
    assert objective(theta) <= ref.fun + 1e-7
    assert np.all(signs * ours.coef >= 0)
    # KKT: zero gradient on the free coefficients; at a bound, the gradient points out of the allowed side
    p = 1 / (1 + np.exp(-(ours.intercept + Z @ ours.coef)))
    grad = ours.coef + c * Z.T @ (p - y)
    free = ~ours.at_bound
    assert np.all(np.abs(grad[free]) < 1e-6)
    assert np.all(signs[ours.at_bound] * grad[ours.at_bound] >= -1e-6)
    assert abs(c * np.sum(p - y)) < 1e-6


# --- extrapolation ------------------------------------------------------------------------


def _ranged_model() -> SiteModel:
    terms = (GUST_SQ, DRIFT)
    scan = MethodModel(
        terms,
        np.array([16.0, 0.6]),
        np.array([30.0, 0.5]),
        np.array([-1.8, -0.3]),
        2.0,
        {},
        np.array([1.0, -2.5]),
        np.array([18.0, 2.5]),
    )
    astro = MethodModel(
        terms,
        np.array([16.0, 0.6]),
        np.array([30.0, 0.5]),
        np.array([-1.0, -0.6]),
        2.0,
        {},
        np.array([1.0, -1.0]),
        np.array([18.0, 1.0]),
    )
    return SiteModel(
        (("wind_gust_ms", "m/s"), ("air_temp_rate_c_per_h", "degC/h")), {"scan": scan, "astronomical": astro}
    )


def test_odds_outside_the_training_range_are_marked_extrapolated():
    """|dT/dt| = 4 °C/h after training on -2.5..2.5: the term |x| = 4 lies 1.5 °C/h beyond 2.5."""
    frame = pd.DataFrame(
        {"wind_gust_ms": [3.0, 3.0, 0.9, 19.0, np.nan], "air_temp_rate_c_per_h": [0.5, 4.0, 0.5, 0.5, 4.0]}
    )
    odds = _ranged_model().odds(frame)
    # 0.9 m/s: gust² 0.81 against 1.0 trained, 0.006 sd below: within the tolerance; NaN gives no odds
    assert odds.extrapolated["scan"].tolist() == [False, True, False, True, False]
    assert odds.extrapolation["scan"][0] is None
    text = odds.extrapolation["scan"][1]
    assert "temperature change +4.0 °C/h is outside the range it was trained on (-2.5 °C/h .. +2.5 °C/h)" in text
    assert (
        "gusts 19.0 m/s is outside the range it was trained on (1.0 m/s .. 18.0 m/s)" in odds.extrapolation["scan"][3]
    )
    # |x| sees -2.0 °C/h as 2.0: inside the scan model's range, outside the astronomical one's 1.0
    minus = _ranged_model().odds(pd.DataFrame({"wind_gust_ms": [3.0], "air_temp_rate_c_per_h": [-2.0]}))
    assert not minus.extrapolated["scan"][0] and minus.extrapolated["astronomical"][0]


def test_extrapolated_odds_reach_the_reasons_and_json():
    """A sunrise-like 4 °C/h warming: the candidate says extrapolated and a caution says why."""
    from advisor.views.context import Context
    from advisor.views.jsondoc import SCHEMA_VERSION, to_json_dict

    from .conftest import weather_table

    model = _ranged_model()
    table = weather_table(temp_rate_c_per_h=4.0)
    call = _call(table, model)
    assert call.candidates["scan"]["extrapolated"] is True
    warn = [r for r in call.reasons if r.rule == "model.scan" and r.effect == "warn"]
    assert len(warn) == 1 and "extrapolated" in warn[0].message and "+4.0 °C/h" in warn[0].message
    doc = to_json_dict(call, Context("test", "UTC", "test feed", False, {}), 0)
    assert SCHEMA_VERSION >= 3 and doc["candidates"]["scan"]["extrapolated"] is True
    json.dumps(doc, allow_nan=False)
    calm = _call(weather_table(temp_rate_c_per_h=-0.4), model)
    assert calm.candidates["scan"]["extrapolated"] is False
    assert not [r for r in calm.reasons if r.effect == "warn" and r.rule.startswith("model.")]


def _call(table, model):
    from advisor.evaluation.evaluate import evaluate
    from advisor.features import CATALOGUE
    from advisor.io.feed import canonical_frame
    from advisor.io.site import FeedLayout, load_site
    from advisor.rules.loader import default_rule_files, load_rules

    from .conftest import NIGHT_UTC, registry_at

    site = load_site(None)
    rules = load_rules([(p, "default") for p in default_rule_files()], CATALOGUE)
    feed = canonical_frame(table, FeedLayout(max_feed_age_min=15))
    registry = registry_at(NIGHT_UTC - pd.Timedelta(hours=2), table["air_temp_c"].iloc[-1] + 0.8)
    decisions = evaluate(feed.frame, pd.DatetimeIndex([NIGHT_UTC]), site, registry, rules, 86.0, model.odds)
    return explain(decisions, 0)


def test_model_files_of_schema_1_still_read_without_ranges():
    model = _ranged_model()
    doc = json.loads(dumps_model(model))
    doc["schema_version"] = 1
    for body in doc["methods"].values():
        del body["feature_range"]
        for term in body["terms"]:
            del term["direction"]
    old = parse_model(json.dumps(doc))
    assert all(t.direction == "free" for m in old.methods.values() for t in m.terms)
    frame = pd.DataFrame({"wind_gust_ms": [40.0], "air_temp_rate_c_per_h": [9.0]})
    assert not old.odds(frame).extrapolated["scan"][0]
