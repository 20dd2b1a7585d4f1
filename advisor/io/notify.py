"""Run a site's notify command: argv (no shell), a payload on stdin, a time limit, its output to a log."""

from __future__ import annotations

import os
import signal
import subprocess
from pathlib import Path

#: The notify log is moved to ``<log>.1`` when it grows past this [bytes].
LOG_MAX_BYTES = 1_000_000


def _open_log(log_path: Path | None, argv: tuple[str, ...], issued: str):
    """The log file to append the command's output to (a header line first), or DEVNULL."""
    if log_path is None:
        return subprocess.DEVNULL
    try:
        if log_path.exists() and log_path.stat().st_size > LOG_MAX_BYTES:
            os.replace(log_path, log_path.with_name(log_path.name + ".1"))
        log = open(log_path, "ab")  # noqa: SIM115 (handed to the child; closed by run_notify)
        log.write(f"--- {issued} {' '.join(argv)}\n".encode())
        log.flush()
        return log
    except OSError:
        return subprocess.DEVNULL


def run_notify(
    argv: tuple[str, ...],
    payload: str,
    timeout_s: float,
    extra_env: dict[str, str],
    log_path: Path | None = None,
    issued: str = "",
) -> str | None:
    """Run the site's notify command (argv, no shell) with ``payload`` on stdin; a warning or None.

    Its stdout and stderr are appended to ``log_path`` (after a line naming ``issued`` and the
    command), or discarded without one: never our own output, so cron does not mail the advisory
    twice.  After ``timeout_s`` its whole process group is killed.
    """
    env = dict(os.environ)
    env.update(extra_env)
    log = _open_log(log_path, argv, issued)
    try:
        return _run(argv, payload, timeout_s, env, log)
    finally:
        if log is not subprocess.DEVNULL:
            log.close()


def _run(argv: tuple[str, ...], payload: str, timeout_s: float, env: dict, log) -> str | None:
    try:
        proc = subprocess.Popen(
            list(argv),
            stdin=subprocess.PIPE,
            stdout=log,
            stderr=subprocess.STDOUT,
            env=env,
            start_new_session=True,
            close_fds=True,
        )
    except OSError as exc:
        return f"notify command {argv[0]!r} could not start: {exc.strerror or exc}"
    try:
        proc.communicate(payload.encode("utf-8"), timeout=timeout_s)
    except subprocess.TimeoutExpired:
        for sig in (signal.SIGTERM, signal.SIGKILL):
            try:
                os.killpg(proc.pid, sig)
            except ProcessLookupError:
                break
            try:
                proc.wait(timeout=2.0)
                break
            except subprocess.TimeoutExpired:
                continue
        proc.wait()
        return f"notify command {argv[0]!r} timed out after {timeout_s:g} s and was killed"
    except BrokenPipeError:
        proc.wait()
    if proc.returncode != 0:
        return f"notify command {argv[0]!r} exited with status {proc.returncode}"
    return None
