"""Training the site model on the site's own history of attempts (never on the check path).

    history = read_history(path)                                   # validated past attempts
    hf = history_features(history, site, feed)                     # the same feature code as check
    result = train(history, hf.features, terms=site_terms(site))   # per method: fit, cross-validate, export

A history row is one past attempt: ``time`` (ISO 8601 with offset or ``Z``), ``method``
(``scan`` or ``astronomical``) and its outcome: ``usable`` (yes/no) and/or the measured residual
``residual_rms_um``, judged against the row's ``usable_max_rms_um`` or the ``usable_below_um``
argument when ``usable`` is blank (the same columns ``advisor replay --history`` reads).  Its
weather is either recorded in the row (:data:`advisor.io.history.WEATHER_COLUMNS`, as ``advisor
attempt add`` writes them) or computed from a feed at its time (:mod:`advisor.model.attempts`).

Per method the model is a standardised logistic regression with an L2 penalty on a few
physically motivated terms (:data:`DEFAULT_TERMS`, or the site's ``model.terms``), each with a
declared direction: a term that can only lower the odds (gusts, the fog deficit, |dT/dt|) gets a
coefficient bounded at zero (:func:`advisor.model.logistic.fit_logistic`).  A term whose bound is
active in the fit is dropped from the exported model, and the reason is reported (usually: the
unconstrained fit would give it the sign physics rules out, which is noise in the record).
Scored by stratified k-fold cross-validation of the whole procedure (ROC AUC, Brier score, a
reliability table; also without the bounds, for comparison) and exported to plain JSON by
:mod:`advisor.model.modelfile`.  Each method keeps the range of every term's feature over its
training rows, so odds outside it are marked extrapolated.  Too little data (fewer than
:data:`MIN_ATTEMPTS` attempts, or fewer than :data:`MIN_PER_CLASS` of either outcome) is refused
rather than fitted.
"""

from __future__ import annotations

import platform
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import sklearn
from sklearn.metrics import brier_score_loss, roc_auc_score
from sklearn.model_selection import StratifiedKFold

from advisor import __version__
from advisor.catalogue import CATALOGUE, unit_text
from advisor.io.history import History, HistoryError, read_history, sha256_of  # noqa: F401 (re-exported)
from advisor.io.site import Site
from advisor.model.attempts import history_features  # noqa: F401 (re-exported)
from advisor.model.inference import METHOD_LABELS, MethodModel, SiteModel, Term, term_matrix
from advisor.model.logistic import LogisticFit, fit_logistic
from advisor.vocabulary import METHODS

MIN_ATTEMPTS = 30
MIN_PER_CLASS = 5
CV_FOLDS = 5
CV_SEED = 0
C_REGULARISATION = 10.0
RELIABILITY_EDGES = (0.0, 0.2, 0.4, 0.6, 0.8, 1.0)
#: Terms per method.  Wind pressure, hence structural vibration and pointing error, grows
#: as the square of the wind speed (gust²); the laser path suffers as the air nears
#: saturation (how far the dew-point spread falls short of 3 °C); thermal drift of the
#: structure follows the rate of air-temperature change (|dT/dt|).  None of them can make a
#: usable surface map likelier, so each is declared ``lowers``.
DEFAULT_TERMS: dict[str, tuple[Term, ...]] = {
    method: (
        Term("wind_gust_ms", "square", None, "lowers"),
        Term("dew_point_spread_c", "shortfall", 3.0, "lowers"),
        Term("air_temp_rate_c_per_h", "abs", None, "lowers"),
    )
    for method in METHODS
}


def site_terms(site: Site) -> dict[str, tuple[Term, ...]]:
    """The terms the site asks for (``model.terms``), per method; :data:`DEFAULT_TERMS` without them."""
    if not site.model_terms:
        return DEFAULT_TERMS
    return {
        m: tuple(Term(t.feature, t.transform, t.knot, t.direction) for t in site.model_terms if m in t.methods)
        for m in METHODS
    }


@dataclass(frozen=True)
class DroppedTerm:
    """A declared term the bounded fit held at zero, and why."""

    term: Term
    unconstrained_per_unit: float  # log-odds per unit of the term without the bound
    reason: str

    def as_dict(self) -> dict:
        return {
            "term": self.term.name,
            "direction": self.term.direction,
            "unconstrained_log_odds_per_unit": round(self.unconstrained_per_unit, 6),
            "reason": self.reason,
        }


