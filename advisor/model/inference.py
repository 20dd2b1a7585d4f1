"""The site model: one small logistic classifier per method, read from plain JSON, applied with numpy.

    model = load_model(path)          # strict validation; anything odd is a ModelError
    odds = model.odds(features)        # {"scan": p, "astronomical": p}; odds.notes: method -> per-row text
    text = dumps_model(model)          # the JSON document `advisor train` writes

For a method with terms ``t_k`` (each a named feature, squared, made absolute, or its shortfall
below a knot), the probability of a usable surface map is::

    p_usable = 1 / (1 + exp(-(b + sum_k w_k * (t_k - m_k) / s_k)))

with ``m_k, s_k`` the training mean and standard deviation of each term (the scaler) and
``w_k, b`` the fitted logistic coefficients.  A model file holds only names and numbers: it is
never unpickled, and nothing in it is executed.  This module imports numpy only (the training
side, :mod:`advisor.model.training`, is the one that needs scikit-learn).
"""

from __future__ import annotations

import json
import math
import re
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from advisor.catalogue import CATALOGUE, unit_text
from advisor.errors import ModelError
from advisor.io.fileio import FileKind, decode_text, read_bytes_bounded, sniff_encoding_problem, stat_regular
from advisor.vocabulary import METHOD_LABEL

FORMAT = "advisor-site-model"
SCHEMA_VERSION = 1
MAX_MODEL_BYTES = 1_000_000
MAX_TERMS = 32
METHOD_LABELS = METHOD_LABEL
TRANSFORMS = ("identity", "square", "abs", "shortfall")
RETRAIN_HINT = "retrain it with 'advisor train --history HISTORY.csv --out MODEL.json'"

#: How a feature reads in a sentence: (words, format of its value with unit).


def feature_phrase(name: str, value: float) -> str:
    """``gusts 7.8 m/s``: a feature and its value in words."""
    spec = CATALOGUE[name]
    if spec.unit == "flag":
        return name.replace("_", " ") if bool(value) else f"no {name.replace('_', ' ')}"
    words, fmt = spec.phrase, spec.display_format
    text = fmt.format(value)
    if re.match(r"-0(\.0*)?(\D|$)", text):   # no "-0.0 °C" for a value that rounds to zero
        text = text[1:]
    return f"{words} {text}".rstrip()


@dataclass(frozen=True)
class Term:
    """One model input computed from a feature [unit of the feature, squared for ``square``].

    ``transform`` is ``identity`` (x), ``square`` (x²), ``abs`` (|x|) or ``shortfall``
    (max(0, knot - x), how far x falls short of ``knot``).
    """

    feature: str
    transform: str = "identity"
    knot: float | None = None

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
    """The standardised logistic model of one method."""

    terms: tuple[Term, ...]
    mean: np.ndarray
    scale: np.ndarray
    coef: np.ndarray
    intercept: float
    metrics: dict = field(default_factory=dict, compare=False)

    def contributions(self, terms: np.ndarray) -> np.ndarray:
        """Log-odds each term adds against a past attempt at the training means [log-odds]."""
        return (terms - self.mean) / self.scale * self.coef

    def predict(self, features: pd.DataFrame) -> np.ndarray:
        """``p_usable`` per row; NaN where an input feature is missing or the arithmetic overflows.

        A log-odds that is not a finite number (an overflow to ±inf, or inf - inf) gives NaN,
        never a confident 0 or 1: the call then rests on the rules (see :class:`OddsNotes`).
        """
        with np.errstate(all="ignore"):
            logit = self.intercept + self.contributions(term_matrix(features, self.terms)).sum(axis=1)
            return np.where(np.isfinite(logit), 1.0 / (1.0 + np.exp(-logit)), np.nan)

    def plain_coefficients(self) -> tuple[float, np.ndarray]:
        """(intercept at all terms zero, log-odds per unit of each term) — the model in plain units."""
        with np.errstate(all="ignore"):  # a model that overflows shows inf / nan here, said as such
            per_unit = self.coef / self.scale
            return float(self.intercept - np.sum(per_unit * self.mean)), per_unit


class ModelOdds(dict):
    """``method → p_usable`` array, with ``notes``: method → per-row explanation text."""

    def __init__(self, odds: dict, notes: dict):
        super().__init__(odds)
        self.notes = notes


