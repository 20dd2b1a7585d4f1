"""Files the advisor reads and writes: size checks before reading, atomic replacement when writing.

    size = regular_file_size(path, FeedError, "feed", max_bytes=...)   # clear errors, nothing read
    atomic_write_text(path, text)     # temp file beside it + fsync + rename + folder fsync
    with locked(path, RegistryError):  # exclusive flock on a sidecar '.NAME.lock'
        ...read, modify, atomic_write_text...
"""

from __future__ import annotations

import errno
import fcntl
import os
import secrets
import stat
import time
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from advisor.errors import AdvisorError

LOCK_WAIT_S = 30.0


def regular_file_size(path: Path, error_type: type[AdvisorError], what: str, max_bytes: int | None = None,
                      empty_hint: str | None = None) -> int:
    """Size of an existing, non-empty regular file [bytes]; ``error_type`` with a clear message otherwise.

    ``what`` names the kind of file in messages ("feed", "rule file", ...).
    """
    source = str(path)
    try:
        size = path.stat().st_size
    except FileNotFoundError:
        raise error_type(f"{what} not found", source=source, hint="check the path") from None
    except OSError as exc:
        raise error_type(f"cannot read {what}: {exc.strerror}", source=source) from None
    if path.is_dir():
        raise error_type(f"is a directory, expected a {what}", source=source)
    if size == 0:
        raise error_type(f"{what} is empty", source=source, hint=empty_hint)
    if max_bytes is not None and size > max_bytes:
        raise error_type(f"{what} is {size / 1e6:.0f} MB, above the {max_bytes / 1e6:.0f} MB limit", source=source,
                         hint="split it into smaller files")
    return size


def atomic_write_text(path: Path | str, text: str) -> None:
    """Replace ``path`` with ``text`` atomically: a reader sees the old file or the new one, never half.

    The temporary file is created beside ``path`` with the usual permissions (0666 less the
    umask), fsynced, renamed over ``path``, and the folder is fsynced.  On any failure the
    temporary file is removed and ``path`` is untouched.
    """
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    tmp = folder / f".{path.name}.{os.getpid()}.{secrets.token_hex(4)}.tmp"
    fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="") as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
    try:
        dir_fd = os.open(folder, os.O_RDONLY)
        try:
            os.fsync(dir_fd)
        finally:
            os.close(dir_fd)
    except OSError:
        pass


def lock_path(path: Path | str) -> Path:
    """The sidecar lock file of ``path``: ``.NAME.lock`` in the same folder (never removed)."""
    path = Path(path)
    return path.with_name(f".{path.name}.lock")


@contextmanager
def locked(path: Path | str, error_type: type[AdvisorError], what: str = "file",
           wait_s: float = LOCK_WAIT_S) -> Iterator[None]:
    """Hold an exclusive ``flock`` on ``path``'s sidecar lock file while the block runs.

    Every writer of a shared file (the reference registry, the attempt history) holds it around
    its whole read-modify-write, so concurrent writers take turns and none loses another's
    change.  The lock is a separate file because the data file itself is replaced by rename.
    Waits up to ``wait_s`` seconds, then raises ``error_type``.
    """
    target = Path(path)
    lock = lock_path(target)
    try:
        fd = os.open(lock, os.O_RDWR | os.O_CREAT | os.O_CLOEXEC | os.O_NOFOLLOW | os.O_NONBLOCK, 0o666)
    except OSError as exc:
        if exc.errno == errno.ENOENT:
            raise error_type("folder does not exist", source=str(target.parent), hint="create it first") from None
        raise error_type(f"cannot create the lock file {lock.name}: {exc.strerror}", source=str(target),
                         hint="check the folder is writable") from None
    try:
        if not stat.S_ISREG(os.fstat(fd).st_mode):
            raise error_type(f"lock file {lock.name} is not a regular file", source=str(lock),
                             hint="remove it; the advisor recreates it")
        deadline = time.monotonic() + max(0.0, wait_s)
        pause = 0.002
        while True:
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
                break
            except BlockingIOError:
                if time.monotonic() >= deadline:
                    raise error_type(f"another advisor has been writing the {what} for {wait_s:g} s; nothing was "
                                     "changed", source=str(target),
                                     hint="try again; if this repeats, look for a hung advisor process") from None
                time.sleep(pause)
                pause = min(pause * 2, 0.05)
        yield
    finally:
        os.close(fd)  # releases the lock