@dataclass(frozen=True)
class MethodFit:
    """One method's fit: the exported model, its inputs and its cross-validated metrics."""

    method: str
    model: MethodModel
    terms: tuple[Term, ...]  # the terms kept
    X: np.ndarray  # kept terms at the training rows
    y: np.ndarray
    cv_p: np.ndarray  # held-out odds of the bounded procedure
    metrics: dict
    declared: tuple[Term, ...]  # every term asked for
    unconstrained: LogisticFit  # the same fit without the direction bounds (for comparison)
    dropped: tuple[DroppedTerm, ...]

    def predict_terms(self, X: np.ndarray) -> np.ndarray:
        """p_usable from kept-term values."""
        m = self.model
        with np.errstate(over="ignore"):
            return 1.0 / (1.0 + np.exp(-(m.intercept + ((X - m.mean) / m.scale) @ m.coef)))


@dataclass(frozen=True)
class TrainingResult:
    model: SiteModel
    fits: dict[str, MethodFit]
    n_dropped: int  # attempts left out (no usable weather)


def reliability_table(p: np.ndarray, y: np.ndarray, edges=RELIABILITY_EDGES) -> list[dict]:
    """Predicted against observed frequency of usable results, in bins of predicted probability."""
    idx = np.clip(np.digitize(p, edges[1:-1], right=False), 0, len(edges) - 2)
    rows = []
    for k in range(len(edges) - 1):
        sel = idx == k
        n = int(sel.sum())
        rows.append(
            {
                "p_from": edges[k],
                "p_to": edges[k + 1],
                "attempts": n,
                "mean_predicted": round(float(p[sel].mean()), 4) if n else None,
                "observed_usable": round(float(y[sel].mean()), 4) if n else None,
            }
        )
    return rows


def _cross_validated(X: np.ndarray, y: np.ndarray, c: float, signs, folds: int) -> np.ndarray:
    """Held-out odds of every row: fit on the other folds, predict this one (stratified, seeded)."""
    cv = StratifiedKFold(n_splits=folds, shuffle=True, random_state=CV_SEED)
    p = np.empty(len(y))
    for train_rows, test_rows in cv.split(X, y):
        p[test_rows] = fit_logistic(X[train_rows], y[train_rows], c, signs).predict(X[test_rows])
    return p


def _unit(term: Term) -> str:
    base = unit_text(CATALOGUE[term.feature].unit)
    return f"({base})²" if term.transform == "square" else base


def _drop_reason(term: Term, free_per_unit: float) -> str:
    allowed = "lower" if term.sign < 0 else "raise"
    if term.sign * free_per_unit < 0:
        way = "raise" if free_per_unit > 0 else "lower"
        return (
            f"without the bound the fit gives {free_per_unit:+.3g} log-odds per {_unit(term)}: it would {way} the "
            f"odds, where physics says it can only {allowed} them; the record shows no effect the declared "
            "way, so the term is left out"
        )
    return (
        "held at zero by its bound: with the other terms in the model, the record shows no effect the declared "
        "way, so the term is left out"
    )


