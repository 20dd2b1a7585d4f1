"""The site model's file: plain JSON, written by ``advisor train`` and read strictly by ``check``.

    model = load_model(path)          # every problem is a ModelError naming the field
    text = dumps_model(model)         # the JSON document `advisor train` writes

A model file holds only names and numbers: it is never unpickled, and nothing in it is
executed.  Schema version 2 added each term's ``direction`` and each method's
``feature_range``; version 1 files are still read (their terms are ``free`` and their odds are
never marked extrapolated).  numpy only, like :mod:`advisor.model.inference`.
"""

from __future__ import annotations

import json
import math
import re
from pathlib import Path

import numpy as np

from advisor.catalogue import CATALOGUE
from advisor.errors import ModelError
from advisor.io.fileio import FileKind, decode_text, read_bytes_bounded, sniff_encoding_problem, stat_regular
from advisor.model.inference import DIRECTIONS, MAX_TERMS, METHOD_LABELS, TRANSFORMS, MethodModel, SiteModel, Term

FORMAT = "advisor-site-model"
SCHEMA_VERSION = 2
READABLE_VERSIONS = (1, 2)
MAX_MODEL_BYTES = 1_000_000
RETRAIN_HINT = "retrain it with 'advisor train --history HISTORY.csv --out MODEL.json'"


# --- export -------------------------------------------------------------------------------


def model_to_dict(model: SiteModel) -> dict:
    """The JSON document of ``model`` (schema :data:`SCHEMA_VERSION`)."""
    methods = {}
    for method, m in model.methods.items():
        terms = []
        for t in m.terms:
            entry: dict[str, object] = {
                "name": t.name,
                "feature": t.feature,
                "transform": t.transform,
                "unit": t.unit,
                "direction": t.direction,
            }
            if t.transform == "shortfall" and t.knot is not None:
                entry["knot"] = float(t.knot)
            terms.append(entry)
        lo = m.feature_min if m.feature_min is not None else np.full(len(m.terms), -np.inf)
        hi = m.feature_max if m.feature_max is not None else np.full(len(m.terms), np.inf)
        methods[method] = {
            "terms": terms,
            "scaler": {"mean": [float(v) for v in m.mean], "scale": [float(v) for v in m.scale]},
            "logistic": {"coef": [float(v) for v in m.coef], "intercept": float(m.intercept)},
            "feature_range": {"min": [_finite_or_none(v) for v in lo], "max": [_finite_or_none(v) for v in hi]},
            "metrics": m.metrics,
        }
    return {
        "format": FORMAT,
        "schema_version": SCHEMA_VERSION,
        "features": [{"name": n, "unit": u} for n, u in model.features],
        "methods": methods,
        "training": model.training,
    }


def _finite_or_none(value: float) -> float | None:
    return float(value) if np.isfinite(value) else None


def dumps_model(model: SiteModel) -> str:
    """``model`` as JSON text (finite numbers only; floats round-trip exactly)."""
    return json.dumps(model_to_dict(model), indent=2, allow_nan=False, ensure_ascii=False) + "\n"


# --- strict reading -----------------------------------------------------------------------


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
        raise ModelError("not UTF-8 text (binary content)", source=source, hint="a model file is JSON; " + RETRAIN_HINT)
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


class _LongInteger(str):
    """An integer literal too long to be a model number, kept as written for the message."""


def _bounded_int(text: str):
    return int(text) if len(text.lstrip("-")) <= MAX_INT_DIGITS else _LongInteger(text)


def _reject_constant(name: str):
    raise ValueError(f"non-finite number {name}")


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
        raise ModelError(
            f"JSON nested {depth} levels deep; a model file is at most {MAX_JSON_DEPTH}",
            source=source,
            hint="the file is damaged or not a model; " + RETRAIN_HINT,
        )
    try:
        doc = json.loads(text, object_pairs_hook=_unique_keys, parse_constant=_reject_constant, parse_int=_bounded_int)
    except json.JSONDecodeError as exc:
        at_end = exc.pos >= len(text.rstrip()) or exc.msg.startswith("Unterminated string")
        what = "truncated JSON" if at_end else f"invalid JSON: {exc.msg}"
        raise ModelError(
            what, source=source, line=exc.lineno, column=exc.colno, hint="the file is damaged; " + RETRAIN_HINT
        ) from None
    except (ValueError, RecursionError) as exc:
        raise ModelError(f"invalid JSON: {exc}", source=source, hint=RETRAIN_HINT) from None
    return _Validator(source).model(doc)


