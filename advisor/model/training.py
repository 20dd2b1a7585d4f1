"""Training the site model on the site's own history of attempts (scikit-learn; never on the check path).

    history = read_history(path)                                # validated past attempts
    features = history_features(history, site, feed=None)      # the same feature code as check
    result = train(history, features)                           # per method: fit, cross-validate, export

A history row is one past attempt: ``time`` (ISO 8601 with offset or ``Z``), ``method``
(``scan`` or ``astronomical``) and its outcome: ``usable`` (yes/no) and/or the measured residual
``residual_rms_um``, judged against the row's ``usable_max_rms_um`` or the ``usable_below_um``
argument when ``usable`` is blank (the same columns ``advisor replay --history`` reads).  Features come
either from a weather archive at each attempt's time, or from weather columns in the history
itself: the canonical feed columns as recorded at the attempt (``wind_mean_ms`` and
``wind_gust_ms`` as the 10-minute mean and maximum, ``air_temp_c``, ``rel_humidity_pct``, ...)
plus ``air_temp_rate_c_per_h``; dew point, fog, sun and the rest are then derived by
:func:`advisor.features.compute_features` exactly as for ``check``.

Per method the model is ``StandardScaler`` + ``LogisticRegression`` (L2, lbfgs) on a few
physically motivated terms (:data:`DEFAULT_TERMS`), scored by stratified k-fold
cross-validation (ROC AUC, Brier score, a reliability table) and exported to plain JSON by
:mod:`advisor.model.inference`.  Too little data (fewer than :data:`MIN_ATTEMPTS` attempts, or fewer than
:data:`MIN_PER_CLASS` of either outcome) is refused rather than fitted.
"""

from __future__ import annotations

import platform
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import sklearn
from sklearn.base import clone
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import brier_score_loss, roc_auc_score
from sklearn.model_selection import StratifiedKFold, cross_val_predict
from sklearn.pipeline import Pipeline
from sklearn.preprocessing import StandardScaler

from advisor import __version__
from advisor.features import CATALOGUE, compute_features
from advisor.io.history import History, HistoryError, read_history, sha256_of  # noqa: F401 (re-exported)
from advisor.io.feed import Feed, canonical_frame
from advisor.model.inference import METHOD_LABELS, MethodModel, SiteModel, Term, term_matrix
from advisor.io.references import Registry
from advisor.io.site import CANONICAL_COLUMNS, REQUIRED_COLUMNS, FeedLayout, Site

MIN_ATTEMPTS = 30
MIN_PER_CLASS = 5
CV_FOLDS = 5
CV_SEED = 0
C_REGULARISATION = 10.0
RELIABILITY_EDGES = (0.0, 0.2, 0.4, 0.6, 0.8, 1.0)
#: Windowed features a history records directly (they cannot be recomputed from one row).
RECORDED_FEATURES = ("wind_mean_ms", "wind_gust_ms", "air_temp_rate_c_per_h")
#: Terms per method.  Wind pressure, hence structural vibration and pointing error, grows
#: as the square of the wind speed (gust²); the laser path suffers as the air nears
#: saturation (how far the dew-point spread falls short of 3 °C); thermal drift of the
#: structure follows the rate of air-temperature change (|dT/dt|).
DEFAULT_TERMS: dict[str, tuple[Term, ...]] = {
    method: (Term("wind_gust_ms", "square"), Term("dew_point_spread_c", "shortfall", 3.0),
             Term("air_temp_rate_c_per_h", "abs"))
    for method in METHOD_LABELS
}

def history_features(history: History, site: Site, feed: Feed | None = None,
                     freq_ghz: float = 86.0) -> pd.DataFrame:
    """Features at each attempt (one row per history row, same order), as ``check`` computes them.

    With ``feed`` (an archive), the features come from its observed rows at each attempt's time.
    Without it, from the history's own weather columns (see the module docstring).
    """
    frame = history.frame
    times = pd.DatetimeIndex(frame["time"])
    if feed is not None:
        observed = feed.frame[feed.frame["kind"] == "observed"]
        return compute_features(observed, times, site, Registry.empty(), freq_ghz)
    needed = (*REQUIRED_COLUMNS, "air_temp_rate_c_per_h")
    missing = [c for c in needed if c not in frame.columns]
    if missing:
        raise HistoryError(f"no weather column {missing[0]!r} and no --feed archive to compute it from",
                           source=history.source, line=1,
                           hint=f"add the columns {', '.join(needed)} or pass --feed ARCHIVE.csv")
    weather = [c for c in CANONICAL_COLUMNS if c in frame.columns]
    table = pd.DataFrame({"time": times.strftime("%Y-%m-%dT%H:%M:%SZ")})
    for name in weather:
        table[name] = frame[name].to_numpy()
    recorded = canonical_frame(table, FeedLayout(max_feed_age_min=site.feed.max_feed_age_min, max_gap_min=1e9),
                               source=history.source)
    features = compute_features(recorded.frame, times, site, Registry.empty(), freq_ghz)
    for name in RECORDED_FEATURES:
        features[name] = frame[name].to_numpy(dtype=float)
    return features


def make_pipeline(c: float = C_REGULARISATION) -> Pipeline:
    """The estimator of one method: standardise the terms, then L2 logistic regression."""
    return Pipeline([("scale", StandardScaler()),
                     ("logistic", LogisticRegression(C=c, tol=1e-10, max_iter=10_000))])


@dataclass(frozen=True)
class MethodFit:
    """One method's fitted pipeline, its inputs and its cross-validated metrics."""

    method: str
    pipeline: Pipeline
    terms: tuple[Term, ...]
    X: np.ndarray
    y: np.ndarray
    cv_p: np.ndarray
    metrics: dict