def fit_method(
    method: str,
    X: np.ndarray,
    y: np.ndarray,
    terms: tuple[Term, ...],
    feature_values: np.ndarray,
    c: float = C_REGULARISATION,
    source: str = "<history>",
) -> MethodFit:
    """Fit and cross-validate one method; refuse when the data are too few to fit honestly.

    ``X`` holds the declared ``terms`` at the training rows and ``feature_values`` the feature of
    each term there (for the training range).
    """
    label = METHOD_LABELS[method]
    other = next(m for m in METHOD_LABELS if m != method)
    hint = f"collect more history, or train the other method alone with --method {other}"
    n, n_ok = len(y), int(y.sum())
    n_bad = n - n_ok
    if n < MIN_ATTEMPTS:
        raise HistoryError(
            f"{label}: only {n} attempts to learn from, need at least {MIN_ATTEMPTS} to fit honestly",
            source=source,
            hint=hint,
        )
    if min(n_ok, n_bad) < MIN_PER_CLASS:
        which = "usable" if n_ok < n_bad else "unusable"
        raise HistoryError(
            f"{label}: only {min(n_ok, n_bad)} {which} attempts out of {n}, need at least "
            f"{MIN_PER_CLASS} of each outcome to fit honestly",
            source=source,
            hint=hint,
        )
    signs = np.array([t.sign for t in terms])
    free = fit_logistic(X, y, c)
    bounded = fit_logistic(X, y, c, signs)
    dropped = tuple(
        DroppedTerm(t, float(free.per_unit[k]), _drop_reason(t, float(free.per_unit[k])))
        for k, t in enumerate(terms)
        if bounded.at_bound[k]
    )
    keep = ~bounded.at_bound
    if not keep.any():
        raise HistoryError(
            f"{label}: every term was left out: the record shows none of them acting the declared way "
            f"({'; '.join(f'{d.term.describe()}: {d.reason}' for d in dropped)})",
            source=source,
            hint="check the history's outcomes, or the terms and directions under model.terms",
        )
    folds = min(CV_FOLDS, n_ok, n_bad)
    cv_p = _cross_validated(X, y, c, signs, folds)
    cv_free = _cross_validated(X, y, c, None, folds)
    base = n_ok / n
    kept_terms = tuple(t for t, k in zip(terms, keep) if k)
    metrics = {
        "attempts": n,
        "usable": n_ok,
        "unusable": n_bad,
        "usable_fraction": round(base, 4),
        "cv_folds": folds,
        "roc_auc": round(float(roc_auc_score(y, cv_p)), 4),
        "brier": round(float(brier_score_loss(y, cv_p)), 4),
        "brier_base_rate": round(base * (1 - base), 4),
        "roc_auc_unconstrained": round(float(roc_auc_score(y, cv_free)), 4),
        "brier_unconstrained": round(float(brier_score_loss(y, cv_free)), 4),
        "reliability": reliability_table(cv_p, y),
        "dropped_terms": [d.as_dict() for d in dropped],
    }
    lo = np.nanmin(feature_values, axis=0)[keep]
    hi = np.nanmax(feature_values, axis=0)[keep]
    model = MethodModel(
        kept_terms, bounded.mean[keep], bounded.scale[keep], bounded.coef[keep], bounded.intercept, metrics, lo, hi
    )
    return MethodFit(method, model, kept_terms, X[:, keep], y, cv_p, metrics, terms, free, dropped)


def train(
    history: History,
    features: pd.DataFrame,
    methods=tuple(METHOD_LABELS),
    terms: dict[str, tuple[Term, ...]] | None = None,
    c: float = C_REGULARISATION,
    metadata: dict | None = None,
) -> TrainingResult:
    """Fit every method in ``methods`` and assemble the :class:`~advisor.model.inference.SiteModel`."""
    terms = terms or DEFAULT_TERMS
    frame = history.frame
    data_ok = features["data_ok"].to_numpy(dtype=bool)
    fits = {}
    left_out = np.zeros(len(frame), dtype=bool)
    for method in methods:
        declared = terms[method]
        of_method = frame["method"].to_numpy() == method
        ok = data_ok.copy()
        for name in dict.fromkeys(t.feature for t in declared):
            ok &= np.isfinite(features[name].to_numpy(dtype=float))
        left_out |= of_method & ~ok
        rows = of_method & ok
        X = term_matrix(features[rows], declared)
        values = np.column_stack([features[t.feature].to_numpy(dtype=float)[rows] for t in declared])
        y = frame["usable"].to_numpy()[rows].astype(int)
        fits[method] = fit_method(method, X, y, declared, values, c, history.source)
    used = sorted({t.feature for f in fits.values() for t in f.terms}, key=list(CATALOGUE).index)
    of_methods = frame["method"].isin(list(methods)).to_numpy()
    times = frame.loc[of_methods, "time"]
    training = {
        "trained_by": f"advisor {__version__} (advisor train)",
        "history": {
            "file": Path(history.source).name,
            "sha256": history.sha256,
            "rows": int(len(frame)),
            "first_utc": times.min().strftime("%Y-%m-%dT%H:%M:%SZ"),
            "last_utc": times.max().strftime("%Y-%m-%dT%H:%M:%SZ"),
        },
        "rows_used": {m: int(f.metrics["attempts"]) for m, f in fits.items()},
        "rows_dropped": int(left_out.sum()),
        "estimator": (
            f"standardised logistic regression, L2 (C={c:g}), each coefficient bounded by its term's "
            "declared direction (active-set Newton); one per method"
        ),
        "cross_validation": f"stratified {CV_FOLDS}-fold, shuffled with seed {CV_SEED}; metrics on held-out folds",
        "libraries": {
            "python": platform.python_version(),
            "numpy": np.__version__,
            "pandas": pd.__version__,
            "scikit-learn": sklearn.__version__,
        },
    }
    training.update(metadata or {})
    model = SiteModel(
        features=tuple((n, CATALOGUE[n].unit) for n in used),
        methods={m: f.model for m, f in fits.items()},
        training=training,
    )
    return TrainingResult(model, fits, int(left_out.sum()))
