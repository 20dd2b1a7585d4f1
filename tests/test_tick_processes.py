"""``advisor tick`` as real processes: 20 at once, killed mid-write, read-only and full folders.

Tests run as root, so "read-only" is made by means that stop root too: a read-only bind mount
in a private mount namespace (``unshare -m``) and the immutable attribute (``chattr +i``);
each is skipped where the machine does not allow it.  "Full" is a file-size limit
(``RLIMIT_FSIZE``) on the tick process: its writes really fail (EFBIG) part-way, as on a full
disk.  Synthetic weather from tests/conftest.py only sets the verdict.
"""

from __future__ import annotations

import json
import os
import resource
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from advisor.commands.main import main
from advisor.io.statedir import EXIT_STATE_DIR

from .test_tick import ROOT, history, make_site, tick_argv

CHECK_CODES = {0, 10, 11, 12}


def _env(**extra) -> dict:
    env = dict(os.environ)
    env["PYTHONPATH"] = str(ROOT) + os.pathsep + env.get("PYTHONPATH", "")
    env.pop("ADVISOR_DEBUG", None)
    env.update(extra)
    return env


def _cmd(site, state, *extra) -> list[str]:
    return [sys.executable, "-m", "advisor", *tick_argv(site, state, *extra)]


def _snapshot(state: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in sorted(state.iterdir())}


@pytest.fixture()
def primed(tmp_path, capsys):
    """A state dir after one successful tick (scan at 86 GHz)."""
    site = make_site(tmp_path)
    state = tmp_path / "state"
    assert main(tick_argv(site, state)) == 0
    capsys.readouterr()
    return site, state


# Forks ``n`` children from one Python that has already imported advisor; each child is a
# separate process running the real ``advisor tick`` entry point (its own lock, temp files,
# renames), with its stdout and stderr in files.  Forking skips 20 cold imports of pandas
# (about 0.7 s of CPU each here), which would make the test slow without testing anything more.
FORKER = """
import json, os, sys
from advisor.commands.main import main
import advisor.commands.tick, advisor.evaluation.advisory, advisor.io.statedir, advisor.io.notify
import advisor.views.advisory, advisor.views.jsondoc, advisor.views.panel, advisor.views.plain, rich.console
jobs, outdir = json.loads(sys.argv[1]), sys.argv[2]
pids = []
for i, argv in enumerate(jobs):
    pid = os.fork()
    if pid == 0:
        status = 70
        try:
            for fd, name in ((1, "out"), (2, "err")):
                os.dup2(os.open(os.path.join(outdir, f"{i}.{name}"), os.O_WRONLY | os.O_CREAT, 0o644), fd)
            status = main(argv)
            sys.stdout.flush()
            sys.stderr.flush()
        finally:
            os._exit(status)
    pids.append(pid)
result = []
for i, pid in enumerate(pids):
    _, status = os.waitpid(pid, 0)
    result.append({"job": i, "pid": pid, "status": os.waitstatus_to_exitcode(status)})
print(json.dumps(result))
"""