class OddsNotes(Sequence):
    """Per-row sentences naming the features that pushed the odds most, formatted on demand.

    The numbers are computed for all rows at once; only the rows that are read become text,
    so a year of minutes costs no Python loop.
    """

    def __init__(self, method: str, p: np.ndarray, features: list[str], values: np.ndarray,
                 pushes: np.ndarray):
        self.method, self.p, self.feature_names = method, p, features
        self.values, self.pushes = values, pushes              # (n, n_features) each
        # No odds although every input is there: the model's arithmetic overflowed.
        self.failed = ~np.isfinite(p) & np.isfinite(values).all(axis=1)
        with np.errstate(all="ignore"):
            order = np.argsort(-np.abs(np.nan_to_num(pushes)), axis=1, kind="stable")
        self.order = order

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
        label = METHOD_LABELS[self.method]
        if self.failed[i]:
            return (f"{label}: the site model's arithmetic failed (overflow) for these inputs: rules only "
                    "(the call rests on the rules and the error budget).")
        if not np.isfinite(self.p[i]):
            missing = [self.feature_names[k] for k in range(len(self.feature_names)) if not np.isfinite(self.values[i, k])]
            return (f"{label}: site model gives no odds ({', '.join(missing) or 'inputs'} not available); "
                    "the call rests on rules and the error budget.")
        first, *rest = self.order[i]
        push = self.pushes[i, first]
        if abs(push) < 0.05:
            return (f"{label}: site model odds {self.p[i]:.0%}, as for the average past attempt "
                    "(no condition pushed them noticeably).")
        verb = "raised" if push > 0 else "lowered"
        text = (f"{label}: {feature_phrase(self.feature_names[first], self.values[i, first])} {verb} the site "
                f"model's odds most ({push:+.1f} log-odds vs. the average past attempt)")
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
        """The seam of :func:`advisor.evaluation.evaluate.evaluate`: ``p_usable`` and notes per method."""
        odds, notes = {}, {}
        for method, m in self.methods.items():
            p = m.predict(features)
            names = list(dict.fromkeys(t.feature for t in m.terms))
            with np.errstate(all="ignore"):  # an overflow shows as p = NaN, said in the notes
                contrib = m.contributions(term_matrix(features, m.terms))
                pushes = np.column_stack([contrib[:, np.array([t.feature == f for t in m.terms])].sum(axis=1)
                                          for f in names])
            values = np.column_stack([features[f].to_numpy(dtype=float) for f in names])
            odds[method] = p
            notes[method] = OddsNotes(method, p, names, values, pushes)
        return ModelOdds(odds, notes)


# --- JSON: export -------------------------------------------------------------------------

def model_to_dict(model: SiteModel) -> dict:
    """The JSON document of ``model`` (schema :data:`SCHEMA_VERSION`)."""
    methods = {}
    for method, m in model.methods.items():
        terms = []
        for t in m.terms:
            entry = {"name": t.name, "feature": t.feature, "transform": t.transform, "unit": t.unit}
            if t.transform == "shortfall":
                entry["knot"] = float(t.knot)
            terms.append(entry)
        methods[method] = {
            "terms": terms,
            "scaler": {"mean": [float(v) for v in m.mean], "scale": [float(v) for v in m.scale]},
            "logistic": {"coef": [float(v) for v in m.coef], "intercept": float(m.intercept)},
            "metrics": m.metrics,
        }
    return {
        "format": FORMAT,
        "schema_version": SCHEMA_VERSION,
        "features": [{"name": n, "unit": u} for n, u in model.features],
        "methods": methods,
        "training": model.training,
    }


def dumps_model(model: SiteModel) -> str:
    """``model`` as JSON text (finite numbers only; floats round-trip exactly)."""
    return json.dumps(model_to_dict(model), indent=2, allow_nan=False, ensure_ascii=False) + "\n"


# --- JSON: strict reading -----------------------------------------------------------------

def load_model(path: Path | str) -> SiteModel:
    """Read and validate a model file; every problem is a :class:`ModelError`.

    The file is read with the bounded reader (a regular file of at most
    :data:`MAX_MODEL_BYTES`; FIFOs and devices are refused without blocking); UTF-8 with or
    without a byte-order mark.
    """
    source = str(path)
    kind = FileKind("model file", MAX_MODEL_BYTES, "a site model is a few kB of JSON; is this the right file?")
    try:
        stat_regular(path, ModelError, kind)
    except ModelError as exc:
        if exc.message == "model file not found":
            exc.hint = "check --model or model.path in the site file, or train one with 'advisor train'"
        raise
    raw = read_bytes_bounded(path, ModelError, kind, empty_ok=True) or b""
    problem = sniff_encoding_problem(raw[:4096])
    if problem == "binary" or (problem is None and b"\x00" in raw):
        raise ModelError("not UTF-8 text (binary content)", source=source,
                         hint="a model file is JSON; " + RETRAIN_HINT)
    text = decode_text(raw, ModelError, "model file", source, expected="a JSON model file")
    return parse_model(text, source)


#: Deepest nesting of arrays and objects in a model file (a valid one is 5 deep).
MAX_JSON_DEPTH = 32
#: Longest integer literal read exactly; longer ones become floats (and so fail the finite check
#: when they overflow), never an OverflowError or Python's 4300-digit conversion limit.
MAX_INT_DIGITS = 16
_STRING = re.compile(r'"(?:[^"\\]|\\.)*"')


