"""The site model: one small logistic classifier per method, read from plain JSON, applied with numpy.

    model = load_model(path)          # advisor.model.modelfile: strict validation; anything odd is a ModelError
    odds = model.odds(features)        # {"scan": p, "astronomical": p}; odds.notes: method -> per-row text
    odds.extrapolated                  # method -> per-row mask: a term's feature outside its training range

For a method with terms ``t_k`` (each a named feature, squared, made absolute, or its shortfall
below a knot), the probability of a usable surface map is::

    p_usable = 1 / (1 + exp(-(b + sum_k w_k * (t_k - m_k) / s_k)))

with ``m_k, s_k`` the training mean and standard deviation of each term (the scaler) and
``w_k, b`` the fitted logistic coefficients.  Each term declares the way it may push the odds
(``direction``: ``lowers`` means ``w_k <= 0``: more gust can never make a usable map likelier),
and each method keeps the range of every term's feature over the attempts it was trained on:
odds computed outside that range are *extrapolated*, and say so (:attr:`ModelOdds.extrapolated`).
The model file (plain JSON, strictly read) is :mod:`advisor.model.modelfile`.  This module
imports numpy only (the training side, :mod:`advisor.model.training`, is the one that
needs scikit-learn and scipy).
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from advisor.catalogue import CATALOGUE, unit_text
from advisor.vocabulary import METHOD_LABEL, MODEL_DIRECTIONS, MODEL_TRANSFORMS

MAX_TERMS = 32
METHOD_LABELS = METHOD_LABEL
TRANSFORMS = MODEL_TRANSFORMS
DIRECTIONS = tuple(MODEL_DIRECTIONS)

#: Odds are extrapolated when a term lies outside the values it was trained on by more than this
#: fraction of its training standard deviation (closer than that counts as seen: gusts of
#: 0.9 m/s after training down to 1.1 m/s change gust² by a few hundredths of its spread).
EXTRAPOLATION_TOLERANCE_SD = 0.1


def value_text(name: str, value: float) -> str:
    """``7.8 m/s``: a feature's value with its unit, as the screen formats it (never ``-0.0``)."""
    text = CATALOGUE[name].display_format.format(value)
    if re.match(r"-0(\.0*)?(\D|$)", text):  # no "-0.0 °C" for a value that rounds to zero
        text = text[1:]
    return text


def feature_phrase(name: str, value: float) -> str:
    """``gusts 7.8 m/s``: a feature and its value in words."""
    spec = CATALOGUE[name]
    if spec.unit == "flag":
        return name.replace("_", " ") if bool(value) else f"no {name.replace('_', ' ')}"
    return f"{spec.phrase} {value_text(name, value)}".rstrip()


