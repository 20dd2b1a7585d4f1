"""A state folder written all-or-nothing: a lock, staged files renamed into place, a JSON Lines history.

One run, under an exclusive ``flock`` on ``DIR/lock`` (a second run waits ``wait_s``, then gives
up with :class:`Busy`)::

    check_state_dir(DIR)                     a path the system can hold (else UsageError: exit 2)
    with locked(DIR, wait_s):
        recover(DIR)                         finish the story of a run killed mid-publish: roll
                                             its renames back, remove its temp files (warnings)
        read_state(DIR, now, parse)          DIR/state.json (bounded read) through ``parse``;
                                             unreadable or unparsable → set aside, reported
        publish(DIR, files, record, max_bytes)
            stage        every file → a temp file beside it, fsync
            journal      hard-link backups of the files being replaced, DIR/.publish.journal, fsync
            rename       temps over their names, in the order given (the state file last)
            commit       the journal is removed: the new advisory stands
            history      one line appended to history.jsonl (the shared locked appender)
            tidy         the backups are removed

All or nothing: a failure before the commit (full or read-only folder, a rename refused) undoes
every rename from the backups and removes the temps, so the folder is as it was; a failed
history append after the commit undoes the renames the same way.  A run killed between the
journal and the commit is rolled back by the next run (:func:`recover`); one killed after the
commit but before its history line leaves a published advisory without a history line — never
a history line for an advisory that was not published.  The error messages say which of these
happened, and only say "the previous advisory is unchanged" when it is.

This module writes the text and records it is given; what they say is decided elsewhere.

Test hooks: with ``ADVISOR_TICK_TEST_PAUSE_S`` set, :func:`publish` reports on stderr and sleeps
that long between staging and renaming, so tests can kill it there; with
``ADVISOR_TICK_TEST_KILL_AFTER_RENAMES=N`` it kills its own process after ``N`` renames.
"""

from __future__ import annotations

import fcntl
import json
import os
import secrets
import signal
import stat
import sys
import tempfile
import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager, suppress
from datetime import datetime, timezone
from pathlib import Path
from typing import TypeVar

from advisor.errors import AdvisorError, UsageError
from advisor.io.appendfile import append_line_locked
from advisor.io.fileio import KINDS, PATH_MAX, check_path, fsync_folder, read_bytes_bounded

__all__ = ["EXIT_BUSY", "EXIT_STATE_DIR", "STATE_FILE", "HISTORY_FILE", "JOURNAL_FILE", "StateDirError", "Busy",
           "check_state_dir", "locked", "recover", "remove_leftover_temps", "read_state", "Staged", "publish",
           "withdraw"]

#: Exit status when another run holds the lock (sysexits.h EX_TEMPFAIL: try again later).
EXIT_BUSY = 75
#: Exit status when the state folder cannot be written (sysexits.h EX_IOERR).
EXIT_STATE_DIR = 74
STATE_FILE = "state.json"
HISTORY_FILE = "history.jsonl"
JOURNAL_FILE = ".publish.journal"
TEST_PAUSE_ENV = "ADVISOR_TICK_TEST_PAUSE_S"
TEST_KILL_ENV = "ADVISOR_TICK_TEST_KILL_AFTER_RENAMES"
#: Longest name the folder must hold beside the given path: '/.advisory.html.<random>.old.tmp' [bytes].
_LONGEST_CHILD = 64

T = TypeVar("T")


class StateDirError(AdvisorError):
    """The state folder cannot be created, locked or written."""


class Busy(AdvisorError):
    """Another run holds the state folder's lock."""


UNCHANGED = "the previous advisory is unchanged"
WRITE_HINT = f"free space or fix permissions in the state dir, or point --state-dir elsewhere; {UNCHANGED}"


def _io_error(path: Path, action: str, exc: OSError, hint: str) -> StateDirError:
    reason = exc.strerror or str(exc)
    return StateDirError(f"cannot {action}: {reason}", source=str(path), hint=hint)


def check_state_dir(state_dir: Path | str) -> Path:
    """``state_dir`` as a Path if the system can hold it and the files made in it; UsageError otherwise.

    Refused before anything is created: an empty path, NUL, a path too long for the system once
    the temp files' names are added, a name longer than the system allows.
    """
    path = check_path(state_dir, UsageError, "state dir")
    if len(os.fsencode(str(path))) + _LONGEST_CHILD >= PATH_MAX:
        raise UsageError(f"the state dir path is {len(os.fsencode(str(path))):,} bytes long; with the names of "
                         f"the files written in it, it passes the system's limit of {PATH_MAX - 1:,}",
                         field="--state-dir", hint="use a shorter path")
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
                raise StateDirError("exists and is not a folder", source=str(state_dir),
                                    hint="point --state-dir at a folder") from None
        except OSError as exc:
            raise _io_error(state_dir, "create the state dir", exc,
                            "create its parent folder first, or point --state-dir elsewhere") from None
    path = state_dir / "lock"
    try:
        fd = os.open(path, os.O_RDONLY | os.O_CREAT | os.O_CLOEXEC | os.O_NONBLOCK, 0o644)
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


