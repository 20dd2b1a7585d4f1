"""The command layer's shape and its shared options: no command imports another, one parser per
run, and time options read the same everywhere with the right option named in errors.

No physics is checked here.
"""

from __future__ import annotations

import argparse
import ast
import json
import os
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest

from advisor.commands import session
from advisor.commands.main import COMMANDS, build_parser
from advisor.errors import UsageError

from .conftest import run_cli, weather_table

ROOT = Path(__file__).resolve().parent.parent
COMMANDS_DIR = ROOT / "advisor" / "commands"
#: Modules of advisor/commands that are not commands: the top parser and what lies beneath the commands.
SHARED = {"main", "session", "options", "helpformat", "__init__"}
BENEATH = {"session", "options", "helpformat"}


def _imported_command_modules(path: Path) -> set[str]:
    """The advisor.commands submodules a file imports (module level or inside functions)."""
    found = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            names = [alias.name for alias in node.names]
        elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
            names = [node.module] + [f"{node.module}.{alias.name}" for alias in node.names]
        elif isinstance(node, ast.ImportFrom):  # relative: from . import x / from .x import y
            base = "advisor.commands" + ("." + node.module if node.module else "")
            names = [base] + [f"{base}.{alias.name}" for alias in node.names]
        else:
            continue
        for name in names:
            parts = name.split(".")
            if parts[:2] == ["advisor", "commands"] and len(parts) >= 3 and (COMMANDS_DIR / f"{parts[2]}.py").exists():
                found.add(parts[2])
    return found


MODULES = sorted(p.stem for p in COMMANDS_DIR.glob("*.py"))


@pytest.mark.parametrize("module", MODULES)
def test_no_command_module_imports_another(module):
    """Commands import only what lies beneath them; main reaches commands only through its table."""
    imported = _imported_command_modules(COMMANDS_DIR / f"{module}.py") - {module}
    if module in BENEATH:
        allowed = BENEATH - {"session"} if module == "helpformat" else BENEATH
    elif module == "main":
        allowed = {"helpformat"}
    elif module == "__init__":
        allowed = set()
    else:
        allowed = BENEATH
    assert imported <= allowed, f"advisor/commands/{module}.py imports {sorted(imported - allowed)}"


def test_the_import_checker_sees_function_local_imports(tmp_path):
    """The check above is able to fail: a command importing another inside a function is found."""
    bad = tmp_path / "bad.py"
    bad.write_text("def f():\n    from advisor.commands.main import main\n    from advisor.commands import outlook\n")
    assert _imported_command_modules(bad) == {"main", "outlook"}


def _subparsers(parser: argparse.ArgumentParser) -> dict[str, argparse.ArgumentParser]:
    return next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction)).choices


def test_every_command_module_in_the_table_registers_its_commands():
    commands_in_folder = {m for m in MODULES if m not in SHARED}
    assert {c.module for c in COMMANDS} == commands_in_folder
    for command in COMMANDS:
        built = _subparsers(build_parser(command.name))
        assert built[command.name].get_default("func") is not None, command.name
        others = [name for name, p in built.items() if name != command.name]
        assert all(built[name].get_default("func") is None for name in others)  # listed, not built


def test_help_lists_every_command_with_its_line(capsys):
    with pytest.raises(SystemExit) as exit_:
        build_parser().parse_args(["--help"])
    assert exit_.value.code == 0
    out = " ".join(capsys.readouterr().out.split())
    for command in COMMANDS:
        assert f"{command.name} {' '.join(command.help.split())}" in out


