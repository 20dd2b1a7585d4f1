"""``advisor tick`` when things go wrong: a crashed or refused run never leaves an old "scan"
standing, the state-dir commit is all-or-nothing, and every message about it is true.

Synthetic weather (tests/conftest.py) only sets the verdict (a calm night: scan at 86 GHz).
"""

from __future__ import annotations

import errno
import json
import os
import signal
import subprocess
import sys
from pathlib import Path

import pytest

from advisor.commands import session
from advisor.io import statedir

from .conftest import run_cli
from .test_tick import AT, ROOT, history, make_site, tick_argv


def _snapshot(state: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in sorted(state.iterdir()) if p.is_file()}


def _advisory(state: Path) -> dict:
    return json.loads((state / "advisory.json").read_text())


@pytest.fixture()
def primed(tmp_path, capsys):
    """A state dir whose advisory says scan."""
    site = make_site(tmp_path)
    state = tmp_path / "state"
    status, _, err = run_cli(capsys, *tick_argv(site, state))
    assert status == 0 and _advisory(state)["verdict"] == "scan", err
    return site, state


# --- a run that fails publishes an undetermined advisory ---------------------------------------


def test_an_internal_error_replaces_the_scan_with_an_undetermined_advisory(primed, capsys, monkeypatch):
    site, state = primed

    def crash(request):
        raise ZeroDivisionError("something nobody expected\x1b[2J")

    monkeypatch.setattr(session, "run_check", crash)
    status, out, err = run_cli(capsys, *tick_argv(site, state))
    assert status == 1 and out == ""
    [line] = err.splitlines()
    assert line.startswith("advisor: internal error: ZeroDivisionError: something nobody expected")
    assert "\x1b" not in err
    doc = _advisory(state)
    assert doc["verdict"] == "undetermined" and doc["failed"] is True and doc["exit_status"] == 1
    assert doc["previous_verdict"] == "scan" and doc["site"] == "Larch Basin Observatory (test copy, invented)"
    assert "internal error: ZeroDivisionError: something nobody expected" in doc["reasons"][0]["message"]
    assert all(not c["feasible"] for c in doc["candidates"].values())
    assert "UNDETERMINED" in (state / "advisory.txt").read_text()
    page = (state / "advisory.html").read_text()
    assert "UNDETERMINED" in page and "SCAN NOW" not in page and "\x1b" not in page
    assert json.loads((state / "state.json").read_text())["verdict"] == "undetermined"
    first, second = history(state)
    assert first["verdict"] == "scan" and second["verdict"] == "undetermined" and second["change"] == "verdict"
    assert "ZeroDivisionError" in second["error"]
    # Once the cause is gone, the next run announces the way back.
    monkeypatch.undo()
    status, out, err = run_cli(capsys, *tick_argv(site, state))
    assert status == 0 and out.startswith("advisor tick: verdict changed: UNDETERMINED → SCAN NOW"), out


def test_a_broken_rule_file_replaces_the_scan_and_exits_2(primed, capsys, tmp_path):
    site, state = primed
    rules = tmp_path / "broken.yaml"
    rules.write_text(
        "rules:\n  - id: x\n    applies_to: scan\n    condition: wind_mean_ms >\n    effect: block\n    message: m\n"
    )
    status, out, err = run_cli(capsys, *tick_argv(site, state, "--rules", str(rules)))
    assert status == 2 and out == "" and err.startswith("advisor: error: ") and len(err.splitlines()) == 1
    doc = _advisory(state)
    assert (
        doc["verdict"] == "undetermined" and doc["exit_status"] == 2 and "broken.yaml" in doc["reasons"][0]["message"]
    )


def test_a_site_file_that_cannot_be_read_still_withdraws_the_scan(primed, capsys):
    site, state = primed
    site.write_text("site: [unclosed\n")
    status, out, err = run_cli(capsys, *tick_argv(site, state))
    assert status == 2 and len(err.splitlines()) == 1 and "yaml syntax error" in err.lower()
    doc = _advisory(state)
    assert doc["verdict"] == "undetermined" and doc["site"] is None
    assert "site not read" in (state / "advisory.txt").read_text()