def recover(state_dir: Path) -> list[str]:
    """Undo the renames of a run killed mid-publish (its journal says which), then remove temp files.

    Hold the lock.  Returns warnings for stderr.
    """
    warnings = []
    journal = state_dir / JOURNAL_FILE
    try:
        raw = read_bytes_bounded(journal, StateDirError, KINDS["state"], missing_ok=True, empty_ok=True)
    except StateDirError as exc:
        raw, warnings = None, [f"{journal}: unreadable publish journal removed ({exc.message})"]
        _remove(journal)
    if raw is not None:
        try:
            entries = json.loads(raw.decode("utf-8"))["files"]
            names = [(str(e["name"]), e["backup"]) for e in entries]
        except (ValueError, KeyError, TypeError, UnicodeDecodeError):
            names = []   # a journal cut short: its run had renamed nothing yet
        problems = _roll_back(state_dir, [(n, b, True) for n, b in names if _safe_name(n) and _safe_backup(b)])
        _remove(journal)
        fsync_folder(state_dir)
        if names:
            warnings.append(f"{state_dir}: an interrupted run had started to publish; its changes were rolled back"
                            + (f" except {'; '.join(problems)}" if problems else ""))
    removed = remove_leftover_temps(state_dir)
    if removed:
        warnings.append(f"{state_dir}: removed {len(removed)} temp file(s) left by an interrupted run")
    return warnings


def _safe_name(name: str) -> bool:
    return bool(name) and "/" not in name and name not in (".", "..") and "\0" not in name


def _safe_backup(backup) -> bool:
    return backup is None or (isinstance(backup, str) and _safe_name(backup) and backup.endswith(".old.tmp"))


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
            raise StateDirError(f"cannot read the state file: {exc.message}", source=str(path),
                                hint="check the state dir's permissions") from None
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
        raise _io_error(path, "set the corrupted state file aside", exc, WRITE_HINT) from None
    return None, (f"{path}: corrupted or truncated state file ({problem}); set aside as {aside.name}; "
                  "starting from a clean state")


def _is_garbage(path: Path) -> bool:
    """Is ``path`` something no run wrote (not a regular file, or far too big) rather than unreadable?"""
    try:
        st = os.lstat(path)
    except OSError:
        return False
    return not stat.S_ISREG(st.st_mode) or st.st_size > KINDS["state"].max_bytes


# --- writing ------------------------------------------------------------------------------

class Staged:
    """Temp files written and fsynced in the state dir, renamed into place only by :meth:`commit`."""

    def __init__(self, state_dir: Path) -> None:
        self.state_dir = state_dir
        self.pending: list[tuple[str, Path]] = []       # (temp path, final path), in order
        self.renamed: list[tuple[str, str | None]] = []  # (name, backup name or None: it did not exist)
        self.backups: dict[str, str | None] = {}

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
        """Remove the temp files (and backups) of this run; nothing renamed is touched."""
        for tmp, _ in self.pending:
            _remove(Path(tmp))
        for backup in self.backups.values():
            if backup:
                _remove(self.state_dir / backup)
        self.pending, self.backups = [], {}

    def journal(self) -> None:
        """Hard-link a backup of every file about to be replaced, then write the journal naming them."""
        for _, final in self.pending:
            backup = None
            if final.exists():
                backup = f".{final.name}.{secrets.token_hex(4)}.old.tmp"
                self.backups[final.name] = backup       # discard() removes it if what follows fails
                try:
                    _backup(final, self.state_dir / backup)
                except OSError as exc:
                    raise _io_error(final, "keep a backup while publishing", exc, WRITE_HINT) from None
            self.backups[final.name] = backup
        doc = {"files": [{"name": final.name, "backup": self.backups[final.name]} for _, final in self.pending]}
        text = json.dumps(doc) + "\n"
        path = self.state_dir / JOURNAL_FILE
        try:
            with suppress(FileNotFoundError):   # whatever is there (even a FIFO) is replaced, never opened
                os.unlink(path)
            fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL | os.O_CLOEXEC | os.O_NOFOLLOW | os.O_NONBLOCK,
                         0o644)
            try:
                view = memoryview(text.encode("utf-8"))
                while view:
                    view = view[os.write(fd, view):]
                os.fsync(fd)
            finally:
                os.close(fd)
            fsync_folder(self.state_dir)
        except OSError as exc:
            _remove(path)
            raise _io_error(path, "write the publish journal", exc, WRITE_HINT) from None

    def rename_all(self) -> None:
        """Rename every temp over its final name, in staging order; a failure undoes the earlier ones."""
        kill_after = _test_kill_after()
        for k, (tmp, final) in enumerate(self.pending):
            if kill_after is not None and k == kill_after:
                os.kill(os.getpid(), signal.SIGKILL)
            try:
                os.replace(tmp, final)
            except OSError as exc:
                problems = self.roll_back()
                raise StateDirError(f"cannot rename into place: {exc.strerror or exc}", source=str(final),
                                    hint=_after_rollback(problems)) from None
            self.renamed.append((final.name, self.backups.get(final.name)))

    def commit(self) -> None:
        """The new files stand: remove the journal (the commit point) and fsync the folder."""
        journal = self.state_dir / JOURNAL_FILE
        try:
            os.unlink(journal)
        except FileNotFoundError:
            pass
        except OSError as exc:
            problems = self.roll_back()
            raise _io_error(journal, "remove the publish journal", exc, _after_rollback(problems)) from None
        fsync_folder(self.state_dir)
        self.pending = []

    def roll_back(self) -> list[str]:
        """Put back what this run renamed (from the backups), drop its temps and journal; problems left."""
        problems = _roll_back(self.state_dir, [(n, b, False) for n, b in reversed(self.renamed)])
        self.renamed = []
        self.discard()              # temps not renamed, and backups of files not replaced
        _remove(self.state_dir / JOURNAL_FILE)
        fsync_folder(self.state_dir)
        return problems

    def tidy(self) -> None:
        """Remove the backups once the run is complete (best effort; the next run removes leftovers)."""
        for backup in self.backups.values():
            if backup:
                _remove(self.state_dir / backup)
        self.backups, self.renamed = {}, []