def _json_depth(text: str) -> int:
    """Deepest bracket nesting of JSON ``text`` (strings ignored), in one vectorised pass."""
    bare = _STRING.sub('""', text)
    codes = np.frombuffer(bare.encode("utf-8", "replace"), dtype=np.uint8)
    step = np.zeros(len(codes), dtype=np.int32)
    step[(codes == ord("[")) | (codes == ord("{"))] = 1
    step[(codes == ord("]")) | (codes == ord("}"))] = -1
    return int(np.cumsum(step).max()) if len(step) else 0


def _reject_constant(name: str):
    raise ValueError(f"non-finite number {name}")


class _LongInteger(str):
    """An integer literal too long to be a model number, kept as written for the message."""


def _bounded_int(text: str):
    return int(text) if len(text.lstrip("-")) <= MAX_INT_DIGITS else _LongInteger(text)


def _unique_keys(pairs):
    out = {}
    for key, value in pairs:
        if key in out:
            raise ValueError(f"duplicate key {key!r}")
        out[key] = value
    return out


def parse_model(text: str, source: str = "<model>") -> SiteModel:
    """Validate the JSON ``text`` of a model file into a :class:`SiteModel`."""
    if not text.strip():
        raise ModelError("model file is empty", source=source, hint=RETRAIN_HINT)
    depth = _json_depth(text)
    if depth > MAX_JSON_DEPTH:
        raise ModelError(f"JSON nested {depth} levels deep; a model file is at most {MAX_JSON_DEPTH}", source=source,
                         hint="the file is damaged or not a model; " + RETRAIN_HINT)
    try:
        doc = json.loads(text, object_pairs_hook=_unique_keys, parse_constant=_reject_constant,
                         parse_int=_bounded_int)
    except json.JSONDecodeError as exc:
        at_end = exc.pos >= len(text.rstrip()) or exc.msg.startswith("Unterminated string")
        what = "truncated JSON" if at_end else f"invalid JSON: {exc.msg}"
        raise ModelError(what, source=source, line=exc.lineno, column=exc.colno,
                         hint="the file is damaged; " + RETRAIN_HINT) from None
    except (ValueError, RecursionError) as exc:
        raise ModelError(f"invalid JSON: {exc}", source=source, hint=RETRAIN_HINT) from None
    return _Validator(source).model(doc)


