"""Every `advisor ...` command shown in README.md runs as pasted (from the checkout's root)."""

from __future__ import annotations

import re
import shlex
from pathlib import Path

import pytest

from advisor.commands.main import main

ROOT = Path(__file__).resolve().parent.parent
DEPLOYMENT_ONLY = ("/etc/advisor/", "/opt/advisor/")  # cron/systemd templates for a real site


def readme_commands() -> list[str]:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    commands = []
    for block in re.findall(r"```[a-z]*\n(.*?)```", text, flags=re.S):
        joined = re.sub(r"\\\n\s*", " ", block)
        for line in joined.splitlines():
            line = line.split("  #")[0].strip()
            is_output = "·" in line  # pasted output starts with "advisor · <site>"
            if line.startswith("advisor ") and not is_output and not any(p in line for p in DEPLOYMENT_ONLY):
                commands.append(line)
    return commands


COMMANDS = readme_commands()


def test_readme_shows_the_everyday_commands():
    shown = " ".join(COMMANDS)
    for sub in (
        "check",
        "reference add",
        "reference list",
        "attempt add",
        "attempt list",
        "outlook",
        "replay",
        "train",
        "model show",
        "rules lint",
        "rules show",
        "rules explain",
        "rules features",
        "demo copy",
        "plan",
    ):
        assert f"advisor {sub}" in shown, sub


@pytest.mark.parametrize("command", COMMANDS)
def test_readme_command_runs(command, monkeypatch, tmp_path, capsys):
    monkeypatch.chdir(ROOT)
    command = command.replace("/tmp/", f"{tmp_path}/")
    argv = shlex.split(command)[1:]
    if ">" in argv:  # shell redirection: keep the command, drop the target
        argv = argv[: argv.index(">")]
    if "--svg" in argv:
        argv[argv.index("--svg") + 1] = str(tmp_path / "picture.svg")
    if argv[:2] == ["model", "show"]:
        assert (
            main(
                ["train", "--history", "example_weather/larch_basin_history.csv", "--out", str(tmp_path / "model.json")]
            )
            == 0
        )
    if argv[:2] == ["attempt", "list"]:
        assert (
            main(
                [
                    "attempt",
                    "add",
                    "--history",
                    str(tmp_path / "attempts.csv"),
                    "--method",
                    "scan",
                    "--feed",
                    "example_weather/larch_basin_mast.csv",
                    "--usable",
                    "yes",
                    "--time",
                    "2026-11-30T03:10:00Z",
                ]
            )
            == 0
        )
    if argv[:2] == ["reference", "list"]:
        main(
            [
                "reference",
                "add",
                "--references",
                str(tmp_path / "refs.csv"),
                "--time",
                "2026-11-30T03:10:00Z",
                "--air-temp-c",
                "-3.2",
            ]
        )
    # "advisor a && advisor b": each in turn, in the same folder
    chain = [argv]
    while "&&" in chain[-1]:
        k = chain[-1].index("&&")
        assert chain[-1][k + 1] == "advisor", command
        chain[-1:] = [chain[-1][:k], chain[-1][k + 2 :]]
    for part in chain:
        status = main(part)
        out, err = capsys.readouterr()
        assert status in (0, 10, 11, 12), (command, err)
        assert "error" not in err.lower(), err


def test_readme_shows_the_real_check_screen(monkeypatch, capsys):
    """The piped `advisor check` output pasted in README.md is what the demo prints today."""
    monkeypatch.chdir(ROOT)
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    pasted = next(b for b in re.findall(r"```\n(.*?)```", text, flags=re.S) if b.startswith("advisor · "))
    assert main(["check"]) == 0
    assert capsys.readouterr().out == pasted


def test_readme_shows_the_real_replay_screen(monkeypatch, capsys):
    """The replay output pasted in README.md (80 columns) is what the demo archive gives today."""
    monkeypatch.chdir(ROOT)
    monkeypatch.setenv("COLUMNS", "80")
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    start = text.index("```\nReplay of ") + len("```\n")
    pasted = text[start : text.index("```", start)]
    argv = [
        "replay",
        "--site",
        "example_weather/larch_basin.yaml",
        "--feed",
        "example_weather/larch_basin_archive_sample.csv",
        "--references",
        "example_weather/larch_basin_archive_references.csv",
        "--from",
        "2026-02-01T00:00:00Z",
        "--to",
        "2026-03-01T00:00:00Z",
    ]
    assert main(argv) == 0
    assert capsys.readouterr().out == pasted
