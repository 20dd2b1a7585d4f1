"""Every example in docs/rules.md runs and shows what the page says.

Fenced blocks of the page:

* ```` ```yaml file=NAME ```` / ```` ```csv file=NAME ````: files the console examples use;
* ```` ```yaml ```` without a file: a rule file that must lint without any problem over the defaults;
* ```` ```condition ````: ``# with name = value [unit], ...`` then ``CONDITION → true|false|error: words``;
* ```` ```console ````: ``$ advisor ...`` and its output (stdout then stderr) ending in
  ``(exit status N)``; a line ``...`` stands for any lines, ``...`` inside a line for any text.

No physics is checked here: the page documents the language and the commands.
"""

from __future__ import annotations

import math
import re
import shlex
from pathlib import Path

import numpy as np
import pytest

from advisor import units
from advisor.commands.main import main
from advisor.errors import ConditionError
from advisor.features import CATALOGUE
from advisor.rules.condition import compile_condition, evaluate_row
from advisor.rules.loader import default_rule_files, lint_texts

DOC = Path(__file__).resolve().parent.parent / "docs" / "rules.md"
_FENCE = re.compile(r"^```(\w+)([^\n]*)\n(.*?)^```\s*$", re.S | re.M)


def _blocks():
    out = []
    for match in _FENCE.finditer(DOC.read_text(encoding="utf-8")):
        lang, info, body = match.group(1), match.group(2).strip(), match.group(3)
        attrs = dict(part.split("=", 1) for part in info.split() if "=" in part)
        line = DOC.read_text(encoding="utf-8")[: match.start()].count("\n") + 1
        out.append((lang, attrs, body, line))
    return out


BLOCKS = _blocks()
FILES = [(a["file"], body) for lang, a, body, _ in BLOCKS if "file" in a]
RULE_SNIPPETS = [(line, body) for lang, a, body, line in BLOCKS if lang == "yaml" and "file" not in a]
CONSOLE = [(line, body) for lang, a, body, line in BLOCKS if lang == "console"]
CONDITIONS = []
for _lang, _a, _body, _line in BLOCKS:
    if _lang != "condition":
        continue
    _given = {}
    for _k, _text in enumerate(_body.splitlines()):
        if _text.startswith("# with "):
            _given = dict(item.split(" = ", 1) for item in _text[len("# with ") :].split(", "))
        elif _text.strip():
            CONDITIONS.append((_line + 1 + _k, dict(_given), _text))


def test_the_page_has_examples_of_every_kind():
    assert len(FILES) >= 5 and len(RULE_SNIPPETS) >= 1 and len(CONSOLE) >= 6 and len(CONDITIONS) >= 25


@pytest.fixture()
def doc_dir(tmp_path, monkeypatch):
    for name, body in FILES:
        (tmp_path / name).write_text(body, encoding="utf-8")
    monkeypatch.chdir(tmp_path)
    return tmp_path


def _pattern(expected: str) -> re.Pattern:
    parts = []
    for line in expected.splitlines():
        if line == "...":
            parts.append(r"(?:[^\n]*\n)*?")
        else:
            parts.append(".*?".join(re.escape(piece) for piece in line.split("...")) + r"\n")
    return re.compile("".join(parts))


@pytest.mark.parametrize("line, body", CONSOLE, ids=[f"docs/rules.md:{line}" for line, _ in CONSOLE])
def test_console_example(line, body, doc_dir, capsys):
    lines = body.splitlines()
    assert lines[0].startswith("$ advisor "), f"docs/rules.md:{line}: a console block starts with '$ advisor'"
    argv = shlex.split(lines[0][2:])[1:]
    status = main(argv)
    out, err = capsys.readouterr()
    shown = out + err + f"(exit status {status})\n"
    expected = "\n".join(lines[1:]) + "\n"
    assert _pattern(expected).fullmatch(shown), f"docs/rules.md:{line}: output differs:\n{shown}"


@pytest.mark.parametrize("line, body", RULE_SNIPPETS, ids=[f"docs/rules.md:{line}" for line, _ in RULE_SNIPPETS])
def test_rule_snippet_lints_clean(line, body):
    documents = [(p.read_text(encoding="utf-8"), str(p), "default") for p in default_rule_files()]
    report = lint_texts(documents + [(body, f"docs/rules.md:{line}", "site")], CATALOGUE)
    assert report.problems == (), [p.one_line() for p in report.problems]


def _columns(given: dict) -> tuple[dict, dict]:
    columns, row = {}, {}
    for name, spec in CATALOGUE.items():
        columns[name] = np.array([False]) if spec.unit == "flag" else np.array([math.nan])
        row[name] = False if spec.unit == "flag" else math.nan
    for name, text in given.items():
        spec = CATALOGUE[name]
        if text in ("true", "false"):
            value = text == "true"
        elif text == "missing":
            value = math.nan
        else:
            number, _, unit = text.partition(" ")
            value = float(units.convert(float(number), unit or spec.unit, spec.unit))
        columns[name] = np.array([value])
        row[name] = value
    return columns, row


@pytest.mark.parametrize("line, given, text", CONDITIONS, ids=[f"docs/rules.md:{c[0]}" for c in CONDITIONS])
def test_condition_example(line, given, text):
    condition, _, result = text.rpartition("→")
    condition, result = condition.strip(), result.split("#", 1)[0].strip()
    columns, row = _columns(given)
    if result.startswith("error:"):
        with pytest.raises(ConditionError) as info:
            compile_condition(condition, CATALOGUE)
        assert result[len("error:") :].strip() in info.value.one_line(), info.value.one_line()
        return
    assert result in ("true", "false"), f"docs/rules.md:{line}: result must be true, false or error: ..."
    compiled = compile_condition(condition, CATALOGUE)
    assert bool(compiled.evaluate(columns)[0]) is (result == "true")
    assert bool(evaluate_row(compiled.ast, row)) is (result == "true")  # the reference agrees
