"""Loading rule files: YAML → rules, layered defaults → site → command line, with every problem.

    >>> files = rule_layers(site_files=site.rule_paths, extra=["mine.yaml"])   # doctest: +SKIP
    >>> ruleset = load_rules(files, CATALOGUE)          # RulesRejected on any lint error
    >>> report = lint_files(files, CATALOGUE)           # every problem, and the rule set if none is an error

Files are applied in order (:func:`rule_layers`: the package defaults, then the site's, then
``--rules``).  A rule whose id already exists is merged over it key by key, so a site can change
one threshold without copying a whole rule; ``enabled: false`` switches a rule off (and a later
entry that does not say so switches it on again).  Loading is linting: the files are read once,
every problem of every file is collected (:class:`~advisor.rules.lint.Problem`, with
file:line:column and a hint) and every rule compiled once.  Problems found here (errors unless
marked *warning*), besides the value checks of :class:`~advisor.rules.lint.ValueLint`:

* the file: not readable, not YAML, YAML tags/aliases/tabs (via :mod:`advisor.io.yamlio`), not a
  ``rules:`` list, more than :data:`~advisor.rules.ruleset.MAX_RULES` rules, a file with no rules
  (*warning*);
* each rule: unknown or duplicated keys (closest known key suggested), a missing or malformed
  id, an id used twice in one file;
* after layering: missing keys (a partial entry whose id no earlier file defines gets the
  closest existing id suggested), ``error_um`` missing for ``add_error``, stray ``error_um``
  (*warning* when a later layer changed the effect), disabling an unknown id (*warning*).

:func:`load_rules` refuses a rule set with any error (:class:`RulesRejected` carries every
error line); warnings do not stop loading.
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path

import yaml

from advisor.catalogue import FeatureSpec
from advisor.errors import RulesError
from advisor.io.bundled import default_rule_files
from advisor.io.yamlio import load_yaml, parse_yaml_text
from advisor.rules.lint import Field, LintReport, Problem, ValueLint, close_match, did_you_mean, sorted_problems
from advisor.rules.ruleset import MAX_RULES, REQUIRED_KEYS, RULE_KEYS, Rule, RuleSet, limit_texts
from advisor.vocabulary import EFFECTS

__all__ = ["load_rules", "lint_files", "lint_texts", "rule_layers", "default_rule_files", "RulesRejected"]

_ID_RE = re.compile(r"[A-Za-z0-9_-]+\Z")
#: The fastest safe composer available (libyaml when installed); it builds nodes, never objects.
_COMPOSER = yaml.CSafeLoader if yaml.__with_libyaml__ else yaml.SafeLoader


def rule_layers(site_files: Iterable[Path | str] = (), extra: Iterable[Path | str] = ()) -> list[tuple[Path, str]]:
    """The ``(file, layer)`` list of a rule set, in layering order.

    The package defaults (layer ``default``), then ``site_files`` (``site``, the files a site
    file lists under ``rules:``), then ``extra`` (``command line``, from ``--rules``).
    """
    files = [(p, "default") for p in default_rule_files()]
    files += [(Path(p), "site") for p in site_files]
    files += [(Path(p), "command line") for p in extra]
    return files


@dataclass
class _Entry:
    """One rule mapping as written in one file."""

    rid: str
    source: str
    layer: str
    line: int
    column: int
    fields: dict[str, Field]


@dataclass
class _Merged:
    """A rule id after layering: the latest field for each key, and every entry that touched it."""

    rid: str
    fields: dict[str, Field] = field(default_factory=dict)
    entries: list[_Entry] = field(default_factory=list)
    enabled: bool = True


#: Target features that are site limits: a message showing one should read it in its condition.
_SITE_LIMITS = ("hf_wind_limit_ms", "high_frequency_min_ghz", "required_surface_rms_um")
#: A number followed by a unit in a message's literal text ("4.0 m/s", "5 °C", "72 h").
_NUMBER_WITH_UNIT = re.compile(
    r"(?<![\w.{])(-?\d+(?:\.\d+)?)\s?(?:m/s|kn|°C/h|°C|degC|km|mm/h|µm|um|GHz|W/m²|W/m2|"
    r"%|h\b|min\b|m\b)"
)


def _number(text: str) -> float:
    match = re.match(r"\s*(-?\d+(?:\.\d+)?(?:[eE][-+]?\d+)?)", text)
    return float(match.group(1)) if match else float("nan")


class _Loader:
    """Reads documents into entries, layers them by id and builds the rule set."""

    def __init__(
        self, catalogue: Mapping[str, FeatureSpec], domains: Mapping[str, tuple[float, float, str]] | None
    ) -> None:
        self.lint = ValueLint(catalogue, domains)
        self.catalogue = catalogue
        self.add = self.lint.add
        self.at_field = self.lint.at_field
        self.merged: dict[str, _Merged] = {}
        self.files: list[str] = []
        self.constructor = yaml.SafeLoader("")

    # documents
    def add_document(self, source: str, layer: str, text: str) -> None:
        self.files.append(source)
        root = yaml.compose(text, Loader=_COMPOSER)  # already vetted by yamlio: this only keeps the nodes
        if root is None:
            self.add("warning", "the file has no rules", source, 1, 1, hint="add 'rules:' and a list of rules")
            return
        if not isinstance(root, yaml.MappingNode):
            self.add(
                "error",
                "expected a mapping with a single key 'rules:'",
                source,
                root.start_mark.line + 1,
                root.start_mark.column + 1,
                hint="start the file with 'rules:' and a list of rules",
            )
            return
        rules_node = None
        for key_node, value_node in root.value:
            if key_node.value == "rules" and rules_node is None:
                rules_node = value_node
            else:
                what = "key 'rules' given twice" if key_node.value == "rules" else f"unknown key '{key_node.value}'"
                self.add(
                    "error",
                    what,
                    source,
                    key_node.start_mark.line + 1,
                    key_node.start_mark.column + 1,
                    hint="a rule file holds only 'rules:' and a list of rules"
                    if key_node.value != "rules"
                    else "keep one 'rules:' list",
                )
        if rules_node is None or (isinstance(rules_node, yaml.ScalarNode) and rules_node.value in ("", "null", "~")):
            self.add(
                "warning",
                "the file has no rules",
                source,
                root.start_mark.line + 1,
                1,
                hint="add a list of rules under 'rules:'",
            )
            return
        if not isinstance(rules_node, yaml.SequenceNode):
            self.add(
                "error",
                "'rules' must be a list",
                source,
                rules_node.start_mark.line + 1,
                rules_node.start_mark.column + 1,
                hint="write each rule as '- id: ...'",
            )
            return
        if not rules_node.value:
            self.add("warning", "the file has no rules", source, rules_node.start_mark.line + 1, 1)
        if len(rules_node.value) > MAX_RULES:
            self.add(
                "error",
                f"{len(rules_node.value)} rules in one file, more than {MAX_RULES}",
                source,
                1,
                1,
                hint="a rule set this large cannot be reviewed; split or generate fewer",
            )
            return
        seen: dict[str, int] = {}
        for item in rules_node.value:
            entry = self.read_entry(item, source, layer, text)
            if entry is None:
                continue
            if entry.rid in seen:
                self.add(
                    "error",
                    f"duplicate rule id '{entry.rid}' in this file (first at line {seen[entry.rid]})",
                    source,
                    entry.line,
                    entry.column,
                    f"rule {entry.rid}",
                    hint="give each rule its own id",
                )
                continue
            seen[entry.rid] = entry.line
            self.lint.check_fields(entry.rid, entry.fields)
            self.merge(entry)

    def read_entry(self, item: yaml.Node, source: str, layer: str, text: str) -> _Entry | None:
        line, column = item.start_mark.line + 1, item.start_mark.column + 1
        if not isinstance(item, yaml.MappingNode):
            self.add(
                "error",
                "each rule must be a mapping with id, applies_to, condition, effect, message",
                source,
                line,
                column,
                hint="write '- id: name' followed by the other keys, indented",
            )
            return None
        fields: dict[str, Field] = {}
        rid_hint = None
        for key_node, value_node in item.value:
            key = key_node.value if isinstance(key_node, yaml.ScalarNode) else None
            if key == "id" and isinstance(value_node, yaml.ScalarNode):
                rid_hint = value_node.value
            kline, kcol = key_node.start_mark.line + 1, key_node.start_mark.column + 1
            where = f"rule {rid_hint or '?'}"
            if key not in RULE_KEYS:
                self.add(
                    "error",
                    f"unknown key '{key if key is not None else '?'}'",
                    source,
                    kline,
                    kcol,
                    where,
                    did_you_mean(key or "", RULE_KEYS, f"the keys are {', '.join(RULE_KEYS)}"),
                )
                continue
            if key in fields:
                self.add(
                    "error",
                    f"key '{key}' given twice in one rule (first at line {fields[key].line})",
                    source,
                    kline,
                    kcol,
                    where,
                    hint="keep one; YAML would silently use the last",
                )
                continue
            value = self.constructor.construct_object(value_node, deep=True)
            fields[key] = Field(key, value, source, layer, key_node, value_node, text)
        if "id" not in fields:
            self.add("error", "rule without an 'id'", source, line, column, hint="add id: some_name")
            return None
        rid = fields["id"].value
        if not isinstance(rid, str) or not _ID_RE.match(rid):
            f = fields["id"]
            line_, col_ = f.at()
            self.add(
                "error",
                f"id {rid!r} must be a word of letters, digits, '_' or '-'",
                source,
                line_,
                col_,
                "rule ?.id",
                hint="e.g. id: frost_on_panels",
            )
            return None
        return _Entry(rid, source, layer, fields["id"].line, fields["id"].key_node.start_mark.column + 1, fields)

    # checks of the values as written
    # layering
    def merge(self, entry: _Entry) -> None:
        rid = entry.rid
        enabled_field = entry.fields.get("enabled")
        exists = rid in self.merged
        if enabled_field is not None and enabled_field.value is False and not exists and len(entry.fields) <= 2:
            self.add(
                "warning",
                f"disables rule '{rid}', which no earlier file defines",
                entry.source,
                *enabled_field.at(),
                f"rule {rid}.enabled",
                did_you_mean(rid, self.merged, "check the id with 'advisor rules show'"),
            )
        merged = self.merged.setdefault(rid, _Merged(rid))
        merged.entries.append(entry)
        merged.fields.update({k: f for k, f in entry.fields.items()})
        # as written in this entry; an entry that does not say is enabled (so it re-enables)
        merged.enabled = (
            enabled_field.value if enabled_field is not None and isinstance(enabled_field.value, bool) else True
        )
        merged.fields.pop("enabled", None)

    def finish(self) -> RuleSet | None:
        rules, disabled = [], []
        for rid, m in self.merged.items():
            last = m.entries[-1]
            if not m.enabled:
                disabled.append((rid, last.source, last.line, last.layer))
                continue
            missing = [k for k in REQUIRED_KEYS if k not in m.fields]
            if missing:
                if len(m.entries) == 1 and len(last.fields) < 4:
                    close = close_match(rid, [r for r in self.merged if r != rid])
                    hint = (
                        f"no earlier file defines '{rid}'"
                        + (f" - did you mean '{close}'?" if close else ";")
                        + " a new rule needs id, applies_to, condition, effect and message"
                    )
                else:
                    hint = "every rule needs id, applies_to, condition, effect and message"
                self.add(
                    "error",
                    f"missing {', '.join(repr(k) for k in missing)}",
                    last.source,
                    last.line,
                    last.column,
                    f"rule {rid}",
                    hint,
                )
                continue
            effect, err = m.fields["effect"], m.fields.get("error_um")
            if effect.value == "add_error" and err is None:
                self.at_field(
                    "error",
                    effect,
                    rid,
                    "effect add_error needs 'error_um' (a number or expression in µm)",
                    "add e.g. error_um: 30",
                )
            elif err is not None and effect.value != "add_error" and effect.value in EFFECTS:
                if _entry_index(m, err) >= _entry_index(m, effect):
                    self.at_field(
                        "error",
                        err,
                        rid,
                        "'error_um' is only used with effect add_error",
                        "remove it, or set effect: add_error",
                        on_key=True,
                    )
                else:
                    self.at_field(
                        "warning",
                        err,
                        rid,
                        f"'error_um' is ignored: a later file set effect "
                        f"{effect.value} ({effect.source}:{effect.line})",
                        "nothing to do if intended",
                        on_key=True,
                    )
                    err = None
            if not all(f.ok for f in m.fields.values()):
                continue
            self.check_message_thresholds(m)
            rules.append(self.build(m, err))
        if any(p.severity == "error" for p in self.lint.problems):
            return None
        return RuleSet(tuple(rules), tuple(self.files), tuple(disabled))

    def check_message_thresholds(self, m: _Merged) -> None:
        """A merged rule's message against its condition: no threshold the condition does not use.

        ``{limit_k}`` beyond the condition's numbers is an error; a site limit named in the message
        but not read by the condition, or a number with a unit written into the message that the
        condition does not contain, is a warning (an override of the condition would leave it stale).
        """
        rid, message, cond = m.rid, m.fields["message"], m.fields["condition"].compiled
        if cond is None or not isinstance(message.value, str):
            return
        text = message.value
        limits = limit_texts(cond)
        for match in re.finditer(r"\{(limit(?:_(\d+))?)[:}]", text):
            k = int(match.group(2) or 1)
            if k > len(limits):
                self.at_field(
                    "error",
                    message,
                    rid,
                    f"'{{{match.group(1)}}}' but the condition has {len(limits)} number(s)",
                    "number the condition's thresholds from {limit}",
                    offset=match.start(),
                )
        read = cond.names
        for match in re.finditer(r"\{([a-z_][a-z0-9_]*)[:}]", text):
            name = match.group(1)
            spec = self.catalogue.get(name)
            if spec is not None and spec.scope == "target" and name in _SITE_LIMITS and name not in read:
                self.at_field(
                    "warning",
                    message,
                    rid,
                    f"the message shows {name}, which the condition does not "
                    "read: it can state a limit the rule no longer uses",
                    "write {limit} for the condition's own threshold",
                    offset=match.start(),
                )
        numbers = {_number(t) for t in limits}
        literal = re.sub(r"\{[^{}]*\}", lambda mt: " " * len(mt.group(0)), text)
        for match in _NUMBER_WITH_UNIT.finditer(literal):
            if float(match.group(1)) not in numbers:
                self.at_field(
                    "warning",
                    message,
                    rid,
                    f"the message says '{match.group(0).strip()}', a number the condition does not contain",
                    "write {limit} (the condition's first number) so the message follows the condition",
                    offset=match.start(),
                )

    def build(self, m: _Merged, err: Field | None) -> Rule:
        f = m.fields
        last = m.entries[-1]
        cond = f["condition"].compiled
        assert cond is not None  # built only when every field checked out
        error_text = None if err is None else str(err.value)
        earlier = tuple((e.source, e.line, e.layer) for e in m.entries[:-1])
        return Rule(
            id=m.rid,
            applies_to=f["applies_to"].value,
            condition_text=cond.source,
            condition=cond,
            effect=f["effect"].value,
            message=f["message"].value,
            error_text=error_text,
            error=None if err is None else err.compiled,
            error_scale=1.0 if err is None else err.scale,
            source=last.source,
            line=last.line,
            layer=last.layer,
            overrides=earlier,
        )


def _entry_index(m: _Merged, f: Field) -> int:
    """Which of a merged rule's entries wrote field ``f``."""
    return next(i for i, e in enumerate(m.entries) if any(x is f for x in e.fields.values()))


