"""Run a site's notify command: argv (no shell), a payload on stdin, a time limit."""

from __future__ import annotations

import os
import signal
import subprocess
import sys

def run_notify(argv: tuple[str, ...], payload: str, timeout_s: float, extra_env: dict[str, str]) -> str | None:
    """Run the site's notify command (argv, no shell) with ``payload`` on stdin; a warning or None.

    Its output goes to our stderr.  After ``timeout_s`` its whole process group is killed.
    """
    env = dict(os.environ)
    env.update(extra_env)
    try:
        out = sys.stderr.fileno()
    except (AttributeError, ValueError, OSError):  # stderr replaced by an in-memory stream
        out = None
    try:
        proc = subprocess.Popen(list(argv), stdin=subprocess.PIPE, stdout=out if out is not None else 2,
                                stderr=out, env=env, start_new_session=True, close_fds=True)
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