@dataclass(frozen=True)
class TrainingResult:
    model: SiteModel
    fits: dict[str, MethodFit]
    n_dropped: int


def reliability_table(p: np.ndarray, y: np.ndarray, edges=RELIABILITY_EDGES) -> list[dict]:
    """Predicted against observed frequency of usable results, in bins of predicted probability."""
    idx = np.clip(np.digitize(p, edges[1:-1], right=False), 0, len(edges) - 2)
    rows = []
    for k in range(len(edges) - 1):
        sel = idx == k
        n = int(sel.sum())
        rows.append({"p_from": edges[k], "p_to": edges[k + 1], "attempts": n,
                     "mean_predicted": round(float(p[sel].mean()), 4) if n else None,
                     "observed_usable": round(float(y[sel].mean()), 4) if n else None})
    return rows


def fit_method(method: str, X: np.ndarray, y: np.ndarray, terms: tuple[Term, ...],
               c: float = C_REGULARISATION, source: str = "<history>") -> MethodFit:
    """Fit and cross-validate one method; refuse when the data are too few to fit honestly."""
    label = METHOD_LABELS[method]
    other = next(m for m in METHOD_LABELS if m != method)
    hint = f"collect more history, or train the other method alone with --method {other}"
    n, n_ok = len(y), int(y.sum())
    n_bad = n - n_ok
    if n < MIN_ATTEMPTS:
        raise HistoryError(f"{label}: only {n} attempts to learn from, need at least {MIN_ATTEMPTS} to fit honestly",
                           source=source, hint=hint)
    if min(n_ok, n_bad) < MIN_PER_CLASS:
        which = "usable" if n_ok < n_bad else "unusable"
        raise HistoryError(f"{label}: only {min(n_ok, n_bad)} {which} attempts out of {n}, need at least "
                           f"{MIN_PER_CLASS} of each outcome to fit honestly", source=source, hint=hint)
    pipeline = make_pipeline(c).fit(X, y)
    folds = min(CV_FOLDS, n_ok, n_bad)
    cv = StratifiedKFold(n_splits=folds, shuffle=True, random_state=CV_SEED)
    cv_p = cross_val_predict(clone(pipeline), X, y, cv=cv, method="predict_proba")[:, 1]
    base = n_ok / n
    metrics = {
        "attempts": n, "usable": n_ok, "unusable": n_bad, "usable_fraction": round(base, 4),
        "cv_folds": folds,
        "roc_auc": round(float(roc_auc_score(y, cv_p)), 4),
        "brier": round(float(brier_score_loss(y, cv_p)), 4),
        "brier_base_rate": round(base * (1 - base), 4),
        "reliability": reliability_table(cv_p, y),
    }
    return MethodFit(method, pipeline, terms, X, y, cv_p, metrics)


def method_model(fit: MethodFit) -> MethodModel:
    """The exported (numpy) form of a fitted pipeline."""
    scaler, logistic = fit.pipeline.named_steps["scale"], fit.pipeline.named_steps["logistic"]
    return MethodModel(fit.terms, np.array(scaler.mean_, dtype=float), np.array(scaler.scale_, dtype=float),
                       np.array(logistic.coef_[0], dtype=float), float(logistic.intercept_[0]), fit.metrics)


def train(history: History, features: pd.DataFrame, methods=tuple(METHOD_LABELS),
          terms: dict[str, tuple[Term, ...]] | None = None, c: float = C_REGULARISATION,
          metadata: dict | None = None) -> TrainingResult:
    """Fit every method in ``methods`` and assemble the :class:`~advisor.model.inference.SiteModel`."""
    terms = terms or DEFAULT_TERMS
    frame = history.frame
    usable_rows = np.ones(len(frame), dtype=bool)
    used = sorted({t.feature for m in methods for t in terms[m]}, key=list(CATALOGUE).index)
    for name in used:
        usable_rows &= np.isfinite(features[name].to_numpy(dtype=float))
    usable_rows &= features["data_ok"].to_numpy(dtype=bool)
    fits = {}
    for method in methods:
        rows = usable_rows & (frame["method"].to_numpy() == method)
        X = term_matrix(features[rows], terms[method])
        y = frame["usable"].to_numpy()[rows].astype(int)
        fits[method] = fit_method(method, X, y, terms[method], c, history.source)
    of_methods = frame["method"].isin(list(methods)).to_numpy()
    n_dropped = int((of_methods & ~usable_rows).sum())
    times = frame.loc[of_methods, "time"]
    training = {
        "trained_by": f"advisor {__version__} (advisor train)",
        "history": {"file": Path(history.source).name, "sha256": history.sha256, "rows": int(len(frame)),
                    "first_utc": times.min().strftime("%Y-%m-%dT%H:%M:%SZ"),
                    "last_utc": times.max().strftime("%Y-%m-%dT%H:%M:%SZ")},
        "rows_used": {m: int(f.metrics["attempts"]) for m, f in fits.items()},
        "rows_dropped": n_dropped,
        "estimator": f"StandardScaler + LogisticRegression (L2, C={c:g}, lbfgs), one per method",
        "cross_validation": f"stratified {CV_FOLDS}-fold, shuffled with seed {CV_SEED}; metrics on held-out folds",
        "libraries": {"python": platform.python_version(), "numpy": np.__version__, "pandas": pd.__version__,
                      "scikit-learn": sklearn.__version__},
    }
    training.update(metadata or {})
    model = SiteModel(features=tuple((n, CATALOGUE[n].unit) for n in used),
                      methods={m: method_model(f) for m, f in fits.items()}, training=training)
    return TrainingResult(model, fits, n_dropped)
