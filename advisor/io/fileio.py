"""Files the advisor reads and writes: size checks before reading, atomic replacement when writing.

    size = regular_file_size(path, FeedError, "feed", max_bytes=...)   # clear errors, nothing read
    atomic_write_text(path, text)     # temp file beside it + fsync + rename + folder fsync
"""

from __future__ import annotations

import os
import secrets
from pathlib import Path

from advisor.errors import AdvisorError


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
