"""``advisor rules``: lint, show, explain and list features — the rule set as the staff's instrument.

    advisor rules lint [FILE ...] [--site SITE.yaml] [--strict]   every problem, file:line:col
    advisor rules show [--site SITE.yaml] [--rules FILE ...] [--for scan|astronomical]
    advisor rules explain [--feed ... --at ... like check]      every rule's value at one instant
    advisor rules features                                       what conditions may name

Output is plain text (one rule per block); on a terminal long lines wrap to its width.
"""

from __future__ import annotations

import argparse
import shutil
import sys
import textwrap
from pathlib import Path

import numpy as np

from advisor.commands import session
from advisor.features import CATALOGUE, FEATURES
from advisor.fmt import freq_wave_text
from advisor.io.site import Site, load_site
from advisor.rules.condition import (
    Call,
    Compare,
    Convert,
    Name,
    Node,
    Number,
    Unary,
    condition_parts,
    evaluate_row,
    names_in,
)
from advisor.rules.loader import default_rule_files, lint_files
from advisor.rules.ruleset import RuleSet
from advisor.text import clean_text
from advisor.vocabulary import DEMO_BANNER, METHODS, VERDICT

#: How a unit of the catalogue is shown next to a number.
_SHOWN_UNIT = {"degC": "°C", "delta_degC": "°C", "deg": "°", "um": "µm", "1": "", "%": "%", "degC/h": "°C/h"}


# --------------------------------------------------------------------------- helpers


def _display_path(path: Path | str) -> str:
    """A path relative to the working directory when it lies below it, else as given."""
    p = Path(path)
    if p.is_absolute():
        try:
            return str(p.relative_to(Path.cwd()))
        except ValueError:
            return str(p)
    return str(p)


def rule_files(site: Site, extra: list[str] | None) -> list[tuple[Path, str]]:
    """The layered ``(file, layer)`` list of :func:`advisor.commands.session.rule_files`, files shown
    relative to the working directory where they lie below it (as lint reports them)."""
    return [
        (Path(_display_path(p)) if layer != "command line" else p, layer)
        for p, layer in session.rule_files(site, extra)
    ]


class _Out:
    """Lines to stdout, wrapped to the terminal's width only when stdout is a terminal."""

    def __init__(self) -> None:
        tty = sys.stdout.isatty()
        self.width = shutil.get_terminal_size((100, 24)).columns if tty else None

    def line(self, text: str = "", indent: int | None = None) -> None:
        text = clean_text(text, keep_tabs=True)  # ids, paths and messages come from files
        if self.width is None or len(text) <= self.width:
            print(text)
            return
        lead = len(text) - len(text.lstrip(" "))
        wrapped = textwrap.wrap(
            text.strip(),
            width=max(20, self.width - lead),
            break_on_hyphens=False,
            subsequent_indent=" " * ((indent if indent is not None else lead + 4) - lead),
        )
        for piece in wrapped:
            print(" " * lead + piece)


def _unit(unit: str | None) -> str:
    if unit is None:
        return ""
    shown = _SHOWN_UNIT.get(unit, unit)
    return "" if not shown else (shown if shown in ("°",) else f" {shown}")


def _number(value) -> str:
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else "no"
    if value is None:
        return "missing"
    value = float(value)
    if value != value:
        return "missing"
    if not np.isfinite(value):
        return "inf" if value > 0 else "-inf"
    if abs(value) >= 100 or value == int(value):
        return f"{value:.0f}" if abs(value) < 1e7 else f"{value:.3g}"
    return f"{value:.2f}".rstrip("0").rstrip(".") if abs(value) >= 0.01 else f"{value:.3g}"


def _unit_of(node: Node) -> str | None:
    """The unit a checked sub-tree's value is in (for display), if the tree says."""
    stack = [node]
    while stack:
        n = stack.pop(0)
        if isinstance(n, Convert):
            return n.to_unit
        if isinstance(n, (Name, Number)) and getattr(n, "unit", None):
            return n.unit
        for attr in ("operand", "left", "right"):
            if hasattr(n, attr):
                stack.append(getattr(n, attr))
        if isinstance(n, Call) and n.func in ("abs", "min", "max"):
            stack.extend(n.args)
    return None


