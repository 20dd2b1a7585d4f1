"""Checked rule sets kept between runs: layering and lint are done once per content of the files.

    ruleset = load_rules_cached(files, CATALOGUE)   # as advisor.rules.loader.load_rules
    doc = ruleset_to_dict(ruleset)                   # plain data: texts, numbers, where each came from
    ruleset = ruleset_from_dict(doc, CATALOGUE)      # conditions and error terms compiled again

Every ``check`` loads the same rule files; reading their YAML and linting them costs more than
compiling the conditions of the result.  :func:`load_rules_cached` keeps the rule set that
passed the lint in the cache of :mod:`advisor.io.jsoncache` (kind ``rules``) and later builds it
from there without the YAML reader or the lint.  The key covers everything the result depends
on: each file's name, layer and bytes, the catalogue it is checked against and the source of the
rule language (:data:`RULE_SOURCE_MODULES`), so an entry is never stale.  A rule set with any
error is never stored: its errors are reported by the lint every time, exactly as uncached.
An entry that does not rebuild (damaged, or not a rule set) is ignored and replaced.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from pathlib import Path

import advisor.io.jsoncache as jsoncache
from advisor.catalogue import FeatureSpec
from advisor.errors import AdvisorError, RulesError
from advisor.io.fileio import read_bytes_bounded
from advisor.rules.compiler import compile_condition, compile_expression
from advisor.rules.ruleset import Rule, RuleSet

__all__ = ["RULE_SOURCE_MODULES", "VERSION", "load_rules_cached", "ruleset_from_dict", "ruleset_to_dict"]

#: Raise when the stored form changes.
VERSION = 1
#: Modules whose code decides what rule files load to (reader, lint, compiler, units, vocabulary).
RULE_SOURCE_MODULES = (
    "advisor.rules.loader",
    "advisor.rules.lint",
    "advisor.rules.thresholds",
    "advisor.rules.ruleset",
    "advisor.rules.compiler",
    "advisor.rules.typecheck",
    "advisor.rules.syntax",
    "advisor.rules.tokens",
    "advisor.rules.nodes",
    "advisor.rules.interpret",
    "advisor.rules.condition",
    "advisor.rules.stored",
    "advisor.catalogue",
    "advisor.units",
    "advisor.vocabulary",
    "advisor.text",
    "advisor.io.yamlio",
    "advisor.io.fileio",
    "advisor.io.encoding",
    "advisor.io.jsoncache",
)


def ruleset_to_dict(ruleset: RuleSet) -> dict:
    """``ruleset`` as plain JSON-ready data."""
    return {
        "version": VERSION,
        "sources": list(ruleset.sources),
        "disabled": [list(d) for d in ruleset.disabled],
        "rules": [
            {
                "id": r.id,
                "applies_to": r.applies_to,
                "condition": r.condition_text,
                "effect": r.effect,
                "message": r.message,
                "error": r.error_text,
                "error_scale": r.error_scale,
                "source": r.source,
                "line": r.line,
                "layer": r.layer,
                "overrides": [list(o) for o in r.overrides],
            }
            for r in ruleset
        ],
    }


def ruleset_from_dict(doc: Mapping, catalogue: Mapping[str, FeatureSpec]) -> RuleSet:
    """The rule set stored by :func:`ruleset_to_dict`.

    Raises ValueError (or KeyError, TypeError, a ConditionError) when ``doc`` is not one.
    """
    if doc.get("version") != VERSION:
        raise ValueError("another version of the stored rule set")
    rules = []
    for r in doc["rules"]:
        error_text = r["error"]
        if not all(isinstance(r[k], str) for k in ("id", "applies_to", "condition", "effect", "message", "source")):
            raise TypeError("a stored rule's texts are not texts")
        rules.append(
            Rule(
                id=r["id"],
                applies_to=r["applies_to"],
                condition_text=r["condition"],
                condition=compile_condition(r["condition"], catalogue),
                effect=r["effect"],
                message=r["message"],
                error_text=error_text,
                error=None if error_text is None else compile_expression(error_text, catalogue),
                error_scale=float(r["error_scale"]),
                source=r["source"],
                line=r["line"],
                layer=r["layer"],
                overrides=tuple((str(s), line, str(layer)) for s, line, layer in r["overrides"]),
            )
        )
    disabled = tuple((str(i), str(s), line, str(layer)) for i, s, line, layer in doc["disabled"])
    return RuleSet(tuple(rules), tuple(str(s) for s in doc["sources"]), disabled)


def _key(files: Sequence[tuple[Path | str, str]], catalogue: Mapping[str, FeatureSpec]) -> str | None:
    """The cache key of loading ``files`` against ``catalogue``; None when a file cannot be read
    (the lint then reports it, uncached)."""
    code = jsoncache.code_digest(RULE_SOURCE_MODULES)
    if code is None:
        return None
    parts: list[bytes | str] = [repr(sorted(catalogue.items()))]
    for path, layer in files:
        try:
            data = read_bytes_bounded(path, RulesError, "rules")
        except (AdvisorError, OSError):
            return None
        parts += [str(path), layer, data or b""]
    return jsoncache.content_key(parts, code)


def load_rules_cached(files: Sequence[tuple[Path | str, str]], catalogue: Mapping[str, FeatureSpec]) -> RuleSet:
    """:func:`advisor.rules.loader.load_rules`, from the cache when these files were loaded before.

    Raises
    ------
    RulesRejected
        When the lint finds any error (never from the cache: only clean rule sets are stored).
    """
    files = list(files)
    key = _key(files, catalogue)
    if key is not None:
        doc = jsoncache.load("rules", key)
        if doc is not None:
            try:
                return ruleset_from_dict(doc, catalogue)
            except Exception:  # a damaged entry of any shape is rebuilt, never trusted
                pass
    from advisor.rules.loader import load_rules

    ruleset = load_rules(files, catalogue)
    if key is not None and _key(files, catalogue) == key:  # the files did not change while being read
        jsoncache.store("rules", key, ruleset_to_dict(ruleset))
    return ruleset