def lint_files(
    files: Iterable[tuple[Path | str, str]],
    catalogue: Mapping[str, FeatureSpec],
    domains: Mapping[str, tuple[float, float, str]] | None = None,
) -> LintReport:
    """Lint ``(path, layer)`` rule files layered in order; return every problem and the rule set."""
    linter = _Loader(catalogue, domains)
    for path, layer in files:
        source = str(path)
        try:
            load_yaml(path, RulesError, duplicate_keys=False)  # size, encoding, tabs, tags, aliases, syntax
            text = Path(path).read_text(encoding="utf-8")
        except RulesError as exc:
            linter.files.append(source)
            linter.add("error", exc.message, exc.source or source, exc.line, exc.column, exc.field, exc.hint)
            continue
        except (OSError, UnicodeDecodeError) as exc:  # pragma: no cover - raced with a change on disk
            linter.files.append(source)
            linter.add("error", f"cannot read file: {exc}", source)
            continue
        linter.add_document(source, layer, text)
    ruleset = linter.finish()
    return LintReport(sorted_problems(linter.lint.problems, linter.files), ruleset, tuple(linter.files))


def lint_texts(
    documents: Iterable[tuple[str, str, str]],
    catalogue: Mapping[str, FeatureSpec],
    domains: Mapping[str, tuple[float, float, str]] | None = None,
) -> LintReport:
    """As :func:`lint_files` for ``(text, source name, layer)`` documents already in memory."""
    linter = _Loader(catalogue, domains)
    for text, source, layer in documents:
        try:
            parse_yaml_text(text, source, RulesError, duplicate_keys=False)
        except RulesError as exc:
            linter.files.append(source)
            linter.add("error", exc.message, source, exc.line, exc.column, exc.field, exc.hint)
            continue
        linter.add_document(source, layer, text)
    ruleset = linter.finish()
    return LintReport(sorted_problems(linter.lint.problems, linter.files), ruleset, tuple(linter.files))


class RulesRejected(RulesError):
    """The rule set has lint errors; ``problems`` holds every one (file, line, column, hint)."""

    def __init__(self, problems: Iterable[Problem]) -> None:
        problems = tuple(problems)
        first = problems[0]
        super().__init__(
            first.message, source=first.source, line=first.line, column=first.column, field=first.field, hint=first.hint
        )
        self.problems = problems

    def lines(self) -> list[str]:
        """Each error as one line ``file:line:col: field: message (hint)`` (without a prefix)."""
        return [p.as_error().one_line() for p in self.problems]


def load_rules(files: Sequence[tuple[Path | str, str]], catalogue: Mapping[str, FeatureSpec]) -> RuleSet:
    """Load ``(path, layer)`` files in order, layering by id, and compile the result.

    Raises
    ------
    RulesRejected
        When the lint finds any error in any file (warnings do not stop loading).
    """
    report = lint_files(files, catalogue)
    if not report.ok or report.ruleset is None:
        raise RulesRejected(report.errors)
    return report.ruleset