def _quantity(value, unit: str | None) -> str:
    """A number with its unit for display; ``missing`` (no unit) for NaN."""
    text = _number(value)
    return text if text == "missing" else text + _unit(unit)


def _flag_text(value: bool) -> str:
    return "true" if value else "false"


def _part_numbers(part: Node, row: dict) -> str:
    """The numbers behind one part of a condition, e.g. ``3.8 °C < 2 °C`` or ``fog = no``."""
    inner = part.operand if isinstance(part, Unary) else part
    if isinstance(inner, Compare) and len(inner.ops) == 1:
        left, right = inner.operands
        unit = _unit_of(left) or _unit_of(right)  # both sides are in one unit after checking
        return f"{_quantity(evaluate_row(left, row), unit)} {inner.ops[0]} {_quantity(evaluate_row(right, row), unit)}"
    if isinstance(inner, Name):
        return f"{inner.name} = {_number(row.get(inner.name))}"
    if isinstance(inner, Call) and inner.func == "missing":
        return ", ".join(f"{n} = {_number(row.get(n))}" for n in sorted(names_in(inner.args[0])))
    return ""


def _place(source: str, layer: str, site: Site | None) -> str:
    """Where a rule file is, as a person finds it: ``default rules: wind.yaml`` (in the package),
    ``site rules: extra.yaml`` (beside the site file), else relative to the working folder."""
    path = Path(source)
    defaults = default_rule_files()
    bases = [("default rules", defaults[0].parent)] if defaults else []
    if site is not None and site.source and not site.source.startswith("<"):
        bases.append(("site rules", Path(site.source).resolve().parent))
    for word, base in bases:
        if layer in word:
            try:
                return f"{word}: {path.resolve().relative_to(base.resolve())}"
            except ValueError:
                pass
    return f"{layer} {_display_path(path)}"


def _where(rule, site: Site | None = None) -> str:
    line = f":{rule.line}" if rule.line else ""
    return f"{_place(rule.source, rule.layer, site)}{line}"


def _effect(rule) -> str:
    if rule.effect == "add_error" and rule.error_text is not None:
        return f"add_error {rule.error_text} µm" if rule.error_scale == 1.0 else f"add_error {rule.error_text}"
    return rule.effect


# --------------------------------------------------------------------------- commands


def cmd_lint(args: argparse.Namespace) -> int:
    """Lint the defaults, the site's files and FILE... layered in that order."""
    site = load_site(session.site_location(args.site)[0])
    files = rule_files(site, None)
    known = {Path(p).resolve() for p, _ in files}
    for name in args.files:
        if Path(name).resolve() in known:
            continue  # already linted as a default or site file
        known.add(Path(name).resolve())
        files.append((Path(name), "command line"))
    report = lint_files(files, CATALOGUE)
    for problem in report.problems:
        print(problem.one_line())
    n_err, n_warn = len(report.errors), len(report.warnings)
    if report.ruleset is not None:
        layers: dict[str, int] = {}
        for rule in report.ruleset:
            layers[rule.layer] = layers.get(rule.layer, 0) + 1
        split = ", ".join(f"{n} {layer}" for layer, n in layers.items())
        disabled = f", {len(report.ruleset.disabled)} disabled" if report.ruleset.disabled else ""
        status = "ok" if not n_warn else f"{n_warn} warning{'s' * (n_warn != 1)}"
        print(f"{status}: {len(report.ruleset)} rules in effect ({split}{disabled}) from {len(report.files)} files")
    else:
        parts = [f"{n_err} error{'s' * (n_err != 1)}"] + ([f"{n_warn} warning{'s' * (n_warn != 1)}"] if n_warn else [])
        bad = len({p.source for p in report.errors})
        print(f"{', '.join(parts)} in {bad} of {len(report.files)} files: the rule set would be refused")
    if n_err or (args.strict and n_warn):
        return 2
    return 0


def _load(args: argparse.Namespace) -> tuple[Site, RuleSet]:
    request = session.request_from(args)
    site = load_site(request.site_path)
    return site, session.load_ruleset(site, request.rule_files)