def test_when_even_the_failure_advisory_cannot_be_built_the_old_one_is_withdrawn(primed, capsys, monkeypatch):
    site, state = primed
    from advisor.views import advisory_failed

    monkeypatch.setattr(session, "run_check", lambda request: 1 / 0)
    monkeypatch.setattr(advisory_failed, "failed_advisory", lambda *a, **k: {}["boom"])
    status, out, err = run_cli(capsys, *tick_argv(site, state))
    assert status == 1 and "ZeroDivisionError" in err and len(err.splitlines()) == 1
    assert not any((state / name).exists() for name in ("advisory.json", "advisory.txt", "advisory.html"))


# --- all-or-nothing commit, true messages ------------------------------------------------------


class _FailingReplace:
    """``os.replace`` that fails for chosen (source-name-prefix, destination-name) pairs."""

    def __init__(self, fail_on):
        self.fail_on = fail_on
        self.real = os.replace

    def __call__(self, src, dst, *args, **kwargs):
        for src_prefix, dst_name in self.fail_on:
            if Path(src).name.startswith(src_prefix) and Path(dst).name == dst_name:
                raise OSError(errno.EIO, "Input/output error")
        return self.real(src, dst, *args, **kwargs)


def test_a_rename_failing_mid_commit_puts_every_file_back(primed, capsys, monkeypatch):
    site, state = primed
    before = _snapshot(state)
    monkeypatch.setattr(statedir.os, "replace", _FailingReplace([(".advisory.html.", "advisory.html")]))
    status, out, err = run_cli(capsys, *tick_argv(site, state, "--freq", "300"))
    assert status == statedir.EXIT_STATE_DIR and out == ""
    [line] = err.splitlines()
    assert "advisory.html: cannot rename into place: Input/output error" in line
    assert "every file was put back: the previous advisory is unchanged" in line
    assert _snapshot(state) == before  # advisory.json (renamed first) is back too
    assert len(history(state)) == 1  # no line for an advisory never published
    assert not list(state.glob(".*.tmp")) and not (state / statedir.JOURNAL_FILE).exists()


def test_when_a_file_cannot_be_put_back_the_message_says_so_and_not_unchanged(primed, capsys, monkeypatch):
    site, state = primed
    # advisory.html cannot be renamed in; putting the old advisory.json back fails too (the first
    # rename onto advisory.json, the new one going in, is let through).
    failing = _FailingReplace([(".advisory.html.", "advisory.html"), (".advisory.json.", "advisory.json")])
    calls = {"n": 0}

    def once_through(src, dst, *args, **kwargs):
        if Path(dst).name == "advisory.json" and calls["n"] == 0:
            calls["n"] += 1
            return failing.real(src, dst, *args, **kwargs)
        return failing(src, dst, *args, **kwargs)

    monkeypatch.setattr(statedir.os, "replace", once_through)
    status, out, err = run_cli(capsys, *tick_argv(site, state, "--freq", "300"))
    [line] = err.splitlines()
    assert status == statedir.EXIT_STATE_DIR
    assert "could not put back advisory.json" in line and "may disagree until the next successful run" in line
    assert "unchanged" not in line
    assert len(history(state)) == 1


def test_a_failed_history_append_after_the_renames_undoes_them(primed, capsys, monkeypatch):
    site, state = primed
    before = _snapshot(state)
    from advisor.io import appendfile

    real_write = appendfile.os.write

    def full(fd, data):
        if os.readlink(f"/proc/self/fd/{fd}").endswith("history.jsonl"):
            raise OSError(errno.ENOSPC, "No space left on device")
        return real_write(fd, data)

    monkeypatch.setattr(appendfile.os, "write", full)
    status, out, err = run_cli(capsys, *tick_argv(site, state, "--freq", "300"))
    [line] = err.splitlines()
    assert status == statedir.EXIT_STATE_DIR
    assert "history.jsonl: cannot append to the history: No space left on device" in line
    assert "the previous advisory is unchanged" in line
    assert _snapshot(state) == before


def _env(**extra) -> dict:
    env = dict(os.environ)
    env["PYTHONPATH"] = str(ROOT) + os.pathsep + env.get("PYTHONPATH", "")
    env.pop("ADVISOR_DEBUG", None)
    env.update(extra)
    return env


