"""A state folder written all-or-nothing: a lock, staged files renamed into place, a JSON Lines history.

One run, under an exclusive ``flock`` on ``DIR/lock`` (a second run waits ``wait_s``, then gives
up with :class:`Busy`)::

    with locked(DIR, wait_s):
        remove_leftover_temps(DIR)           temp files a killed run left behind
        read_state(DIR, now, parse)          DIR/state.json through ``parse``; unreadable or
                                             unparsable → renamed state.json.corrupt-<UTC>, reported
        publish(DIR, files, record, max_bytes)
            stage                            every file → a temp file beside it, fsync
            append history.jsonl             one line, fsync (rotated to history.jsonl.1 above
                                             ``max_bytes``; a failed append is truncated back)
            rename                           temps over their names, in the order given; fsync DIR

Nothing is renamed into place until every file was written and the history line appended, so
a full or read-only folder changes nothing (:class:`StateDirError`) and a killed run leaves the
previous files whole (its temp files are removed by the next run).  Give the state file last:
a run killed between the renames then repeats its announcement next time (at least once,
never lost).  The one window with a visible trace is a crash between the history append and
the renames, microseconds long: a history line for files that were not published.

This module writes the text and records it is given; what they say is decided elsewhere.

Test hook: with ``ADVISOR_TICK_TEST_PAUSE_S`` set, :func:`publish` reports on stderr and sleeps
that long between staging and renaming, so tests can kill it there.
"""

from __future__ import annotations

import errno
import fcntl
import json
import os
import sys
import tempfile
import time
from contextlib import contextmanager
from datetime import datetime, timezone
from pathlib import Path
from typing import Callable, Iterator, TypeVar

from advisor.errors import AdvisorError

__all__ = ["EXIT_BUSY", "EXIT_STATE_DIR", "STATE_FILE", "HISTORY_FILE", "StateDirError", "Busy", "locked",
           "remove_leftover_temps", "read_state", "Staged", "append_history", "publish"]

#: Exit status when another run holds the lock (sysexits.h EX_TEMPFAIL: try again later).
EXIT_BUSY = 75
#: Exit status when the state folder cannot be written (sysexits.h EX_IOERR).
EXIT_STATE_DIR = 74
STATE_FILE = "state.json"
HISTORY_FILE = "history.jsonl"
TEST_PAUSE_ENV = "ADVISOR_TICK_TEST_PAUSE_S"

T = TypeVar("T")


class StateDirError(AdvisorError):
    """The state folder cannot be created, locked or written."""


class Busy(AdvisorError):
    """Another run holds the state folder's lock."""


def _io_error(path: Path, action: str, exc: OSError, hint: str) -> StateDirError:
    reason = exc.strerror or str(exc)
    return StateDirError(f"cannot {action}: {reason}", source=str(path), hint=hint)


WRITE_HINT = "free space or fix permissions in the state dir, or point --state-dir elsewhere; the previous advisory is unchanged"


# --- lock ---------------------------------------------------------------------------------

@contextmanager
def locked(state_dir: Path, wait_s: float) -> Iterator[None]:
    """Hold ``flock(DIR/lock)``; wait up to ``wait_s`` seconds for it, else raise :class:`Busy`."""
    if not state_dir.is_dir():
        try:
            state_dir.mkdir(mode=0o755)
        except FileExistsError:
            if not state_dir.is_dir():
                raise StateDirError("exists and is not a folder", source=str(state_dir),
                                    hint="point --state-dir at a folder") from None
        except OSError as exc:
            raise _io_error(state_dir, "create the state dir", exc,
                            "create its parent folder first, or point --state-dir elsewhere") from None
    path = state_dir / "lock"
    try:
        fd = os.open(path, os.O_RDONLY | os.O_CREAT | os.O_CLOEXEC, 0o644)
    except OSError as exc:
        raise _io_error(path, "create the lock file", exc, WRITE_HINT) from None
    try:
        deadline = time.monotonic() + max(0.0, wait_s)
        while True:
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
                break
            except BlockingIOError:
                if time.monotonic() >= deadline:
                    raise Busy(f"another advisor tick has held the lock for {wait_s:g} s; this run changed nothing",
                               source=str(path),
                               hint=f"exit {EXIT_BUSY}; if this repeats, look for a hung tick or slow disk") from None
                time.sleep(0.05)
        yield
    finally:
        os.close(fd)  # releases the lock


def remove_leftover_temps(state_dir: Path) -> list[str]:
    """Delete the temp files (``.<name>.<random>.tmp``) a killed run left behind; hold the lock."""
    removed = []
    for leftover in sorted(state_dir.glob(".*.tmp")):
        try:
            leftover.unlink()
            removed.append(leftover.name)
        except OSError:
            pass
    return removed


# --- state --------------------------------------------------------------------------------