def cmd_show(args: argparse.Namespace) -> int:
    """The effective rule table after layering."""
    site, ruleset = _load(args)
    out = _Out()
    rules = [r for r in ruleset if args.method is None or r.applies(args.method)]
    scope = f" for {args.method}" if args.method else ""
    layers: dict[str, int] = {}
    for rule in rules:
        layers[rule.layer] = layers.get(rule.layer, 0) + 1
    split = ", ".join(f"{n} {layer}" for layer, n in layers.items()) or "none"
    out.line(f"{len(rules)} rules in effect{scope} ({split})")
    for rule in rules:
        out.line("")
        out.line(f"{rule.id}  [{rule.applies_to} · {_effect(rule)}]")
        out.line(f"    when {rule.condition_text}", indent=9)
        out.line(f"    from {_where(rule, site)}", indent=9)
        for source, line, layer in rule.overrides:
            out.line(f"    overrides {_place(source, layer, site)}" + (f":{line}" if line else ""))
    if ruleset.disabled:
        out.line("")
        out.line("disabled:")
        for rid, source, line, layer in ruleset.disabled:
            out.line(f"  {rid}  by {_place(source, layer, site)}" + (f":{line}" if line else ""))
    return 0


def cmd_explain(args: argparse.Namespace) -> int:
    """Every rule's condition at one instant, with the numbers behind it.

    Which rules fired and the error terms they added come from the evaluation itself (the
    decisions ``check`` makes); the condition tree only supplies the numbers behind each part.
    """
    result = session.run_check(session.request_from(args))
    call, decisions = result.call, result.decisions
    fired_of, error_of = decisions.rule_eval.fired, decisions.rule_eval.error_um
    row = {k: v for k, v in call.features.items()}
    columns = {name: np.asarray([row[name]]) for name in CATALOGUE if name in row}
    out = _Out()
    when = call.time_utc.strftime("%Y-%m-%d %H:%M UTC")
    out.line(f"rules at {when} · {result.ctx.site_name} · {freq_wave_text(call.freq_ghz)}")
    out.line(f"verdict: {VERDICT[call.verdict].label} — {call.headline}")
    if result.inputs.is_demo:
        out.line(DEMO_BANNER)
    unknown_of = decisions.rule_eval.unknown
    evaluated = [(rule, bool(fired_of[rule.id][0])) for rule in decisions.rules]
    undecided = {rule.id for rule, _ in evaluated if rule.id in unknown_of and unknown_of[rule.id][0]}
    n_fired = sum(f for _, f in evaluated)
    split = f"{n_fired} true, {len(evaluated) - n_fired - len(undecided)} false"
    if undecided:
        split += f", {len(undecided)} unknown"
    out.line(f"{len(evaluated)} rules: {split} (true ones first)")
    for rule, fired in sorted(evaluated, key=lambda rf: (not rf[1], rf[0].id not in undecided)):
        out.line("")
        mark = "TRUE " if fired else ("?    " if rule.id in undecided else "false")
        out.line(f"{mark}  {rule.id}  [{rule.applies_to} · {rule.effect}]")
        if rule.id in undecided:
            needs = ", ".join(sorted(rule.condition.needs_inputs))
            out.line(
                f"       unknown: it needs {needs}, not seen at this time; it neither fired nor cleared", indent=12
            )
        out.line(f"       from {_where(rule, result.inputs.site)}", indent=12)
        out.line(f"       when {rule.condition_text}", indent=12)
        for part in condition_parts(rule.condition.ast, keep_not=True):
            text = " ".join(part.text_in(rule.condition.source).split())
            value = _flag_text(bool(evaluate_row(part, row)))
            numbers = _part_numbers(part, row)
            out.line(f"         {text}: {value}" + (f"  ({numbers})" if numbers else ""), indent=13)
        used = set(rule.condition.names)
        if rule.error is not None:
            if fired:  # the term the decision added
                term = float(error_of[rule.id][0])
            else:  # what the term would be: the decision added nothing
                term = float(rule.error.evaluate(columns, length=1)[0]) * rule.error_scale
            state = "added" if fired else "not added"
            shown = (
                f"{_number(term)} µm" if rule.error_text == _number(term) else f"{rule.error_text} = {_number(term)} µm"
            )
            out.line(f"       error term: {shown} ({state})", indent=12)
            used |= rule.error.names
        unexplained = used - _shown_in_parts(rule.condition.ast)
        if unexplained:
            out.line(
                "       values: "
                + ", ".join(f"{n} = {_quantity(row.get(n), _catalogue_unit(n))}" for n in sorted(used)),
                indent=15,
            )
        if fired:
            out.line(f"       says: {rule.message_for(row)}", indent=13)
    return 0


