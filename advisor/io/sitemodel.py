"""``model.terms`` of a site file: the terms ``advisor train`` fits, each with its direction.

    model:
      path: model.json
      terms:
        - {feature: wind_gust_ms, transform: square, direction: lowers}
        - {feature: dew_point_spread_c, transform: shortfall, knot: 3.0, direction: lowers}
        - {feature: air_temp_rate_c_per_h, transform: abs, direction: lowers, methods: [astronomical]}

``feature`` is a row feature of the catalogue (``advisor rules features``); ``transform`` is
``identity`` (x), ``square`` (x²), ``abs`` (|x|) or ``shortfall`` (max(0, knot − x), with ``knot``
in the feature's unit); ``direction`` is ``lowers`` (a larger term can only lower the odds of a
usable result: gusts, the fog deficit, |dT/dt|), ``raises`` or ``free``; ``methods`` defaults to
both.  Every problem is a :class:`~advisor.errors.SiteError` naming the key path and its line,
raised through the site reader of :mod:`advisor.io.site`.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Protocol

from advisor.catalogue import CATALOGUE
from advisor.errors import SiteError
from advisor.vocabulary import METHODS, MODEL_DIRECTIONS, MODEL_TRANSFORMS


class SectionReader(Protocol):
    """What this module needs of the site file's reader (:class:`advisor.io.site._Reader`)."""

    def fail(self, path: tuple, message: str, hint: str | None = None) -> SiteError: ...
    def get_raw(self, path: tuple) -> Any: ...
    def section(self, path: tuple, known: set[str], required: bool = False) -> dict: ...
    def text(self, path: tuple, default: str | None = None, required: bool = False) -> str | None: ...
    def number(
        self,
        path: tuple,
        default: float | None = None,
        lo: float | None = None,
        hi: float | None = None,
        required: bool = False,
    ) -> float: ...


@dataclass(frozen=True)
class ModelTermSetting:
    """One term the site asks ``advisor train`` to fit (``model.terms`` in the site file)."""

    feature: str
    transform: str = "identity"
    knot: float | None = None
    direction: str = "free"
    methods: tuple[str, ...] = METHODS


#: A site model reads at most this many terms per method.
MAX_MODEL_TERMS = 32


def model_terms(reader: SectionReader) -> tuple[ModelTermSetting, ...]:
    """Validate ``model.terms`` of a site file (empty when absent: training's default terms)."""
    path = ("model", "terms")
    raw = reader.get_raw(path)
    if raw is None:
        return ()
    if not isinstance(raw, list) or not raw:
        raise reader.fail(
            path,
            "expected a non-empty list of terms",
            hint="e.g. - {feature: wind_gust_ms, transform: square, direction: lowers}",
        )
    if len(raw) > MAX_MODEL_TERMS:
        raise reader.fail(path, f"{len(raw)} terms, more than the {MAX_MODEL_TERMS} a site model may read")
    out: list[ModelTermSetting] = []
    for i in range(len(raw)):
        tpath = path + (i,)
        entry = reader.section(tpath, {"feature", "transform", "knot", "direction", "methods"}, required=True)
        feature = reader.text(tpath + ("feature",), required=True) or ""
        spec = CATALOGUE.get(feature)
        if spec is None:
            import difflib

            close = difflib.get_close_matches(str(feature), list(CATALOGUE), n=1)
            raise reader.fail(
                tpath + ("feature",),
                f"unknown feature {feature!r}",
                hint=f"did you mean '{close[0]}'?" if close else "see 'advisor rules features'",
            )
        if spec.scope != "row":
            raise reader.fail(
                tpath + ("feature",),
                f"{feature} is fixed by the target and the site, the same for "
                "every attempt, so the model cannot learn from it",
                hint="choose a feature that varies with the weather or the time",
            )
        transform = reader.text(tpath + ("transform",), default="identity") or ""
        if transform not in MODEL_TRANSFORMS:
            raise reader.fail(
                tpath + ("transform",), f"unknown transform {transform!r}", hint=f"one of {', '.join(MODEL_TRANSFORMS)}"
            )
        if spec.unit == "flag" and transform != "identity":
            raise reader.fail(
                tpath + ("transform",),
                f"{feature} is a flag (true/false): it enters as itself",
                hint="write transform: identity or leave it out",
            )
        knot = None
        if transform == "shortfall":
            knot = reader.number(tpath + ("knot",), required=True)
        elif "knot" in entry:
            raise reader.fail(
                tpath + ("knot",),
                f"only a shortfall term has a knot, not {transform}",
                hint="remove knot, or use transform: shortfall",
            )
        direction = reader.text(tpath + ("direction",), required=True) or ""
        if direction not in MODEL_DIRECTIONS:
            raise reader.fail(
                tpath + ("direction",),
                f"unknown direction {direction!r}",
                hint="lowers (a larger term can only lower the odds), raises, or free",
            )
        methods = entry.get("methods", list(METHODS))
        if (
            not isinstance(methods, list)
            or not methods
            or not all(m in METHODS for m in methods)
            or len(set(methods)) != len(methods)
        ):
            raise reader.fail(
                tpath + ("methods",),
                f"expected a list of methods, got {methods!r}",
                hint="e.g. [scan], [astronomical] or [scan, astronomical]",
            )
        term = ModelTermSetting(feature, transform, knot, direction, tuple(m for m in METHODS if m in methods))
        for k, other in enumerate(out):
            if (other.feature, other.transform, other.knot) == (term.feature, term.transform, term.knot) and set(
                other.methods
            ) & set(term.methods):
                raise reader.fail(tpath, f"the same term as model.terms[{k}]", hint="list each term once")
        out.append(term)
    for method in METHODS:
        if not any(method in t.methods for t in out):
            raise reader.fail(path, f"no term for the {method} method", hint="give it at least one term")
    return tuple(out)