class _Validator:
    def __init__(self, source: str):
        self.source = source

    def fail(self, where: str, message: str, hint: str | None = RETRAIN_HINT) -> ModelError:
        return ModelError(message, source=self.source, field=where or None, hint=hint)

    def mapping(self, value, where: str, required: set, optional: set = frozenset()) -> dict:
        if not isinstance(value, dict):
            raise self.fail(where, f"expected an object, got {type(value).__name__}")
        missing = sorted(required - set(value))
        if missing:
            raise self.fail(where, f"missing key {missing[0]!r}")
        unknown = sorted(set(value) - required - set(optional))
        if unknown:
            raise self.fail(where, f"unknown key {unknown[0]!r}")
        return value

    def number(self, value, where: str) -> float:
        if isinstance(value, _LongInteger):
            raise self.fail(where, f"number {value[:12]}… ({len(value)} digits) is too large to be a model number")
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise self.fail(where, f"expected a finite number, got {value!r}")
        number = float(value)
        if not math.isfinite(number):
            raise self.fail(where, f"expected a finite number, got {value!r}")
        return number

    def numbers(self, value, where: str, n: int) -> np.ndarray:
        if not isinstance(value, list):
            raise self.fail(where, f"expected a list of {n} numbers")
        if len(value) != n:
            raise self.fail(where, f"expected {n} numbers (one per term), got {len(value)}")
        return np.array([self.number(v, f"{where}[{k}]") for k, v in enumerate(value)], dtype=float)

    def text(self, value, where: str) -> str:
        if not isinstance(value, str):
            raise self.fail(where, f"expected text, got {value!r}")
        return value

    def model(self, doc) -> SiteModel:
        if not isinstance(doc, dict):
            raise self.fail("", "expected a JSON object at the top of the model file")
        if doc.get("format") != FORMAT:
            raise self.fail("format", f"not an advisor site model (format {doc.get('format')!r}, expected {FORMAT!r})")
        version = doc.get("schema_version")
        if isinstance(version, bool) or not isinstance(version, int):
            raise self.fail("schema_version", f"expected an integer, got {version!r}")
        if version != SCHEMA_VERSION:
            raise self.fail("schema_version", f"schema version {version} is not supported (this advisor reads "
                            f"version {SCHEMA_VERSION})", hint="use the advisor release that wrote it, or " + RETRAIN_HINT)
        self.mapping(doc, "", {"format", "schema_version", "features", "methods"}, {"training"})
        features = self.features(doc["features"])
        methods_doc = doc["methods"]
        if not isinstance(methods_doc, dict) or not methods_doc:
            raise self.fail("methods", "expected an object with 'scan' and/or 'astronomical'")
        methods = {}
        for method, body in methods_doc.items():
            if method not in METHOD_LABELS:
                raise self.fail(f"methods.{method}", "unknown method", hint="methods are 'scan' and 'astronomical'")
            methods[method] = self.method(body, f"methods.{method}", dict(features))
        training = doc.get("training", {})
        if not isinstance(training, dict):
            raise self.fail("training", "expected an object")
        return SiteModel(tuple(features), methods, training, self.source)

    def features(self, value) -> list[tuple[str, str]]:
        if not isinstance(value, list) or not value:
            raise self.fail("features", "expected a non-empty list of {name, unit}")
        if len(value) > MAX_TERMS:
            raise self.fail("features", f"{len(value)} features, more than the {MAX_TERMS} a site model may read")
        out = []
        for k, entry in enumerate(value):
            where = f"features[{k}]"
            self.mapping(entry, where, {"name", "unit"})
            name, unit = self.text(entry["name"], where + ".name"), self.text(entry["unit"], where + ".unit")
            spec = CATALOGUE.get(name)
            if spec is None:
                raise self.fail(where + ".name", f"unknown feature {name!r}: this advisor computes no such feature",
                                hint="the model was trained for other features; " + RETRAIN_HINT)
            if unit != spec.unit:
                raise self.fail(where + ".unit", f"feature {name} is in {unit!r} in the model but in {spec.unit!r} "
                                "in this advisor", hint="the model does not match these features; " + RETRAIN_HINT)
            if name in dict(out):
                raise self.fail(where + ".name", f"feature {name} is listed twice")
            out.append((name, unit))
        return out

    def method(self, body, where: str, features: dict) -> MethodModel:
        self.mapping(body, where, {"terms", "scaler", "logistic"}, {"metrics"})
        terms_doc = body["terms"]
        if not isinstance(terms_doc, list) or not terms_doc:
            raise self.fail(where + ".terms", "expected a non-empty list of terms")
        if len(terms_doc) > MAX_TERMS:
            raise self.fail(where + ".terms", f"{len(terms_doc)} terms, more than {MAX_TERMS}")
        terms = tuple(self.term(t, f"{where}.terms[{k}]", features) for k, t in enumerate(terms_doc))
        n = len(terms)
        scaler = self.mapping(body["scaler"], where + ".scaler", {"mean", "scale"})
        mean = self.numbers(scaler["mean"], where + ".scaler.mean", n)
        scale = self.numbers(scaler["scale"], where + ".scaler.scale", n)
        if np.any(scale <= 0):
            raise self.fail(where + ".scaler.scale", "every scale must be positive")
        logistic = self.mapping(body["logistic"], where + ".logistic", {"coef", "intercept"})
        coef = self.numbers(logistic["coef"], where + ".logistic.coef", n)
        intercept = self.number(logistic["intercept"], where + ".logistic.intercept")
        metrics = body.get("metrics", {})
        if not isinstance(metrics, dict):
            raise self.fail(where + ".metrics", "expected an object")
        return MethodModel(terms, mean, scale, coef, intercept, metrics)

    def term(self, entry, where: str, features: dict) -> Term:
        self.mapping(entry, where, {"name", "feature", "transform", "unit"}, {"knot"})
        feature = self.text(entry["feature"], where + ".feature")
        if feature not in features:
            raise self.fail(where + ".feature", f"feature {feature!r} is not in the model's feature list")
        transform = self.text(entry["transform"], where + ".transform")
        if transform not in TRANSFORMS:
            raise self.fail(where + ".transform", f"unknown transform {transform!r}",
                            hint=f"one of {', '.join(TRANSFORMS)}")
        if features[feature] == "flag" and transform != "identity":
            raise self.fail(where + ".transform", f"flag {feature} can only enter as itself (identity)")
        knot = None
        if transform == "shortfall":
            if "knot" not in entry:
                raise self.fail(where, "a shortfall term needs a 'knot'")
            knot = self.number(entry["knot"], where + ".knot")
        elif "knot" in entry:
            raise self.fail(where + ".knot", f"only shortfall terms have a knot, not {transform}")
        term = Term(feature, transform, knot)
        if entry["name"] != term.name:
            raise self.fail(where + ".name", f"term name {entry['name']!r} does not match its definition ({term.name!r})")
        if entry["unit"] != term.unit:
            raise self.fail(where + ".unit", f"term unit {entry['unit']!r} does not match {term.unit!r}")
        return term