def _shown_in_parts(ast: Node) -> set[str]:
    """Features whose value a part's numbers already show (flags, feature-vs-constant comparisons)."""
    shown = set()
    for part in condition_parts(ast, keep_not=True):
        inner = part.operand if isinstance(part, Unary) else part
        if isinstance(inner, Name):
            shown.add(inner.name)
        elif isinstance(inner, Compare) and len(inner.ops) == 1:
            names = [names_in(side) for side in inner.operands]
            for side, other in ((0, 1), (1, 0)):
                operand = inner.operands[side]
                if isinstance(operand, Name) and not names[other]:
                    shown.add(operand.name)
    return shown


def _catalogue_unit(name: str) -> str | None:
    spec = CATALOGUE.get(name)
    return None if spec is None or spec.unit == "flag" else spec.unit


def cmd_features(args: argparse.Namespace) -> int:
    """Every feature a condition or message may name, from the FEATURES catalogue."""
    out = _Out()
    width = max(len(f.name) for f in FEATURES)
    unit_width = max(len(f.unit) for f in FEATURES)
    out.line(f"{len(FEATURES)} features a condition or a message may use (name, unit, meaning):")
    for spec in FEATURES:
        out.line(f"  {spec.name:<{width}}  {spec.unit:<{unit_width}}  {spec.meaning}", indent=width + unit_width + 6)
    out.line(
        "Messages may also name: calibrator_name (text), and {limit}, {limit_2}, ... - the condition's own "
        "numbers as written, so a message never shows a threshold the condition no longer uses."
    )
    out.line(
        "A number written with a unit converts into the feature's unit (wind_gust_ms > 16 kn); "
        "a bare number is in the feature's unit. See docs/rules.md."
    )
    return 0


# --------------------------------------------------------------------------- registration


def add_parser(sub, name: str, help: str) -> None:
    """Register ``advisor rules`` and its actions."""
    rules = sub.add_parser(
        name,
        help=help,
        description="The YAML rule set: check it, see what is in effect, see why it "
        "fired, and list what conditions may use. Syntax: docs/rules.md.",
    )
    actions = rules.add_subparsers(dest="rules_action", metavar="ACTION")

    lint = actions.add_parser(
        "lint",
        help="check rule files and report every problem",
        description="Check the default rules, the site's rule files and FILE... "
        "(layered in that order) and report every problem as "
        "file:line:column. Exit 0 when clean, 2 on errors (or on "
        "warnings with --strict).",
    )
    lint.add_argument("files", nargs="*", metavar="FILE", help="rule files layered over the defaults and the site's")
    lint.add_argument(
        "--site",
        metavar="SITE.yaml",
        help="site file whose rule files are linted too (default: the bundled invented demo site)",
    )
    lint.add_argument("--strict", action="store_true", help="treat warnings as errors (exit 2)")
    lint.set_defaults(func=cmd_lint)

    show = actions.add_parser(
        "show",
        help="the effective rule table after layering",
        description="Print every rule in effect: id, applies to, effect, condition, "
        "and the file and layer it came from.",
    )
    show.add_argument("--site", metavar="SITE.yaml", help=session.SITE_HELP)
    show.add_argument(
        "--rules",
        metavar="FILE.yaml",
        nargs="+",
        action="extend",
        help="extra rule files layered over the defaults and the site's",
    )
    show.add_argument("--for", dest="method", choices=METHODS, help="only the rules that apply to this method")
    show.set_defaults(func=cmd_show)

    explain = actions.add_parser(
        "explain",
        help="every rule's condition at one instant, with its numbers",
        description="Evaluate the feed at one instant (options as for check) and "
        "show every rule: its condition's value and the numbers behind it.",
    )
    session.add_evaluation_options(explain)
    explain.set_defaults(func=cmd_explain)

    features = actions.add_parser(
        "features",
        help="the feature names conditions may use",
        description="List every feature a condition or message may name, with its unit and meaning.",
    )
    features.set_defaults(func=cmd_features)

    rules.set_defaults(func=lambda a: session.missing_action(rules))


__all__ = ["add_parser", "rule_files", "cmd_lint", "cmd_show", "cmd_explain", "cmd_features"]