class _Validator:
    def __init__(self, source: str):
        self.source = source
        self.version = SCHEMA_VERSION

    def fail(self, where: str, message: str, hint: str | None = RETRAIN_HINT) -> ModelError:
        return ModelError(message, source=self.source, field=where or None, hint=hint)

    def mapping(self, value, where: str, required: set, optional: set | frozenset = frozenset()) -> dict:
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
        if version not in READABLE_VERSIONS:
            raise self.fail(
                "schema_version",
                f"schema version {version} is not supported (this advisor reads "
                f"versions {', '.join(map(str, READABLE_VERSIONS))})",
                hint="use the advisor release that wrote it, or " + RETRAIN_HINT,
            )
        self.version = version
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
        out: list[tuple[str, str]] = []
        for k, entry in enumerate(value):
            where = f"features[{k}]"
            self.mapping(entry, where, {"name", "unit"})
            name, unit = self.text(entry["name"], where + ".name"), self.text(entry["unit"], where + ".unit")
            spec = CATALOGUE.get(name)
            if spec is None:
                raise self.fail(
                    where + ".name",
                    f"unknown feature {name!r}: this advisor computes no such feature",
                    hint="the model was trained for other features; " + RETRAIN_HINT,
                )
            if unit != spec.unit:
                raise self.fail(
                    where + ".unit",
                    f"feature {name} is in {unit!r} in the model but in {spec.unit!r} in this advisor",
                    hint="the model does not match these features; " + RETRAIN_HINT,
                )
            if name in dict(out):
                raise self.fail(where + ".name", f"feature {name} is listed twice")
            out.append((name, unit))
        return out

    def method(self, body, where: str, features: dict) -> MethodModel:
        if self.version >= 2:
            self.mapping(body, where, {"terms", "scaler", "logistic", "feature_range"}, {"metrics"})
        else:
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
        for k, (term, w) in enumerate(zip(terms, coef)):
            if term.sign * w < 0:
                raise self.fail(
                    f"{where}.logistic.coef[{k}]",
                    f"coefficient {w:+g} of {term.name} contradicts its declared direction ({term.direction})",
                )
        metrics = body.get("metrics", {})
        if not isinstance(metrics, dict):
            raise self.fail(where + ".metrics", "expected an object")
        lo = hi = None
        if self.version >= 2:
            rng = self.mapping(body["feature_range"], where + ".feature_range", {"min", "max"})
            lo = self.bounds(rng["min"], where + ".feature_range.min", n, -np.inf)
            hi = self.bounds(rng["max"], where + ".feature_range.max", n, np.inf)
            if np.any(lo > hi):
                raise self.fail(where + ".feature_range", "a minimum is above its maximum")
        return MethodModel(terms, mean, scale, coef, intercept, metrics, lo, hi)

    def bounds(self, value, where: str, n: int, missing: float) -> np.ndarray:
        """``n`` finite numbers or nulls (no bound: ``missing``)."""
        if not isinstance(value, list) or len(value) != n:
            raise self.fail(where, f"expected a list of {n} numbers or nulls (one per term)")
        return np.array(
            [missing if v is None else self.number(v, f"{where}[{k}]") for k, v in enumerate(value)], dtype=float
        )

    def term(self, entry, where: str, features: dict) -> Term:
        if self.version >= 2:
            self.mapping(entry, where, {"name", "feature", "transform", "unit", "direction"}, {"knot"})
        else:
            self.mapping(entry, where, {"name", "feature", "transform", "unit"}, {"knot"})
        feature = self.text(entry["feature"], where + ".feature")
        if feature not in features:
            raise self.fail(where + ".feature", f"feature {feature!r} is not in the model's feature list")
        transform = self.text(entry["transform"], where + ".transform")
        if transform not in TRANSFORMS:
            raise self.fail(
                where + ".transform", f"unknown transform {transform!r}", hint=f"one of {', '.join(TRANSFORMS)}"
            )
        if features[feature] == "flag" and transform != "identity":
            raise self.fail(where + ".transform", f"flag {feature} can only enter as itself (identity)")
        knot = None
        if transform == "shortfall":
            if "knot" not in entry:
                raise self.fail(where, "a shortfall term needs a 'knot'")
            knot = self.number(entry["knot"], where + ".knot")
        elif "knot" in entry:
            raise self.fail(where + ".knot", f"only shortfall terms have a knot, not {transform}")
        direction = "free"
        if self.version >= 2:
            direction = self.text(entry["direction"], where + ".direction")
            if direction not in DIRECTIONS:
                raise self.fail(
                    where + ".direction", f"unknown direction {direction!r}", hint=f"one of {', '.join(DIRECTIONS)}"
                )
        term = Term(feature, transform, knot, direction)
        if entry["name"] != term.name:
            raise self.fail(
                where + ".name", f"term name {entry['name']!r} does not match its definition ({term.name!r})"
            )
        if entry["unit"] != term.unit:
            raise self.fail(where + ".unit", f"term unit {entry['unit']!r} does not match {term.unit!r}")
        return term