def test_twenty_concurrent_ticks_serialise_cleanly(tmp_path):
    # every change announced at once: this test is about the lock, not about confirming a new call
    site = make_site(tmp_path, tick="tick:\n  confirm_ticks: 1\n  confirm_min: 0\n")
    state = tmp_path / "state"
    outdir = tmp_path / "out"
    outdir.mkdir()
    # alternate verdicts (scan at 86 GHz, not at 300 GHz), so the advisory keeps changing
    jobs = [tick_argv(site, state, "--freq", "86" if i % 2 else "300", "--lock-wait", "60") for i in range(20)]
    proc = subprocess.Popen(
        [sys.executable, "-c", FORKER, json.dumps(jobs), str(outdir)],
        env=_env(),
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    reads, bad = 0, []
    while proc.poll() is None:  # meanwhile, a reader (a status page) keeps reading the advisory
        time.sleep(0.002)
        try:
            text = (state / "advisory.json").read_text()
        except FileNotFoundError:
            continue
        try:
            json.loads(text)
            reads += 1
        except ValueError as exc:
            bad.append(f"{exc}: {text[:80]!r}")
    out, err = proc.communicate(timeout=60)
    assert proc.returncode == 0, err
    assert not bad, bad[:3]
    assert reads > 0
    results = json.loads(out)
    assert len({r["pid"] for r in results}) == 20
    printed = {r["pid"]: (outdir / f"{r['job']}.out").read_text() for r in results}
    failures = [(r, (outdir / f"{r['job']}.err").read_text()) for r in results if r["status"] not in CHECK_CODES]
    assert not failures
    lines = (state / "history.jsonl").read_text().splitlines()
    records = [json.loads(line) for line in lines]  # every line whole: nothing interleaved
    assert sorted(r["pid"] for r in records) == sorted(printed)  # exactly one line per completed run
    written = [r["written_utc"] for r in records]  # the machine's clock (issued_utc is --at's)
    assert written == sorted(written) and len(set(written)) == 20  # one run at a time, in lock order
    for r in records:  # a run printed exactly when it recorded a change
        assert bool(printed[r["pid"]]) == (r["change"] is not None)
    assert sum(r["change"] is not None for r in records) >= 2
    doc = json.loads((state / "advisory.json").read_text())
    st = json.loads((state / "state.json").read_text())
    assert doc["issued_utc"] == st["issued_utc"] == records[-1]["issued_utc"]
    assert doc["verdict"] == records[-1]["verdict"]
    assert doc["issued_utc"] in (state / "advisory.html").read_text()
    assert not list(state.glob(".*.tmp"))


def test_sigkill_between_write_and_rename_leaves_previous_advisory_intact(primed, capsys):
    site, state = primed
    before = _snapshot(state)
    proc = subprocess.Popen(
        _cmd(site, state, "--freq", "300"),
        env=_env(ADVISOR_TICK_TEST_PAUSE_S="30"),
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    line = proc.stderr.readline()  # blocks until the run has staged every file
    assert "test hook" in line, line
    proc.send_signal(signal.SIGKILL)
    proc.wait(timeout=10)
    proc.stdout.close()
    proc.stderr.close()
    assert proc.returncode == -signal.SIGKILL
    leftovers = sorted(p.name for p in state.glob(".*.tmp"))
    assert len(leftovers) == 4  # it really was killed mid-publish, with new files staged
    assert {n: b for n, b in _snapshot(state).items() if not n.endswith(".tmp")} == before
    assert json.loads((state / "advisory.json").read_text())["verdict"] == "scan"
    # The next run cleans up and carries on.
    status = main(tick_argv(site, state, "--freq", "300"))
    out, err = capsys.readouterr()
    assert status in CHECK_CODES and "removed 4 temp file(s)" in err
    assert out.startswith("advisor tick: verdict changed: SCAN NOW")
    assert not list(state.glob(".*.tmp")) and len(history(state)) == 2


def _assert_refused_cleanly(proc, state, before):
    assert proc.returncode == EXIT_STATE_DIR, (proc.returncode, proc.stderr)
    assert proc.stdout == ""
    err = proc.stderr.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("advisor: error: ") and "Traceback" not in proc.stderr
    assert "previous advisory is unchanged" in err[0]
    assert _snapshot(state) == before  # nothing new, nothing partial, no temp files


def test_read_only_bind_mount_is_a_clear_error_with_no_partial_files(primed):
    site, state = primed
    if shutil.which("unshare") is None or shutil.which("mount") is None:
        pytest.skip("unshare/mount not available")
    probe = subprocess.run(["unshare", "-m", "true"], capture_output=True)
    if probe.returncode != 0:
        pytest.skip("cannot make a private mount namespace here")
    before = _snapshot(state)
    script = 'mount --bind "$1" "$1" && mount -o remount,bind,ro "$1" || exit 99; shift; exec "$@"'
    proc = subprocess.run(
        [
            "unshare",
            "-m",
            "--propagation",
            "private",
            "sh",
            "-c",
            script,
            "sh",
            str(state),
            *_cmd(site, state, "--freq", "300"),
        ],
        env=_env(),
        capture_output=True,
        text=True,
    )
    if proc.returncode == 99:
        pytest.skip(f"read-only bind mount refused: {proc.stderr.strip()}")
    _assert_refused_cleanly(proc, state, before)
    assert "Read-only file system" in proc.stderr


def test_immutable_state_dir_is_a_clear_error_with_no_partial_files(primed):
    site, state = primed
    if shutil.which("chattr") is None:
        pytest.skip("chattr not available")
    before = _snapshot(state)
    if subprocess.run(["chattr", "+i", str(state)], capture_output=True).returncode != 0:
        pytest.skip("this file system does not support the immutable attribute")
    try:
        proc = subprocess.run(_cmd(site, state, "--freq", "300"), env=_env(), capture_output=True, text=True)
    finally:
        subprocess.run(["chattr", "-i", str(state)], check=True)
    _assert_refused_cleanly(proc, state, before)
    assert "Operation not permitted" in proc.stderr


def _limit_file_size(max_bytes: int):
    def apply():
        resource.setrlimit(resource.RLIMIT_FSIZE, (max_bytes, max_bytes))

    return apply


@pytest.mark.parametrize(
    "limit_bytes, history_bytes",
    [
        (2_000, 0),  # the first staged file already fails part-way
        (60_000, 59_950),  # every file stages; the history append is cut short and truncated back
    ],
)
def test_full_state_dir_is_a_clear_error_with_no_partial_files(primed, limit_bytes, history_bytes):
    site, state = primed
    if history_bytes:  # whole JSON lines up to just below the limit
        line = (state / "history.jsonl").read_bytes()
        body = line * ((history_bytes - 100) // len(line))
        pad = history_bytes - len(body) - len(b'{"pad":""}\n')
        (state / "history.jsonl").write_bytes(body + b'{"pad":"' + b"x" * pad + b'"}\n')
        assert (state / "history.jsonl").stat().st_size == history_bytes
    before = _snapshot(state)
    proc = subprocess.run(
        _cmd(site, state, "--freq", "300"),
        env=_env(),
        capture_output=True,
        text=True,
        preexec_fn=_limit_file_size(limit_bytes),
    )
    _assert_refused_cleanly(proc, state, before)
    if history_bytes:
        assert "history.jsonl: cannot append to the history" in proc.stderr
    else:
        assert "advisory.json: cannot write: File too large" in proc.stderr
