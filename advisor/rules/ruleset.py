"""Rule sets: loading layered YAML rule files and evaluating them over a feature frame.

A rule file holds ``rules:``, a list of mappings::

    - id: fog_blinds_laser
      applies_to: scan                 # scan | astronomical | both
      condition: fog                   # the condition language (advisor.rules.condition)
      effect: block                    # block | warn | add_error
      error_um: 40                     # only with add_error: a number or an expression [µm]
      message: "Fog likely (spread {dew_point_spread_c:.1f} °C): the laser cannot see the surface."
      enabled: true                    # optional; false disables a rule of an earlier layer

Files are applied in order (package defaults, then the site's, then ``--rules``).  A rule whose
id already exists is merged over it (its keys replace the earlier ones), so a site can change
one threshold without copying a whole rule.  Everything is validated and compiled once at load.
"""

from __future__ import annotations

import string
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from ..errors import ConditionError, RulesError
from ..site import package_data_dir
from ..yamlio import load_yaml
from .condition import Compiled, FeatureSpec, compile_condition, compile_expression

APPLIES_TO = ("scan", "astronomical", "both")
EFFECTS = ("block", "warn", "add_error")
RULE_KEYS = ("id", "applies_to", "condition", "effect", "error_um", "message", "enabled")
MAX_RULES = 2000
#: Non-feature values a message may name.
MESSAGE_EXTRAS = ("calibrator_name",)


@dataclass(frozen=True)
class Rule:
    """One validated, compiled rule."""

    id: str
    applies_to: str
    condition_text: str
    condition: Compiled
    effect: str
    message: str
    error_text: str | None = None
    error: Compiled | None = None
    source: str = "<built-in>"
    line: int | None = None
    layer: str = "default"

    def applies(self, method: str) -> bool:
        return self.applies_to in (method, "both")


@dataclass(frozen=True)
class RuleEvaluation:
    """Per-rule boolean ``fired`` arrays and ``error_um`` arrays (0 where not fired)."""

    fired: dict[str, np.ndarray]
    error_um: dict[str, np.ndarray]


@dataclass(frozen=True)
class RuleSet:
    """The effective rules after layering, in order, with the files they came from."""

    rules: tuple[Rule, ...]
    sources: tuple[str, ...] = field(default=())

    def __iter__(self):
        return iter(self.rules)

    def __len__(self) -> int:
        return len(self.rules)

    def evaluate(self, columns: Mapping[str, np.ndarray], n: int) -> RuleEvaluation:
        """Evaluate every rule over ``columns`` (name → array of length ``n``), vectorised."""
        fired: dict[str, np.ndarray] = {}
        errors: dict[str, np.ndarray] = {}
        for rule in self.rules:
            mask = np.asarray(rule.condition.evaluate(columns, length=n), dtype=bool)
            fired[rule.id] = mask
            if rule.error is not None:
                value = np.asarray(rule.error.evaluate(columns, length=n), dtype=float)
                errors[rule.id] = np.where(mask, np.nan_to_num(value, nan=0.0), 0.0)
        return RuleEvaluation(fired, errors)


def default_rule_files() -> list[Path]:
    """The rule files shipped with the package (a copy of the top-level rules/ folder)."""
    folder = package_data_dir("advisor.default_rules", "rules")
    return sorted(folder.glob("*.yaml"))


def message_fields(template: str) -> list[str]:
    """Field names in a message template; ValueError on a malformed template."""
    names = []
    for _, name, spec, conversion in string.Formatter().parse(template):
        if name is None:
            continue
        if not name.isidentifier() or conversion:
            raise ValueError(f"'{{{name}}}' is not a plain value name")
        names.append(name)
    return names


def format_message(template: str, row: Mapping[str, Any]) -> str:
    """Fill a message template with one row's values; NaN → 'n/a', flags → yes/no."""
    parts = []
    for literal, name, spec, _ in string.Formatter().parse(template):
        parts.append(literal)
        if name is None:
            continue
        value = row.get(name)
        if isinstance(value, (bool, np.bool_)):
            parts.append("yes" if value else "no")
        elif value is None or (isinstance(value, (float, np.floating)) and not np.isfinite(value)):
            parts.append("n/a")
        else:
            try:
                parts.append(format(value, spec or ""))
            except (ValueError, TypeError):
                parts.append(str(value))
    return "".join(parts)


def _fail(message: str, source: str, lines: dict, path: tuple, hint: str | None = None,
          column: int | None = None) -> RulesError:
    line = None
    for k in range(len(path), -1, -1):
        if path[:k] in lines:
            line = lines[path[:k]]
            break
    return RulesError(message, source=source, line=line, column=column, hint=hint)


def _raw_entries(path: Path) -> tuple[list[tuple[dict, int | None, dict]], str]:
    """Parsed rule mappings of one file with their line numbers."""
    data, lines = load_yaml(path, RulesError)
    source = str(path)
    if data is None:
        return [], source
    if not isinstance(data, dict) or set(data) - {"rules"}:
        raise RulesError("expected a mapping with a single key 'rules:'", source=source, line=1,
                         hint="start the file with 'rules:' and a list of rules")
    entries = data.get("rules") or []
    if not isinstance(entries, list):
        raise _fail("'rules' must be a list", source, lines, ("rules",))
    out = []
    for i, entry in enumerate(entries):
        if not isinstance(entry, dict):
            raise _fail("each rule must be a mapping with id, applies_to, condition, effect, message",
                        source, lines, ("rules", i))
        out.append((entry, lines.get(("rules", i)), {k: lines.get(("rules", i, k)) for k in entry}))
    if len(out) > MAX_RULES:
        raise RulesError(f"{len(out)} rules in one file, more than {MAX_RULES}", source=source,
                         hint="a rule set this large cannot be reviewed; split or generate fewer")
    return out, source