def test_a_run_killed_between_renames_is_rolled_back_by_the_next_run(primed, capsys):
    site, state = primed
    before = _snapshot(state)
    proc = subprocess.run(
        [sys.executable, "-m", "advisor", *tick_argv(site, state, "--freq", "300")],
        env=_env(**{statedir.TEST_KILL_ENV: "2"}),
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert proc.returncode == -signal.SIGKILL, proc.stderr
    assert (state / statedir.JOURNAL_FILE).exists()
    assert json.loads((state / "advisory.json").read_text())["verdict"] != "scan"  # half published
    with statedir.locked(state, 1.0):
        warnings = statedir.recover(state)
    assert any("rolled back" in w for w in warnings) and not any("except" in w for w in warnings)
    assert _snapshot(state) == before and not list(state.glob(".*.tmp"))
    # A normal run then goes on from the restored state.
    status, out, err = run_cli(capsys, *tick_argv(site, state, "--freq", "300"))
    assert out.startswith("advisor tick: verdict changed: SCAN NOW") and len(history(state)) == 2


def test_a_first_run_killed_mid_publish_leaves_no_half_advisory(tmp_path, capsys):
    site = make_site(tmp_path)
    state = tmp_path / "state"
    proc = subprocess.run(
        [sys.executable, "-m", "advisor", *tick_argv(site, state)],
        env=_env(**{statedir.TEST_KILL_ENV: "1"}),
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert proc.returncode == -signal.SIGKILL
    assert (state / "advisory.json").exists()
    status, out, err = run_cli(capsys, *tick_argv(site, state))
    assert "rolled back" in err and status == 0
    assert out.startswith("advisor tick: first advisory in this state dir")
    assert len(history(state)) == 1


# --- hostile state folders and paths -----------------------------------------------------------


@pytest.mark.parametrize("name", ["state.json", "history.jsonl", statedir.JOURNAL_FILE])
def test_a_fifo_in_the_state_dir_never_blocks(primed, capsys, name):
    site, state = primed
    (state / name).unlink(missing_ok=True)
    os.mkfifo(state / name)
    signal.signal(signal.SIGALRM, _hung)
    signal.alarm(60)
    try:
        status, out, err = run_cli(capsys, *tick_argv(site, state, "--freq", "300"))
    finally:
        signal.alarm(0)
    if name == "history.jsonl":  # nothing can be appended to a pipe: refused, nothing changed
        assert status == statedir.EXIT_STATE_DIR and "named pipe" in err and len(err.splitlines()) == 1
        assert _advisory(state)["verdict"] == "scan"
    else:  # our own file turned into garbage: set aside / ignored, run goes on
        assert status in (10, 11, 12) and _advisory(state)["verdict"] != "scan", err


def _hung(*_):
    raise AssertionError("tick blocked on a pipe")


def test_a_huge_state_file_is_set_aside_without_being_read(primed, capsys):
    site, state = primed
    with open(state / "state.json", "wb") as fh:
        fh.truncate(10 * 1024**3)  # a 10 GB sparse file
    status, out, err = run_cli(capsys, *tick_argv(site, state))
    assert status == 0 and "corrupted or truncated state file" in err and "above the" in err
    assert (state / "state.json").stat().st_size < 10_000


@pytest.mark.parametrize(
    "path, words",
    [
        ("/x" * 3000, "above the system's limit"),
        ("/tmp/" + "n" * 300 + "/state", "a name in the state dir path is 300 bytes long"),
        (
            "/tmp/" + "/".join(["d" * 200] * 20) + "/" + "x" * 35,  # 4,060 bytes: no room for the temp names
            "with the names of the files written in it",
        ),
        ("state\0dir", "nul character"),
    ],
)
def test_impossible_state_dir_paths_are_one_line_exit_2(capsys, tmp_path, path, words):
    site = make_site(tmp_path)
    status, out, err = run_cli(capsys, "tick", "--site", site, "--at", AT, "--state-dir", path)
    assert status == 2 and out == ""
    [line] = err.splitlines()
    assert line.startswith("advisor: error: ") and words in line.lower() and len(line) < 800
