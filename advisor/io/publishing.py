"""Publishing a set of files into the state folder all-or-nothing (used by :mod:`advisor.io.statedir`).

    publish(DIR, files, record, max_bytes)
        stage        every file → a temp file beside it, fsync
        journal      hard-link backups of the files being replaced, DIR/.publish.journal, fsync
        rename       temps over their names, in the order given (the state file last)
        commit       the journal is removed: the new files stand
        history      one line appended to history.jsonl (the shared locked appender)
        tidy         the backups are removed

A failure before the commit (full or read-only folder, a rename refused) undoes every rename
from the backups and removes the temps, so the folder is as it was; a failed history append
after the commit undoes the renames the same way.  A run killed between the journal and the
commit is rolled back by the next run (:func:`roll_back_journal`); one killed after the commit
but before its history line leaves published files without a history line — never a history
line for files that were not published.  The errors raised say which of these happened, and
only say "the previous advisory is unchanged" when it is.

Test hooks: with ``ADVISOR_TICK_TEST_PAUSE_S`` set, :func:`publish` reports on stderr and sleeps
that long between staging and renaming, so tests can kill it there; with
``ADVISOR_TICK_TEST_KILL_AFTER_RENAMES=N`` it kills its own process after ``N`` renames.
"""

from __future__ import annotations

import json
import os
import secrets
import signal
import stat
import sys
import tempfile
import time
from contextlib import suppress
from pathlib import Path

from advisor.errors import AdvisorError
from advisor.io.appendfile import append_line_locked
from advisor.io.fileio import KINDS, fsync_folder, read_bytes_bounded

__all__ = [
    "HISTORY_FILE",
    "JOURNAL_FILE",
    "TEST_KILL_ENV",
    "TEST_PAUSE_ENV",
    "UNCHANGED",
    "WRITE_HINT",
    "StateDirError",
    "Staged",
    "io_error",
    "publish",
    "remove_quietly",
    "roll_back_journal",
]

HISTORY_FILE = "history.jsonl"
JOURNAL_FILE = ".publish.journal"
TEST_PAUSE_ENV = "ADVISOR_TICK_TEST_PAUSE_S"
TEST_KILL_ENV = "ADVISOR_TICK_TEST_KILL_AFTER_RENAMES"
UNCHANGED = "the previous advisory is unchanged"
WRITE_HINT = f"free space or fix permissions in the state dir, or point --state-dir elsewhere; {UNCHANGED}"


class StateDirError(AdvisorError):
    """The state folder cannot be created, locked or written."""


def io_error(path: Path, action: str, exc: OSError, hint: str) -> StateDirError:
    reason = exc.strerror or str(exc)
    return StateDirError(f"cannot {action}: {reason}", source=str(path), hint=hint)


def roll_back_journal(state_dir: Path) -> tuple[bool, list[str]]:
    """Undo the renames of a run killed mid-publish, as its journal lists them; remove the journal.

    Returns ``(a journal listed files, problems)``: what could not be put back.  Hold the lock.
    """
    journal = state_dir / JOURNAL_FILE
    try:
        raw = read_bytes_bounded(journal, StateDirError, KINDS["state"], missing_ok=True, empty_ok=True)
    except StateDirError as exc:  # not a file a run wrote (a FIFO, a folder): removed
        remove_quietly(journal)
        return False, [f"an unreadable publish journal ({exc.message})"]
    if raw is None:
        return False, []
    try:
        entries = json.loads(raw.decode("utf-8"))["files"]
        names = [(str(e["name"]), e["backup"]) for e in entries]
    except (ValueError, KeyError, TypeError, UnicodeDecodeError):
        names = []  # a journal cut short: its run had renamed nothing yet
    problems = _roll_back(state_dir, [(n, b, True) for n, b in names if _safe_name(n) and _safe_backup(b)])
    remove_quietly(journal)
    fsync_folder(state_dir)
    return bool(names), problems


def _safe_name(name: str) -> bool:
    return bool(name) and "/" not in name and name not in (".", "..") and "\0" not in name


def _safe_backup(backup) -> bool:
    return backup is None or (isinstance(backup, str) and _safe_name(backup) and backup.endswith(".old.tmp"))


