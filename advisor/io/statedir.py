"""A state folder written all-or-nothing: a lock, staged files renamed into place, a JSON Lines history.

One run, under an exclusive ``flock`` on ``DIR/lock`` (a second run waits ``wait_s``, then gives
up with :class:`Busy`)::

    check_state_dir(DIR)                     a path the system can hold (else UsageError: exit 2)
    with locked(DIR, wait_s):
        recover(DIR)                         a run killed mid-publish: its renames rolled back,
                                             its temp files removed (warnings)
        read_state(DIR, now, parse)          DIR/state.json (bounded read) through ``parse``;
                                             unreadable or unparsable → set aside, reported
        publish(DIR, files, record, max_bytes)
                                             stage, journal, rename, commit, history line:
                                             all or nothing (:mod:`advisor.io.publishing`)
        withdraw(DIR, names)                 last resort: remove the published files

This module writes the text and records it is given; what they say is decided elsewhere.
"""

from __future__ import annotations

import fcntl
import os
import stat
import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from datetime import datetime, timezone
from pathlib import Path
from typing import TypeVar

from advisor.errors import AdvisorError, UsageError
from advisor.io.fileio import KINDS, PATH_MAX, check_path, fsync_folder, read_bytes_bounded
from advisor.io.publishing import (
    HISTORY_FILE,
    JOURNAL_FILE,
    TEST_KILL_ENV,
    TEST_PAUSE_ENV,
    WRITE_HINT,
    Staged,
    StateDirError,
    io_error,
    publish,
    remove_quietly,
    roll_back_journal,
)

__all__ = [
    "EXIT_BUSY",
    "EXIT_STATE_DIR",
    "STATE_FILE",
    "HISTORY_FILE",
    "JOURNAL_FILE",
    "TEST_KILL_ENV",
    "TEST_PAUSE_ENV",
    "StateDirError",
    "Busy",
    "check_state_dir",
    "locked",
    "recover",
    "remove_leftover_temps",
    "read_state",
    "Staged",
    "publish",
    "withdraw",
]

#: Exit status when another run holds the lock (sysexits.h EX_TEMPFAIL: try again later).
EXIT_BUSY = 75
#: Exit status when the state folder cannot be written (sysexits.h EX_IOERR).
EXIT_STATE_DIR = 74
STATE_FILE = "state.json"
#: Longest name the folder must hold beside the given path: '/.advisory.html.<random>.old.tmp' [bytes].
_LONGEST_CHILD = 64

T = TypeVar("T")


class Busy(AdvisorError):
    """Another run holds the state folder's lock."""


def check_state_dir(state_dir: Path | str) -> Path:
    """``state_dir`` as a Path if the system can hold it and the files made in it; UsageError otherwise.

    Refused before anything is created: an empty path, NUL, a path too long for the system once
    the temp files' names are added, a name longer than the system allows.
    """
    path = check_path(state_dir, UsageError, "state dir")
    if len(os.fsencode(str(path))) + _LONGEST_CHILD >= PATH_MAX:
        raise UsageError(
            f"the state dir path is {len(os.fsencode(str(path))):,} bytes long; with the names of "
            f"the files written in it, it passes the system's limit of {PATH_MAX - 1:,}",
            field="--state-dir",
            hint="use a shorter path",
        )
    return path


# --- lock ---------------------------------------------------------------------------------