def _backup(final: Path, backup: Path) -> None:
    """``backup`` as a hard link of ``final``; a copy where the file system has no hard links."""
    try:
        os.link(final, backup)
        return
    except OSError:
        if not stat.S_ISREG(os.lstat(final).st_mode):
            raise
    data = read_bytes_bounded(final, StateDirError, KINDS["state"], empty_ok=True) or b""
    fd = os.open(backup, os.O_WRONLY | os.O_CREAT | os.O_EXCL | os.O_CLOEXEC, 0o644)
    try:
        view = memoryview(data)
        while view:
            view = view[os.write(fd, view):]
        os.fsync(fd)
    finally:
        os.close(fd)


def _roll_back(state_dir: Path, entries: list[tuple[str, str | None, bool]]) -> list[str]:
    """Restore each ``(name, backup, from_journal)``: the backup over the name, or remove a new file.

    A name whose backup is gone is left as it is and reported (``from_journal``: an entry the
    killed run may not have reached, whose file is then still the previous one).
    """
    problems = []
    for name, backup, from_journal in entries:
        final = state_dir / name
        try:
            if backup is not None:
                os.replace(state_dir / backup, final)
            elif not from_journal or final.exists():
                os.unlink(final)
        except FileNotFoundError:
            if backup is not None and not from_journal:
                problems.append(f"{name} (its backup is gone)")
        except OSError as exc:
            problems.append(f"{name} ({exc.strerror or exc})")
    return problems


def _after_rollback(problems: list[str]) -> str:
    if not problems:
        return f"every file was put back: {UNCHANGED}; free space or fix permissions in the state dir"
    return ("could not put back " + "; ".join(problems) + ": the advisory files may disagree until the next "
            "successful run, which replaces them all; fix the state dir")


def _remove(path: Path) -> None:
    with suppress(OSError):
        os.unlink(path)


def withdraw(state_dir: Path, names: tuple[str, ...]) -> None:
    """Remove the published files ``names`` (last resort of a run that cannot publish what it found).

    Best effort, hold the lock: a reader then finds no advisory rather than an old one.
    """
    for name in names:
        _remove(state_dir / name)
    fsync_folder(state_dir)


def _test_pause() -> None:
    value = os.environ.get(TEST_PAUSE_ENV)
    if not value:
        return
    print(f"advisor: test hook: {TEST_PAUSE_ENV}={value}: staged, pausing before rename", file=sys.stderr, flush=True)
    time.sleep(float(value))


def _test_kill_after() -> int | None:
    value = os.environ.get(TEST_KILL_ENV)
    return int(value) if value else None


def publish(state_dir: Path, files: dict[str, str], history_record: dict, history_max_bytes: int) -> list[str]:
    """Stage ``files`` (name → text, in order; the state file last), rename all, then append history.

    All or nothing (see the module notes): on any error before the history line is written,
    every file is as before and the temps are removed; the :class:`StateDirError` raised says
    so, or names what could not be put back.  Returns the warnings of the history append.
    """
    line = json.dumps(history_record, separators=(",", ":"), allow_nan=False)   # fails before anything is written
    staged = Staged(state_dir)
    try:
        for name, text in files.items():
            staged.write(name, text)
        _test_pause()
        staged.journal()
    except BaseException:
        staged.discard()
        raise
    staged.rename_all()
    staged.commit()
    try:
        warnings = append_line_locked(state_dir / HISTORY_FILE, line, StateDirError, "history",
                                      rotate_above=history_max_bytes, repair_partial=True)
    except StateDirError as exc:
        problems = _roll_back(state_dir, [(n, b, False) for n, b in reversed(staged.renamed)])
        staged.renamed = []
        staged.backups = {}
        fsync_folder(state_dir)
        raise StateDirError(exc.message, source=exc.source, hint=_after_rollback(problems)) from None
    staged.tidy()
    return warnings