class Staged:
    """Temp files written and fsynced in the state dir, then backed up and journalled
    (:meth:`journal`), renamed into place (:meth:`rename_all`) and committed (:meth:`commit`);
    :meth:`roll_back` undoes the renames."""

    def __init__(self, state_dir: Path) -> None:
        self.state_dir = state_dir
        self.pending: list[tuple[str, Path]] = []  # (temp path, final path), in order
        self.renamed: list[tuple[str, str | None]] = []  # (name, backup name or None: it did not exist)
        self.backups: dict[str, str | None] = {}

    def write(self, name: str, text: str) -> None:
        final = self.state_dir / name
        try:
            fd, tmp = tempfile.mkstemp(prefix=f".{name}.", suffix=".tmp", dir=self.state_dir)
        except OSError as exc:
            raise io_error(final, "write", exc, WRITE_HINT) from None
        self.pending.append((tmp, final))
        try:
            with os.fdopen(fd, "wb") as fh:
                fh.write(text.encode("utf-8"))
                fh.flush()
                os.fsync(fh.fileno())
            os.chmod(tmp, 0o644)
        except OSError as exc:
            raise io_error(final, "write", exc, WRITE_HINT) from None

    def discard(self) -> None:
        """Remove the temp files (and backups) of this run; nothing renamed is touched."""
        for tmp, _ in self.pending:
            remove_quietly(Path(tmp))
        for backup in self.backups.values():
            if backup:
                remove_quietly(self.state_dir / backup)
        self.pending, self.backups = [], {}

    def journal(self) -> None:
        """Hard-link a backup of every file about to be replaced, then write the journal naming them."""
        for _, final in self.pending:
            backup = None
            if final.exists():
                backup = f".{final.name}.{secrets.token_hex(4)}.old.tmp"
                self.backups[final.name] = backup  # discard() removes it if what follows fails
                try:
                    _backup(final, self.state_dir / backup)
                except OSError as exc:
                    raise io_error(final, "keep a backup while publishing", exc, WRITE_HINT) from None
            self.backups[final.name] = backup
        doc = {"files": [{"name": final.name, "backup": self.backups[final.name]} for _, final in self.pending]}
        text = json.dumps(doc) + "\n"
        path = self.state_dir / JOURNAL_FILE
        try:
            with suppress(FileNotFoundError):  # whatever is there (even a FIFO) is replaced, never opened
                os.unlink(path)
            fd = os.open(
                path, os.O_WRONLY | os.O_CREAT | os.O_EXCL | os.O_CLOEXEC | os.O_NOFOLLOW | os.O_NONBLOCK, 0o644
            )
            try:
                view = memoryview(text.encode("utf-8"))
                while view:
                    view = view[os.write(fd, view) :]
                os.fsync(fd)
            finally:
                os.close(fd)
            fsync_folder(self.state_dir)
        except OSError as exc:
            remove_quietly(path)
            raise io_error(path, "write the publish journal", exc, WRITE_HINT) from None

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
                raise StateDirError(
                    f"cannot rename into place: {exc.strerror or exc}",
                    source=str(final),
                    hint=_after_rollback(problems),
                ) from None
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
            raise io_error(journal, "remove the publish journal", exc, _after_rollback(problems)) from None
        fsync_folder(self.state_dir)
        self.pending = []

    def roll_back(self) -> list[str]:
        """Put back what this run renamed (from the backups), drop its temps and journal; problems left."""
        problems = _roll_back(self.state_dir, [(n, b, False) for n, b in reversed(self.renamed)])
        self.renamed = []
        self.discard()  # temps not renamed, and backups of files not replaced
        remove_quietly(self.state_dir / JOURNAL_FILE)
        fsync_folder(self.state_dir)
        return problems

    def tidy(self) -> None:
        """Remove the backups once the run is complete (best effort; the next run removes leftovers)."""
        for backup in self.backups.values():
            if backup:
                remove_quietly(self.state_dir / backup)
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
            view = view[os.write(fd, view) :]
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
    return (
        "could not put back " + "; ".join(problems) + ": the advisory files may disagree until the next "
        "successful run, which replaces them all; fix the state dir"
    )


def remove_quietly(path: Path) -> None:
    with suppress(OSError):
        os.unlink(path)


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
    line = json.dumps(history_record, separators=(",", ":"), allow_nan=False)  # fails before anything is written
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
        warnings = append_line_locked(
            state_dir / HISTORY_FILE,
            line,
            StateDirError,
            "history",
            rotate_above=history_max_bytes,
            repair_partial=True,
        )
    except StateDirError as exc:  # no line for files that will not stand: they are put back
        problems = staged.roll_back()
        raise StateDirError(exc.message, source=exc.source, hint=_after_rollback(problems)) from None
    staged.tidy()
    return warnings
