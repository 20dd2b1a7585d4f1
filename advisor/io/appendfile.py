"""Appending one whole line to a shared file (JSON Lines histories), under its lock.

    warnings = append_line_locked(path, line, HistoryError, "history", rotate_above=10_000_000,
                                  repair_partial=True)

The writer holds :func:`advisor.io.fileio.locked` (the sidecar ``.NAME.lock``) for the whole
append, so concurrent writers take turns (the state folder's history, attempt histories).
A full file can be moved aside to ``NAME.1`` first, a partial last line left by a
writer that was killed is cut off (and reported), and a write that fails part-way is truncated
back: the file only ever holds whole lines.
"""

from __future__ import annotations

import contextlib
import os
from pathlib import Path

from advisor.errors import AdvisorError
from advisor.io.fileio import LOCK_WAIT_S, _os_error, _refuse_special, check_path, fsync_folder, locked

__all__ = ["append_line_locked"]


def append_line_locked(
    path: Path | str,
    line: str,
    error_type: type[AdvisorError],
    what: str = "file",
    wait_s: float = LOCK_WAIT_S,
    *,
    rotate_above: int | None = None,
    repair_partial: bool = False,
) -> list[str]:
    """Append one whole line (a newline is added if missing) to ``path`` under ``locked``, fsynced.

    The line is written on an ``O_APPEND`` descriptor; an existing path that is not a regular
    file is refused.  A write that fails part-way (a full disk) is truncated back, so the file
    never keeps a partial line of this writer.

    Parameters
    ----------
    rotate_above : int, optional
        When the line would take the file past this many bytes, the file is first renamed
        ``NAME.1`` (replacing an older one) and a new one is started.
    repair_partial : bool
        Cut off a last line without a newline (left by a writer killed mid-line) before
        appending, and say so in the returned warnings.

    Returns
    -------
    list of str
        Warnings (a partial last line that was removed).
    """
    data = (line if line.endswith("\n") else line + "\n").encode("utf-8")
    warnings: list[str] = []
    path = check_path(path, error_type, what)
    with locked(path, error_type, what, wait_s):
        if rotate_above is not None:
            _rotate_if_full(path, len(data), rotate_above, error_type, what)
        flags = os.O_RDWR if repair_partial else os.O_WRONLY
        try:
            fd = os.open(path, flags | os.O_APPEND | os.O_CREAT | os.O_CLOEXEC | os.O_NONBLOCK, 0o666)
        except OSError as exc:
            raise _os_error(exc, error_type, what, str(path)) from None
        try:
            st = os.fstat(fd)
            _refuse_special(st.st_mode, error_type, what, str(path))
            size = st.st_size
            if repair_partial and size:
                keep = _last_newline_end(fd, size)
                if keep < size:
                    os.ftruncate(fd, keep)
                    warnings.append(
                        f"{path}: removed a partial last line ({size - keep} bytes) left by an interrupted run"
                    )
                    size = keep
            try:
                view = memoryview(data)
                while view:
                    written = os.write(fd, view)
                    view = view[written:]
                os.fsync(fd)
            except OSError:
                with contextlib.suppress(OSError):
                    os.ftruncate(fd, size)
                raise
        except OSError as exc:
            raise error_type(
                f"cannot append to the {what}: {exc.strerror}",
                source=str(path),
                hint="check the disk is not full and the file is writable",
            ) from None
        finally:
            os.close(fd)
    return warnings


def _rotate_if_full(path: Path, adding: int, limit: int, error_type: type[AdvisorError], what: str) -> None:
    """Rename ``path`` to ``NAME.1`` when ``adding`` more bytes would take it past ``limit``."""
    try:
        st = os.stat(path)
    except FileNotFoundError:
        return
    except OSError as exc:
        raise _os_error(exc, error_type, what, str(path)) from None
    _refuse_special(st.st_mode, error_type, what, str(path))
    if st.st_size and st.st_size + adding > limit:
        try:
            os.replace(path, path.with_name(path.name + ".1"))
        except OSError as exc:
            raise error_type(
                f"cannot move the full {what} aside to {path.name}.1: {exc.strerror}",
                source=str(path),
                hint="check the folder is writable",
            ) from None
        fsync_folder(path.parent if str(path.parent) else ".")


def _last_newline_end(fd: int, size: int, chunk: int = 65536) -> int:
    """Offset just past the last newline of the open file ``fd`` of ``size`` bytes (0 if none)."""
    end = size
    while end > 0:
        start = max(0, end - chunk)
        block = os.pread(fd, end - start, start)
        if end == size and block.endswith(b"\n"):
            return size
        cut = block.rfind(b"\n")
        if cut >= 0:
            return start + cut + 1
        end = start
    return 0