@dataclass(frozen=True)
class Term:
    """One model input computed from a feature [unit of the feature, squared for ``square``].

    ``transform`` is ``identity`` (x), ``square`` (x²), ``abs`` (|x|) or ``shortfall``
    (max(0, knot - x), how far x falls short of ``knot``).  ``direction`` is the way a larger
    term may push the odds of a usable result: ``lowers`` (coefficient <= 0), ``raises`` (>= 0)
    or ``free``.
    """

    feature: str
    transform: str = "identity"
    knot: float | None = None
    direction: str = "free"

    @property
    def sign(self) -> int:
        """-1 for ``lowers``, +1 for ``raises``, 0 for ``free``."""
        return {"lowers": -1, "raises": 1}.get(self.direction, 0)

    @property
    def name(self) -> str:
        if self.transform == "square":
            return f"{self.feature}_sq"
        if self.transform == "abs":
            return f"abs_{self.feature}"
        if self.transform == "shortfall":
            return f"{self.feature}_shortfall_below_{self.knot:g}"
        return self.feature

    @property
    def unit(self) -> str:
        base = CATALOGUE[self.feature].unit
        return f"({base})^2" if self.transform == "square" else base

    def describe(self) -> str:
        """The term in words: ``gusts squared``, ``dew-point spread short of 3 °C``."""
        words = CATALOGUE[self.feature].phrase if self.feature in CATALOGUE else self.feature.replace("_", " ")
        if self.transform == "square":
            return f"{words} squared"
        if self.transform == "abs":
            return f"|{words}|"
        if self.transform == "shortfall":
            return f"{words} short of {self.knot:g} {unit_text(CATALOGUE[self.feature].unit)}".rstrip()
        return words

    def value_range(self, lo: np.ndarray, hi: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(lowest, highest) value of the term while its feature stays within [lo, hi]."""
        lo, hi = np.asarray(lo, dtype=float), np.asarray(hi, dtype=float)
        a, b = self.values(lo), self.values(hi)
        low, high = np.minimum(a, b), np.maximum(a, b)
        if self.transform in ("square", "abs"):  # the minimum is at zero when the range spans it
            low = np.where((lo < 0) & (hi > 0), 0.0, low)
        return low, high

    def values(self, x: np.ndarray) -> np.ndarray:
        """The term from feature values ``x`` (NaN stays NaN)."""
        x = np.asarray(x, dtype=float)
        if self.transform == "square":
            return x * x
        if self.transform == "abs":
            return np.abs(x)
        if self.transform == "shortfall":
            return np.where(np.isnan(x), np.nan, np.maximum(0.0, self.knot - x))
        return x


def term_matrix(features: pd.DataFrame, terms: Sequence[Term]) -> np.ndarray:
    """Terms of every row of ``features`` as an (n_rows, n_terms) float array."""
    if not terms:
        return np.zeros((len(features), 0))
    return np.column_stack([t.values(features[t.feature].to_numpy(dtype=float)) for t in terms])


@dataclass(frozen=True)
class MethodModel:
    """The standardised logistic model of one method.

    ``feature_min``/``feature_max`` [unit of each term's feature] bound the values of every
    term's feature over the attempts the model was trained on (None: not recorded).
    """

    terms: tuple[Term, ...]
    mean: np.ndarray
    scale: np.ndarray
    coef: np.ndarray
    intercept: float
    metrics: dict = field(default_factory=dict, compare=False)
    feature_min: np.ndarray | None = field(default=None, compare=False)
    feature_max: np.ndarray | None = field(default=None, compare=False)

    def outside(self, features: pd.DataFrame, terms: np.ndarray | None = None) -> np.ndarray:
        """(n_rows, n_terms) mask: the term lies outside the values it was trained on (NaN is not outside).

        A term's trained values are those its transform takes over the feature's training range;
        a margin of :data:`EXTRAPOLATION_TOLERANCE_SD` of the term's training sd counts as inside.
        ``terms``: :func:`term_matrix` of ``features``, when the caller has it already.
        """
        n = len(features)
        if self.feature_min is None or self.feature_max is None:
            return np.zeros((n, len(self.terms)), dtype=bool)
        t = term_matrix(features, self.terms) if terms is None else terms
        low = np.empty(len(self.terms))
        high = np.empty(len(self.terms))
        for k, term in enumerate(self.terms):
            low[k], high[k] = term.value_range(self.feature_min[k], self.feature_max[k])
        margin = EXTRAPOLATION_TOLERANCE_SD * self.scale
        with np.errstate(invalid="ignore"):
            return (t < low - margin) | (t > high + margin)

    def contributions(self, terms: np.ndarray) -> np.ndarray:
        """Log-odds each term adds against a past attempt at the training means [log-odds]."""
        return (terms - self.mean) / self.scale * self.coef

    def predict(self, features: pd.DataFrame) -> np.ndarray:
        """``p_usable`` per row; NaN where an input feature is missing or the arithmetic overflows.

        A log-odds that is not a finite number (an overflow to ±inf, or inf - inf) gives NaN,
        never a confident 0 or 1: the call then rests on the rules (see :class:`OddsNotes`).
        """
        with np.errstate(all="ignore"):
            return self._p_usable(self.contributions(term_matrix(features, self.terms)))

    def _p_usable(self, contributions: np.ndarray) -> np.ndarray:
        """:meth:`predict` from :meth:`contributions` of the terms (call under ``np.errstate(all="ignore")``)."""
        logit = self.intercept + contributions.sum(axis=1)
        return np.where(np.isfinite(logit), 1.0 / (1.0 + np.exp(-logit)), np.nan)

    def plain_coefficients(self) -> tuple[float, np.ndarray]:
        """(intercept at all terms zero, log-odds per unit of each term) — the model in plain units."""
        with np.errstate(all="ignore"):  # a model that overflows shows inf / nan here, said as such
            per_unit = self.coef / self.scale
            return float(self.intercept - np.sum(per_unit * self.mean)), per_unit


class ModelOdds(dict):
    """``method → p_usable`` array, with ``notes``: method → per-row explanation text,
    ``extrapolated``: method → per-row mask (odds outside the training range of a term), and
    ``extrapolation``: method → per-row sentence saying which value lies outside (None inside)."""

    def __init__(self, odds: dict, notes: dict, extrapolated: dict | None = None, extrapolation: dict | None = None):
        super().__init__(odds)
        self.notes = notes
        self.extrapolated = extrapolated or {}
        self.extrapolation = extrapolation or {}


class ExtrapolationNotes(Sequence):
    """Per row: None inside the training range, else a sentence naming the value outside it.

    ``values``: the (n_rows, n_terms) feature value of each term, or a function giving it (called
    only when a sentence is written); ``any``: ``outside.any(axis=1)`` when the caller has it.
    """

    def __init__(self, method: str, model: MethodModel, values, outside: np.ndarray, any_outside=None):
        self.method, self.model, self._values, self.outside = method, model, values, outside
        self.any: np.ndarray = np.asarray(outside.any(axis=1) if any_outside is None else any_outside, dtype=bool)

    @property
    def values(self) -> np.ndarray:
        if callable(self._values):
            self._values = self._values()
        return self._values

    def __len__(self) -> int:
        return len(self.any)

    def __getitem__(self, i):
        if isinstance(i, slice):
            return [self[k] for k in range(*i.indices(len(self)))]
        if i < 0:
            i += len(self)
        if not 0 <= i < len(self):
            raise IndexError(i)
        if not self.any[i]:
            return None
        parts, seen = [], set()
        for k in np.flatnonzero(self.outside[i]):
            feature = self.model.terms[k].feature
            if feature in seen:
                continue
            seen.add(feature)
            lo, hi = self.model.feature_min[k], self.model.feature_max[k]
            parts.append(
                f"{feature_phrase(feature, self.values[i, k])} is outside the range it was trained on "
                f"({value_text(feature, lo)} .. {value_text(feature, hi)})"
            )
        return (
            f"{METHOD_LABELS[self.method]}: the site model's odds are extrapolated: "
            + "; ".join(parts)
            + ". Nothing like this is in the site's record: treat the odds with caution."
        )


class OddsNotes(Sequence):
    """Per-row sentences naming the features that pushed the odds most, formatted on demand.

    The numbers are computed for all rows at once, when the first sentence is read (a replay
    that prints none computes none); only the rows that are read become text, so a year of
    minutes costs no Python loop.  ``values`` and ``pushes`` are (n, n_features) arrays, or
    ``parts`` a function giving both.
    """

    def __init__(
        self,
        method: str,
        p: np.ndarray,
        features: list[str],
        values: np.ndarray | None = None,
        pushes: np.ndarray | None = None,
        parts=None,
    ):
        self.method, self.p, self.feature_names = method, p, features
        self._parts = parts if parts is not None else (lambda: (np.asarray(values), np.asarray(pushes)))
        self._ready = False

    def _prepare(self) -> None:
        if self._ready:
            return
        parts: tuple[np.ndarray, np.ndarray] = self._parts()
        self.values, self.pushes = parts  # (n, n_features) each
        # No odds although every input is there: the model's arithmetic overflowed.
        self.failed = ~np.isfinite(self.p) & np.isfinite(self.values).all(axis=1)
        with np.errstate(all="ignore"):
            self.order = np.argsort(-np.abs(np.nan_to_num(self.pushes)), axis=1, kind="stable")
        self._ready = True

    def __len__(self) -> int:
        return len(self.p)

    def __getitem__(self, i):
        if isinstance(i, slice):
            return [self._text(k) for k in range(*i.indices(len(self)))]
        if i < 0:
            i += len(self)
        if not 0 <= i < len(self):
            raise IndexError(i)
        return self._text(i)

    def _text(self, i: int) -> str:
        self._prepare()
        label = METHOD_LABELS[self.method]
        if self.failed[i]:
            return (
                f"{label}: the site model's arithmetic failed (overflow) for these inputs: rules only "
                "(the call rests on the rules and the error budget)."
            )
        if not np.isfinite(self.p[i]):
            missing = [
                self.feature_names[k] for k in range(len(self.feature_names)) if not np.isfinite(self.values[i, k])
            ]
            return (
                f"{label}: site model gives no odds ({', '.join(missing) or 'inputs'} not available); "
                "the call rests on rules and the error budget."
            )
        first, *rest = self.order[i]
        push = self.pushes[i, first]
        if abs(push) < 0.05:
            return (
                f"{label}: site model odds {self.p[i]:.0%}, as for the average past attempt "
                "(no condition pushed them noticeably)."
            )
        verb = "raised" if push > 0 else "lowered"
        text = (
            f"{label}: {feature_phrase(self.feature_names[first], self.values[i, first])} {verb} the site "
            f"model's odds most ({push:+.1f} log-odds vs. the average past attempt)"
        )
        if rest and abs(self.pushes[i, rest[0]]) >= 0.2:
            k = rest[0]
            text += f", then {feature_phrase(self.feature_names[k], self.values[i, k])} ({self.pushes[i, k]:+.1f})"
        return text + "."


@dataclass(frozen=True)
class SiteModel:
    """A validated site model: the features it reads, one :class:`MethodModel` per method."""

    features: tuple[tuple[str, str], ...]
    methods: dict[str, MethodModel]
    training: dict = field(default_factory=dict, compare=False)
    source: str = "<model>"

    def odds(self, features: pd.DataFrame) -> ModelOdds:
        """The seam of :func:`advisor.evaluation.evaluate.evaluate`: ``p_usable``, notes and
        extrapolation per method."""
        odds, notes, extrapolated, extrapolation = {}, {}, {}, {}
        for method, m in self.methods.items():
            # The terms once for the odds and the range test; numpy warns of an overflow in them
            # where the range test is made (as it always has), never for the odds alone.
            ranged = m.feature_min is not None and m.feature_max is not None
            with np.errstate() if ranged else np.errstate(all="ignore"):
                terms = term_matrix(features, m.terms)
            with np.errstate(all="ignore"):  # an overflow shows as p = NaN, said in the notes
                contrib = m.contributions(terms)
                p = m._p_usable(contrib)
            names = list(dict.fromkeys(t.feature for t in m.terms))
            outside = m.outside(features, terms) & np.isfinite(p)[:, None]
            # the feature columns now (views, no copy), stacked only when a note is written
            columns = {f: features[f].to_numpy(dtype=float) for f in names}
            odds[method] = p
            notes[method] = OddsNotes(method, p, names, parts=_note_parts(m, names, columns, contrib))
            extrapolated[method] = outside.any(axis=1)
            extrapolation[method] = ExtrapolationNotes(
                method,
                m,
                lambda m=m, columns=columns: np.column_stack([columns[t.feature] for t in m.terms]),
                outside,
                extrapolated[method],
            )
        return ModelOdds(odds, notes, extrapolated, extrapolation)


def _note_parts(m: MethodModel, names: list[str], columns: dict[str, np.ndarray], contrib: np.ndarray):
    """The (values, pushes) of :class:`OddsNotes`, computed when the first note is read."""

    def parts() -> tuple[np.ndarray, np.ndarray]:
        with np.errstate(all="ignore"):
            pushes = np.column_stack(
                [contrib[:, np.array([t.feature == f for t in m.terms])].sum(axis=1) for f in names]
            )
        return np.column_stack([columns[f] for f in names]), pushes

    return parts


#: Names of the model file's reader and writer (:mod:`advisor.model.modelfile`), still importable
#: from here for callers written before the file format had its own module.
_MODEL_FILE_NAMES = (
    "FORMAT",
    "SCHEMA_VERSION",
    "READABLE_VERSIONS",
    "MAX_MODEL_BYTES",
    "RETRAIN_HINT",
    "load_model",
    "parse_model",
    "dumps_model",
    "model_to_dict",
)


def __getattr__(name: str):
    if name in _MODEL_FILE_NAMES:
        from advisor.model import modelfile

        return getattr(modelfile, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