def read_state(state_dir: Path, now: datetime, parse: Callable[[str], T]) -> tuple[T | None, str | None]:
    """``parse`` of ``DIR/state.json``, or None when there is none; an unreadable one is set aside.

    ``parse`` takes the file's text and raises ValueError when it is not a valid state.  A file
    that is not UTF-8 or that ``parse`` rejects is renamed ``state.json.corrupt-<now UTC>`` and
    reported.  Returns ``(state, warning)``.
    """
    path = state_dir / STATE_FILE
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        return None, None
    except OSError as exc:
        raise _io_error(path, "read the state file", exc, "check the state dir's permissions") from None
    try:
        return parse(raw.decode("utf-8")), None
    except (ValueError, UnicodeDecodeError) as exc:
        problem = str(exc).splitlines()[0][:120] or type(exc).__name__
    aside = path.with_name(f"{STATE_FILE}.corrupt-{now.astimezone(timezone.utc):%Y%m%dT%H%M%S}Z")
    if aside.exists():
        aside = aside.with_name(f"{aside.name}-{os.getpid()}")
    try:
        os.replace(path, aside)
    except OSError as exc:
        raise _io_error(path, "set the corrupted state file aside", exc, WRITE_HINT) from None
    return None, (f"{path}: corrupted or truncated state file ({problem}); set aside as {aside.name}; "
                  "starting from a clean state")


# --- writing ------------------------------------------------------------------------------

class Staged:
    """Temp files written and fsynced in the state dir, renamed into place only by :meth:`commit`."""

    def __init__(self, state_dir: Path) -> None:
        self.state_dir = state_dir
        self.pending: list[tuple[str, Path]] = []

    def write(self, name: str, text: str) -> None:
        final = self.state_dir / name
        try:
            fd, tmp = tempfile.mkstemp(prefix=f".{name}.", suffix=".tmp", dir=self.state_dir)
        except OSError as exc:
            raise _io_error(final, "write", exc, WRITE_HINT) from None
        self.pending.append((tmp, final))
        try:
            with os.fdopen(fd, "wb") as fh:
                fh.write(text.encode("utf-8"))
                fh.flush()
                os.fsync(fh.fileno())
            os.chmod(tmp, 0o644)
        except OSError as exc:
            raise _io_error(final, "write", exc, WRITE_HINT) from None

    def discard(self) -> None:
        for tmp, _ in self.pending:
            try:
                os.unlink(tmp)
            except OSError:
                pass
        self.pending = []

    def commit(self) -> None:
        """Rename every temp over its final name, in staging order, then fsync the folder."""
        for tmp, final in self.pending:
            try:
                os.replace(tmp, final)
            except OSError as exc:
                self.discard()
                raise _io_error(final, "rename into place", exc, WRITE_HINT) from None
        self.pending = []
        fsync_dir(self.state_dir)


def fsync_dir(folder: Path) -> None:
    try:
        fd = os.open(folder, os.O_RDONLY | os.O_DIRECTORY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def append_history(path: Path, record: dict, max_bytes: int) -> list[str]:
    """Append one JSON line with fsync; rotate to ``<name>.1`` first when it would pass ``max_bytes``.

    A failed append is truncated back to the old size, so the file never keeps a partial line.
    Returns warnings (a partial last line found from an earlier crash is cut off and reported).
    """
    line = (json.dumps(record, separators=(",", ":"), allow_nan=False) + "\n").encode("utf-8")
    warnings = []
    try:
        size = path.stat().st_size
    except FileNotFoundError:
        size = 0
    except OSError as exc:
        raise _io_error(path, "read the history", exc, WRITE_HINT) from None
    try:
        if size and size + len(line) > max_bytes:
            os.replace(path, path.with_name(path.name + ".1"))
            fsync_dir(path.parent)
        fd = os.open(path, os.O_RDWR | os.O_APPEND | os.O_CREAT | os.O_CLOEXEC, 0o644)
    except OSError as exc:
        raise _io_error(path, "open the history for appending", exc, WRITE_HINT) from None
    try:
        size = os.fstat(fd).st_size
        if size:
            tail = os.pread(fd, min(size, 65536), max(0, size - 65536))
            if not tail.endswith(b"\n"):
                cut = tail.rfind(b"\n")
                keep = 0 if cut < 0 else size - len(tail) + cut + 1
                os.ftruncate(fd, keep)
                warnings.append(f"{path}: removed a partial last line ({size - keep} bytes) left by an "
                                "interrupted run")
                size = keep
        try:
            written = os.write(fd, line)
            if written != len(line):
                raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
            os.fsync(fd)
        except OSError:
            try:
                os.ftruncate(fd, size)
            except OSError:
                pass
            raise
    except OSError as exc:
        raise _io_error(path, "append to the history", exc, WRITE_HINT) from None
    finally:
        os.close(fd)
    return warnings


def _test_pause() -> None:
    value = os.environ.get(TEST_PAUSE_ENV)
    if not value:
        return
    print(f"advisor: test hook: {TEST_PAUSE_ENV}={value}: staged, pausing before rename", file=sys.stderr, flush=True)
    time.sleep(float(value))


def publish(state_dir: Path, files: dict[str, str], history_record: dict, history_max_bytes: int) -> list[str]:
    """Stage ``files`` (name → text, in order; the state file last), append history, rename all.

    All or nothing: on any error the staged temps are removed and nothing is renamed.  Returns
    the warnings of :func:`append_history`.
    """
    staged = Staged(state_dir)
    try:
        for name, text in files.items():
            staged.write(name, text)
        _test_pause()
        warnings = append_history(state_dir / HISTORY_FILE, history_record, history_max_bytes)
    except BaseException:
        staged.discard()
        raise
    staged.commit()
    return warnings