def test_check_builds_only_its_parser_and_loads_no_other_command():
    """``check`` stays light: no replay or training code, no other command's module.

    (The outlook's computation is loaded: check reads the site's forecast for the next window.)"""
    code = (
        "import sys, io, contextlib\n"
        "from advisor.commands.main import main\n"
        "with contextlib.redirect_stdout(io.StringIO()):\n"
        "    status = main(['check', '--json'])\n"
        "loaded = sorted(m for m in sys.modules if m.startswith('advisor.'))\n"
        "print('\\n'.join(loaded))\n"
    )
    env = {**os.environ, "PYTHONPATH": str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", "")}
    proc = subprocess.run(
        [sys.executable, "-c", code], check=False, capture_output=True, text=True, cwd=ROOT, env=env, timeout=120
    )
    assert proc.returncode == 0, proc.stderr
    loaded = set(proc.stdout.split())
    assert "advisor.commands.check" in loaded
    others = {f"advisor.commands.{c.module}" for c in COMMANDS if c.name != "check"}
    assert not loaded & others
    assert not loaded & {
        "advisor.evaluation.replay",
        "advisor.model.training",
        "advisor.evaluation.tick",
        "advisor.evaluation.plan",
    }


def test_python_dash_m_advisor_lists_the_commands():
    env = {**os.environ, "PYTHONPATH": str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", "")}
    proc = subprocess.run(
        [sys.executable, "-m", "advisor", "--help"],
        check=False,
        capture_output=True,
        text=True,
        cwd=ROOT,
        env=env,
        timeout=120,
    )
    assert proc.returncode == 0
    assert all(c.name in proc.stdout for c in COMMANDS)


# --------------------------------------------------------------------------- time options


@pytest.mark.parametrize(
    "argv, field",
    [
        (["replay", "--feed", "archive.csv", "--from", "yesterday-ish"], "--from"),
        (["replay", "--feed", "archive.csv", "--to", "later"], "--to"),
        (["outlook", "--from", "soon"], "--from"),
        (["check", "--at", "whenever"], "--at"),
        (["rules", "explain", "--at", "whenever"], "--at"),
        (["reference", "list", "--at", "whenever"], "--at"),
    ],
)
def test_a_bad_time_names_the_option_it_came_from(capsys, argv, field):
    status, out, err = run_cli(capsys, *argv)
    assert status == 2 and out == ""
    assert err.startswith(f"advisor: error: {field}: cannot read time"), err
    assert "today" in err and "yesterday" in err  # the hint says what is accepted


def test_day_words_are_midnight_in_the_site_time_zone():
    # 2026-03-10 03:00 UTC is 21:00 on the 9th in Denver (MDT since the 8th at 02:00 local).
    now = pd.Timestamp("2026-03-10T03:00:00Z")
    today = session.parse_time("today", "--at").resolve("America/Denver", now_utc=now)
    yesterday = session.parse_time("Yesterday", "--from").resolve("America/Denver", now_utc=now)
    assert today == pd.Timestamp("2026-03-09T06:00:00Z")  # 00:00 MDT = 06:00 UTC
    assert yesterday == pd.Timestamp("2026-03-08T07:00:00Z")  # 00:00 MST, before the change
    assert session.parse_time("yesterday", "--to").resolve(None, now_utc=now) == pd.Timestamp("2026-03-09T00:00Z")
    assert session.parse_time("2026-01-15T09:00:00+01:00", "--at").resolve("Asia/Tokyo") == pd.Timestamp(
        "2026-01-15T08:00:00Z"
    )
    with pytest.raises(UsageError) as exc:
        session.parse_time("2026-01-15T09:00", "--to")
    assert exc.value.field == "--to"


def _midnights(days_back: int) -> set[pd.Timestamp]:
    """Site-time midnight ``days_back`` days ago, read twice (the test may straddle a midnight)."""
    option = session.parse_time("today", "--at")
    option = session.TimeOption(option.field, option.text, days_back=days_back)
    return {option.resolve("America/Denver") for _ in range(2)}


def test_replay_from_yesterday_starts_at_the_site_midnight(capsys, tmp_path):
    """The reported bug: ``replay --from yesterday`` is read, as 00:00 yesterday at the (demo) site."""
    end = pd.Timestamp.now(tz="UTC").floor("10min")
    feed = tmp_path / "archive.csv"
    weather_table(end=end, hours=60, step_min=10).to_csv(feed, index=False)
    before = _midnights(1)
    status, out, err = run_cli(capsys, "replay", "--feed", feed, "--from", "yesterday", "--json", "--no-cache")
    after = _midnights(1)
    assert status == 0, err
    first = pd.Timestamp(json.loads(out)["from_utc"])
    # The archive has a row every 10 minutes; Denver's midnight falls on one of them.
    assert first in before | after
    status, out, err = run_cli(
        capsys, "replay", "--feed", feed, "--from", "yesterday", "--to", "today", "--json", "--no-cache"
    )
    assert status == 0, err
    summary = json.loads(out)
    assert pd.Timestamp(summary["to_utc"]) in {t for t in _midnights(0)}
    assert summary["rows"] in (24 * 6 + 1, 23 * 6 + 1, 25 * 6 + 1)  # a day, or a DST day, of 10-min rows


def test_check_at_today_is_the_same_as_the_written_midnight(capsys, tmp_path):
    feed = tmp_path / "feed.csv"
    midnight = min(_midnights(0))
    weather_table(end=midnight, hours=2).to_csv(feed, index=False)
    status, out, err = run_cli(capsys, "check", "--feed", feed, "--at", "today", "--json")
    if min(_midnights(0)) != midnight:  # the day changed while the test ran
        pytest.skip("crossed a midnight in America/Denver")
    assert status in (0, 10, 11, 12), err
    assert pd.Timestamp(json.loads(out)["time_utc"]) == midnight


# --------------------------------------------------------------------------- rules explain


def test_rules_explain_reports_what_the_evaluation_decided(capsys, tmp_path, monkeypatch):
    """Fired or not and the added error terms come from the decisions, not from a second evaluation."""
    from dataclasses import replace

    import numpy as np

    feed = tmp_path / "feed.csv"
    weather_table().to_csv(feed, index=False)
    argv = ["rules", "explain", "--feed", feed, "--at", "2026-01-16T04:00:00Z"]
    real = session.run_check
    chosen = {}

    def marked(request):
        """The real result, with one rule that did not fire marked as fired by the evaluation."""
        result = real(request)
        rule_eval = result.decisions.rule_eval
        rule = next(r for r in result.decisions.rules if r.error is not None and not rule_eval.fired[r.id][0])
        chosen["id"] = rule.id
        fired = {**rule_eval.fired, rule.id: np.array([True])}
        error_um = {**rule_eval.error_um, rule.id: np.array([7.0])}
        decisions = replace(result.decisions, rule_eval=replace(rule_eval, fired=fired, error_um=error_um))
        return replace(result, decisions=decisions)

    status, plain, _ = run_cli(capsys, *argv)
    assert status == 0
    monkeypatch.setattr(session, "run_check", marked)
    status, out, _ = run_cli(capsys, *argv)
    assert status == 0
    block = next(b for b in out.split("\n\n") if b.split()[1] == chosen["id"])
    assert block.startswith("TRUE ")
    assert "7 µm (added)" in block
    before = next(b for b in plain.split("\n\n") if b.split()[1] == chosen["id"])
    assert before.startswith("false") and "(not added)" in before


@pytest.mark.parametrize("command", [["check"], ["outlook"], ["rules", "explain"]])
def test_every_evaluating_command_refuses_observations_after_now(capsys, command):
    """One default evaluation time: without --at, a feed observed into the future is refused alike."""
    feed = ROOT / "tests" / "bad_inputs" / "feed_in_the_future.csv"
    status, out, err = run_cli(capsys, *command, "--feed", feed)
    assert status == 2 and out == ""
    assert err.startswith("advisor: error: ") and "after the current time" in err and str(feed) in err