def compile_rule(entry: dict, catalogue: Mapping[str, FeatureSpec], source: str, line: int | None,
                 key_lines: dict, layer: str) -> Rule:
    """Validate one complete rule mapping and compile its condition and error term."""
    def fail(message, key=None, hint=None, column=None):
        return RulesError(message, source=source, line=key_lines.get(key, line) if key else line,
                          column=column, field=f"rule {entry.get('id', '?')}" + (f".{key}" if key else ""),
                          hint=hint)

    for key in entry:
        if key not in RULE_KEYS:
            import difflib

            close = difflib.get_close_matches(str(key), RULE_KEYS, n=1)
            raise fail(f"unknown key '{key}'", key, hint=f"did you mean '{close[0]}'?" if close else
                       f"keys are {', '.join(RULE_KEYS)}")
    for key in ("id", "applies_to", "condition", "effect", "message"):
        if key not in entry:
            raise fail(f"missing '{key}'", hint="every rule needs id, applies_to, condition, effect, message")
    rid = entry["id"]
    if not isinstance(rid, str) or not rid.replace("_", "").replace("-", "").isalnum():
        raise fail(f"id {rid!r} must be a word of letters, digits, '_' or '-'", "id")
    if entry["applies_to"] not in APPLIES_TO:
        raise fail(f"applies_to {entry['applies_to']!r} is not one of {', '.join(APPLIES_TO)}", "applies_to")
    if entry["effect"] not in EFFECTS:
        raise fail(f"effect {entry['effect']!r} is not one of {', '.join(EFFECTS)}", "effect")
    for key in ("condition", "message"):
        if not isinstance(entry[key], (str, bool)) or (key == "message" and not isinstance(entry[key], str)):
            raise fail(f"'{key}' must be text", key, hint="quote it")
    cond_text = str(entry["condition"]).lower() if isinstance(entry["condition"], bool) else entry["condition"]
    try:
        condition = compile_condition(cond_text, catalogue)
    except ConditionError as exc:
        raise fail(f"condition: {exc.message}", "condition", hint=exc.hint, column=exc.column) from None
    error_text = error = None
    if entry["effect"] == "add_error":
        if "error_um" not in entry:
            raise fail("effect add_error needs 'error_um' (a number or expression in µm)")
        raw = entry["error_um"]
        error_text = str(raw) if not isinstance(raw, bool) else None
        if error_text is None:
            raise fail("'error_um' must be a number or an expression", "error_um")
        try:
            error = compile_expression(error_text, catalogue)
        except ConditionError as exc:
            raise fail(f"error_um: {exc.message}", "error_um", hint=exc.hint, column=exc.column) from None
    elif "error_um" in entry:
        raise fail("'error_um' is only used with effect add_error", "error_um")
    try:
        names = message_fields(entry["message"])
    except ValueError as exc:
        raise fail(f"message: {exc}", "message", hint="write values as {feature_name} or {feature_name:.1f}") from None
    for name in names:
        if name not in catalogue and name not in MESSAGE_EXTRAS:
            import difflib

            close = difflib.get_close_matches(name, list(catalogue) + list(MESSAGE_EXTRAS), n=1)
            raise fail(f"message names '{{{name}}}', which is not a feature", "message",
                       hint=f"did you mean '{close[0]}'?" if close else "see 'advisor rules features'")
    return Rule(id=rid, applies_to=entry["applies_to"], condition_text=cond_text, condition=condition,
                effect=entry["effect"], message=entry["message"], error_text=error_text, error=error,
                source=source, line=line, layer=layer)


def load_rules(files: list[tuple[Path, str]], catalogue: Mapping[str, FeatureSpec]) -> RuleSet:
    """Load ``(path, layer)`` files in order, layering by id, and compile the result."""
    merged: dict[str, tuple[dict, str, int | None, dict, str]] = {}
    disabled: set[str] = set()
    sources = []
    for path, layer in files:
        entries, source = _raw_entries(Path(path))
        sources.append(source)
        seen_here: set[str] = set()
        for entry, line, key_lines in entries:
            rid = entry.get("id")
            if not isinstance(rid, str):
                raise RulesError("rule without a text 'id'", source=source, line=line, hint="add id: some_name")
            if rid in seen_here:
                raise RulesError(f"duplicate rule id '{rid}' in the same file", source=source, line=line,
                                 hint="give each rule its own id")
            seen_here.add(rid)
            enabled = entry.get("enabled", True)
            if not isinstance(enabled, bool):
                raise RulesError("'enabled' must be true or false", source=source,
                                 line=key_lines.get("enabled", line), field=f"rule {rid}.enabled")
            if rid in merged:
                base_entry, *_ = merged[rid]
                entry = {**base_entry, **entry}
            merged[rid] = (entry, source, line, key_lines, layer)
            if enabled:
                disabled.discard(rid)
            else:
                disabled.add(rid)
    rules = []
    for rid, (entry, source, line, key_lines, layer) in merged.items():
        if rid in disabled:
            continue
        clean = {k: v for k, v in entry.items() if k != "enabled"}
        rules.append(compile_rule(clean, catalogue, source, line, key_lines, layer))
    return RuleSet(tuple(rules), tuple(sources))