@contextmanager
def locked(state_dir: Path, wait_s: float) -> Iterator[None]:
    """Hold ``flock(DIR/lock)``; wait up to ``wait_s`` seconds for it, else raise :class:`Busy`."""
    if not state_dir.is_dir():
        try:
            state_dir.mkdir(mode=0o755)
        except FileExistsError:
            if not state_dir.is_dir():
                raise StateDirError(
                    "exists and is not a folder", source=str(state_dir), hint="point --state-dir at a folder"
                ) from None
        except OSError as exc:
            raise io_error(
                state_dir, "create the state dir", exc, "create its parent folder first, or point --state-dir elsewhere"
            ) from None
    path = state_dir / "lock"
    try:
        fd = os.open(path, os.O_RDONLY | os.O_CREAT | os.O_CLOEXEC | os.O_NONBLOCK, 0o644)
    except OSError as exc:
        raise io_error(path, "create the lock file", exc, WRITE_HINT) from None
    try:
        deadline = time.monotonic() + max(0.0, wait_s)
        while True:
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
                break
            except BlockingIOError:
                if time.monotonic() >= deadline:
                    raise Busy(
                        f"another advisor tick has held the lock for {wait_s:g} s; this run changed nothing",
                        source=str(path),
                        hint=f"exit {EXIT_BUSY}; if this repeats, look for a hung tick or slow disk",
                    ) from None
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


def recover(state_dir: Path) -> list[str]:
    """Undo the renames of a run killed mid-publish (its journal says which), then remove temp files.

    Hold the lock.  Returns warnings for stderr.
    """
    warnings = []
    listed, problems = roll_back_journal(state_dir)
    if listed:
        warnings.append(
            f"{state_dir}: an interrupted run had started to publish; its changes were rolled back"
            + (f" except {'; '.join(problems)}" if problems else "")
        )
    elif problems:
        warnings.append(f"{state_dir}: removed {problems[0]}")
    removed = remove_leftover_temps(state_dir)
    if removed:
        warnings.append(f"{state_dir}: removed {len(removed)} temp file(s) left by an interrupted run")
    return warnings


# --- state --------------------------------------------------------------------------------


def read_state(state_dir: Path, now: datetime, parse: Callable[[str], T]) -> tuple[T | None, str | None]:
    """``parse`` of ``DIR/state.json``, or None when there is none; an unreadable one is set aside.

    Read with the bounded reader (a regular file of at most the state cap; never a FIFO).
    ``parse`` takes the file's text and raises ValueError when it is not a valid state.  A file
    that is not a regular file, too big, not UTF-8 or that ``parse`` rejects is renamed
    ``state.json.corrupt-<now UTC>`` and reported; a file that cannot be read for permissions
    is a :class:`StateDirError`.  Returns ``(state, warning)``.
    """
    path = state_dir / STATE_FILE
    try:
        raw = read_bytes_bounded(path, StateDirError, KINDS["state"], missing_ok=True, empty_ok=True)
    except StateDirError as exc:
        if not _is_garbage(path):
            raise StateDirError(
                f"cannot read the state file: {exc.message}", source=str(path), hint="check the state dir's permissions"
            ) from None
        problem = exc.message
    else:
        if raw is None:
            return None, None
        try:
            return parse(raw.decode("utf-8")), None
        except (ValueError, UnicodeDecodeError) as exc:
            problem = str(exc).splitlines()[0][:120] if str(exc) else type(exc).__name__
    aside = path.with_name(f"{STATE_FILE}.corrupt-{now.astimezone(timezone.utc):%Y%m%dT%H%M%S}Z")
    if aside.exists():
        aside = aside.with_name(f"{aside.name}-{os.getpid()}")
    try:
        os.replace(path, aside)
    except OSError as exc:
        raise io_error(path, "set the corrupted state file aside", exc, WRITE_HINT) from None
    return None, (
        f"{path}: corrupted or truncated state file ({problem}); set aside as {aside.name}; starting from a clean state"
    )


def _is_garbage(path: Path) -> bool:
    """Is ``path`` something no run wrote (not a regular file, or far too big) rather than unreadable?"""
    try:
        st = os.lstat(path)
    except OSError:
        return False
    return not stat.S_ISREG(st.st_mode) or st.st_size > KINDS["state"].max_bytes


def withdraw(state_dir: Path, names: tuple[str, ...]) -> None:
    """Remove the published files ``names`` (last resort of a run that cannot publish what it found).

    Best effort, hold the lock: a reader then finds no advisory rather than an old one.
    """
    for name in names:
        remove_quietly(state_dir / name)
    fsync_folder(state_dir)
