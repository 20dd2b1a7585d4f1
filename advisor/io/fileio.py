"""Files the advisor reads and writes: one bounded reader, locked atomic writers.

    raw = read_bytes_bounded(path, RulesError, "rules")          # regular file, size-capped, whole
    text = read_text_bounded(path, SiteError, "site")            # ... decoded: UTF-8, BOM accepted
    with open_regular(path, FeedError, "feed") as (fh, size):    # a stream, for large files
        ...
    atomic_write_text(path, text)      # temp file beside it + fsync + rename + folder fsync
    with locked(path, RegistryError):  # exclusive flock on a sidecar '.NAME.lock'
        ...read, modify, atomic_write_text...
    update_text_locked(path, change, RegistryError, "registry")  # the same in one call
    refuse_overwrite(out_path, {"--feed": feed_path}, "--csv")   # an output must not be an input

Every file is checked before a byte of it is read: the path must be text without NUL and
within the system's length limits, the file must exist, be a regular file (never a FIFO,
device, socket or directory: reading those can block forever or never end) and be no larger
than the cap of its kind (:data:`KINDS`).  It is opened with ``O_NONBLOCK`` and checked again on
the open descriptor, so a file swapped for a FIFO in between cannot hang the call, and never
more than the cap (plus one byte to notice growth) is read.  Text is UTF-8; a UTF-8 byte-order
mark (spreadsheets write one) is accepted, UTF-16 and UTF-32 are recognised and named.
"""

from __future__ import annotations

import contextlib
import errno
import fcntl
import os
import secrets
import stat
import time
from collections.abc import Callable, Iterable, Iterator, Mapping
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import BinaryIO, TextIO

from advisor.errors import AdvisorError, UsageError
from advisor.io.encoding import decode_text, encoding_error, repeated_csv_column, sniff_encoding_problem

__all__ = [
    "KINDS",
    "FileKind",
    "atomic_write_text",
    "check_path",
    "decode_text",
    "encoding_error",
    "fsync_folder",
    "lock_path",
    "locked",
    "open_regular",
    "read_bytes_bounded",
    "read_text_bounded",
    "refuse_overwrite",
    "repeated_csv_column",
    "sniff_encoding_problem",
    "stat_regular",
    "update_text_locked",
]


@dataclass(frozen=True)
class FileKind:
    """A kind of file the advisor reads: its name in messages, its size cap and how to fix "too big"."""

    what: str
    max_bytes: int
    too_big_hint: str


#: Size cap of every kind of file read [bytes].  Caps are far above any honest file of the kind
#: and far below what would exhaust memory.
KINDS: dict[str, FileKind] = {
    "feed": FileKind("feed file", 600_000_000, "split the archive by month and process each part"),
    "site": FileKind("site file", 2_000_000, "a site file is a few kB of YAML; is this the right file?"),
    "rules": FileKind("rule file", 2_000_000, "split the rules into several files, or remove generated content"),
    "registry": FileKind(
        "reference registry", 20_000_000, "a registry holds one short line per reference scan; is this the right file?"
    ),
    "history": FileKind("history file", 200_000_000, "split the history by year"),
    "model": FileKind("model file", 1_000_000, "a site model is a few kB of JSON; is this the right file?"),
    "state": FileKind("state file", 5_000_000, "a state file is a few kB; is this the right file?"),
    "yaml": FileKind("YAML file", 2_000_000, "split the file or remove generated content"),
}

PATH_MAX = 4096  # Linux PATH_MAX [bytes], including the terminating NUL
NAME_MAX = 255  # longest file or folder name [bytes]
LOCK_WAIT_S = 30.0

_FILE_TYPES = (
    (stat.S_ISFIFO, "a named pipe (FIFO)"),
    (stat.S_ISCHR, "a character device"),
    (stat.S_ISBLK, "a block device"),
    (stat.S_ISSOCK, "a socket"),
)


def _kind(kind: str | FileKind) -> FileKind:
    return KINDS[kind] if isinstance(kind, str) else kind


def _size_text(n: int) -> str:
    return f"{n:,} bytes" if n < 10_000_000 else f"{n / 1e6:,.0f} MB"


def _limit_text(n: int) -> str:
    return f"{n:,}-byte" if n < 10_000_000 else f"{n / 1e6:,.0f} MB"


def check_path(path: Path | str, error_type: type[AdvisorError], what: str = "file") -> Path:
    """``path`` as a :class:`Path` if it can name a file at all; one clear error otherwise.

    Refuses an empty path, a NUL character (the system cannot open such a name) and paths or
    names longer than the system allows, before any system call sees them.
    """
    text = os.fspath(path)
    if isinstance(text, bytes):  # pragma: no cover - the CLI only passes str
        text = os.fsdecode(text)
    if text == "":
        raise error_type(f"empty path given for the {what}", hint="give the path of the file")
    if "\x00" in text:
        raise error_type(
            f"the {what} path contains a NUL character",
            source=text.replace("\x00", "\\0"),
            hint="check how the path was built; a file name cannot contain NUL",
        )
    encoded = os.fsencode(text)
    if len(encoded) >= PATH_MAX:
        raise error_type(
            f"the {what} path is {len(encoded):,} bytes long, above the system's limit of {PATH_MAX - 1:,}",
            source=text,
            hint="use a shorter path",
        )
    longest = max((len(part) for part in encoded.split(b"/")), default=0)
    if longest > NAME_MAX:
        raise error_type(
            f"a name in the {what} path is {longest:,} bytes long, above the system's limit of {NAME_MAX}",
            source=text,
            hint="use shorter file and folder names",
        )
    return Path(text)


def _os_error(exc: OSError, error_type: type[AdvisorError], what: str, source: str) -> AdvisorError:
    """A system error while locating or opening a file, as one clear line."""
    code = exc.errno
    if code == errno.ENOENT:
        return error_type(f"{what} not found", source=source, hint="check the path")
    if code == errno.ENOTDIR:
        return error_type(f"{what} not found: a folder in the path is a file", source=source, hint="check the path")
    if code in (errno.EACCES, errno.EPERM):
        return error_type(
            f"permission denied reading the {what}", source=source, hint="check the file's and its folders' permissions"
        )
    if code == errno.ELOOP:
        return error_type(
            f"too many symbolic links in the {what} path", source=source, hint="a link probably points to itself"
        )
    if code == errno.ENAMETOOLONG:
        return error_type(f"the {what} path is too long for the system", source=source, hint="use a shorter path")
    if code == errno.EISDIR:
        return error_type(f"is a directory, expected a {what}", source=source, hint="give the path of a file")
    return error_type(f"cannot read the {what}: {exc.strerror or exc}", source=source)


def _refuse_special(mode: int, error_type: type[AdvisorError], what: str, source: str) -> None:
    if stat.S_ISREG(mode):
        return
    if stat.S_ISDIR(mode):
        raise error_type(f"is a directory, expected a {what}", source=source, hint="give the path of a file")
    name = next((label for test, label in _FILE_TYPES if test(mode)), "not a regular file")
    raise error_type(
        f"is {name}, not a regular file; expected a {what}",
        source=source,
        hint=f"give the path of a saved {what}; the advisor does not read pipes or devices",
    )


def stat_regular(
    path: Path | str,
    error_type: type[AdvisorError],
    kind: str | FileKind,
    missing_ok: bool = False,
    empty_ok: bool = True,
    empty_hint: str | None = None,
) -> os.stat_result | None:
    """``os.stat`` of an existing regular file within its kind's size cap; nothing is read.

    Returns ``None`` for a missing file when ``missing_ok``.  Raises ``error_type`` with one
    clear line for a bad path, a missing file, a directory, FIFO, device or socket, an empty
    file (unless ``empty_ok``) or a file above the cap.
    """
    spec = _kind(kind)
    path = check_path(path, error_type, spec.what)
    source = str(path)
    try:
        st = os.stat(path)
    except FileNotFoundError:
        if missing_ok:
            return None
        raise error_type(f"{spec.what} not found", source=source, hint="check the path") from None
    except OSError as exc:
        raise _os_error(exc, error_type, spec.what, source) from None
    except ValueError:  # pragma: no cover - check_path refuses NUL already
        raise error_type(f"invalid {spec.what} path", source=source) from None
    _refuse_special(st.st_mode, error_type, spec.what, source)
    _check_size(st.st_size, error_type, spec, source, empty_ok, empty_hint)
    return st


def _check_size(
    size: int, error_type: type[AdvisorError], spec: FileKind, source: str, empty_ok: bool, empty_hint: str | None
) -> None:
    if size == 0 and not empty_ok:
        raise error_type(
            f"{spec.what} is empty",
            source=source,
            hint=empty_hint or "a truncated or unsaved file looks the same; check the file",
        )
    if size > spec.max_bytes:
        raise error_type(
            f"{spec.what} is {_size_text(size)}, above the {_limit_text(spec.max_bytes)} limit for a {spec.what}",
            source=source,
            hint=spec.too_big_hint,
        )


@contextmanager
def open_regular(
    path: Path | str,
    error_type: type[AdvisorError],
    kind: str | FileKind,
    empty_ok: bool = False,
    empty_hint: str | None = None,
) -> Iterator[tuple[BinaryIO, int]]:
    """Open a regular file for binary reading without ever blocking: yields ``(file, size)``.

    The path is checked with :func:`stat_regular`, opened with ``O_NONBLOCK`` (opening a FIFO
    for reading would otherwise wait for a writer) and the open descriptor is checked again,
    so a file replaced by a FIFO or device between the two steps is refused too.
    """
    spec = _kind(kind)
    stat_regular(path, error_type, spec, empty_ok=empty_ok, empty_hint=empty_hint)
    source = str(path)
    try:
        fd = os.open(path, os.O_RDONLY | os.O_NONBLOCK | os.O_CLOEXEC | getattr(os, "O_NOCTTY", 0))
    except OSError as exc:
        raise _os_error(exc, error_type, spec.what, source) from None
    try:
        st = os.fstat(fd)
        _refuse_special(st.st_mode, error_type, spec.what, source)
        _check_size(st.st_size, error_type, spec, source, empty_ok, empty_hint)
        fh = os.fdopen(fd, "rb")
    except BaseException:
        os.close(fd)
        raise
    with fh:
        yield fh, st.st_size


def read_bytes_bounded(
    path: Path | str,
    error_type: type[AdvisorError],
    kind: str | FileKind,
    missing_ok: bool = False,
    empty_ok: bool = False,
    empty_hint: str | None = None,
) -> bytes | None:
    """The whole content of a regular file of ``kind``, never more than its cap.

    ``None`` for a missing file when ``missing_ok``.  A file that grows past the cap while it is
    being read is refused as too big.
    """
    spec = _kind(kind)
    if missing_ok and stat_regular(path, error_type, spec, missing_ok=True) is None:
        return None
    with open_regular(path, error_type, spec, empty_ok=empty_ok, empty_hint=empty_hint) as (fh, _size):
        try:
            raw = fh.read(spec.max_bytes + 1)
        except OSError as exc:
            raise _os_error(exc, error_type, spec.what, str(path)) from None
    if len(raw) > spec.max_bytes:
        raise error_type(
            f"{spec.what} grew above the {_limit_text(spec.max_bytes)} limit while being read",
            source=str(path),
            hint=spec.too_big_hint,
        )
    if not raw and not empty_ok:
        raise error_type(
            f"{spec.what} is empty",
            source=str(path),
            hint=empty_hint or "a truncated or unsaved file looks the same; check the file",
        )
    return raw


def read_text_bounded(
    path: Path | str,
    error_type: type[AdvisorError],
    kind: str | FileKind,
    missing_ok: bool = False,
    empty_ok: bool = False,
    empty_hint: str | None = None,
    expected: str = "text",
) -> str | None:
    """:func:`read_bytes_bounded` then :func:`decode_text`."""
    spec = _kind(kind)
    raw = read_bytes_bounded(path, error_type, spec, missing_ok=missing_ok, empty_ok=empty_ok, empty_hint=empty_hint)
    if raw is None:
        return None
    return decode_text(raw, error_type, spec.what, str(path), expected)


# --- writing -------------------------------------------------------------------------------


def atomic_write_text(path: Path | str, text: str) -> None:
    """Replace ``path`` with ``text`` atomically (see :func:`atomic_writer`)."""
    with atomic_writer(path) as fh:
        fh.write(text)


@contextmanager
def atomic_writer(path: Path | str) -> Iterator[TextIO]:
    """A text file that replaces ``path`` atomically when the block ends without an error.

    A reader sees the old file or the new one, never half.  The temporary file is created
    beside ``path`` (with the old file's permissions, or 0666 less the umask for a new one),
    fsynced, renamed over ``path``, and the folder is fsynced.  On any failure, or an error in
    the block, the temporary file is removed and ``path`` is untouched.
    """
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    tmp = folder / f".{path.name}.{os.getpid()}.{secrets.token_hex(4)}.tmp"
    fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL | os.O_CLOEXEC, 0o666)
    try:
        try:
            old_mode = stat.S_IMODE(os.stat(path).st_mode)
        except OSError:
            old_mode = None
        if old_mode is not None:
            os.fchmod(fd, old_mode)
        with os.fdopen(fd, "w", encoding="utf-8", newline="") as fh:
            yield fh
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise
    fsync_folder(folder)


def fsync_folder(folder: Path | str) -> None:
    """Make a rename in ``folder`` durable (best effort: some file systems refuse)."""
    try:
        dir_fd = os.open(folder, os.O_RDONLY | os.O_DIRECTORY | os.O_CLOEXEC)
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
def locked(
    path: Path | str, error_type: type[AdvisorError], what: str = "file", wait_s: float = LOCK_WAIT_S
) -> Iterator[None]:
    """Hold an exclusive ``flock`` on ``path``'s sidecar lock file while the block runs.

    Every writer of a shared file (the reference registry, the attempt history, state files)
    holds it around its whole read-modify-write, so concurrent writers take turns and none
    loses another's change.  The lock is a separate file because the data file itself is
    replaced by rename.  Waits up to ``wait_s`` seconds, then raises ``error_type``.
    """
    target = check_path(path, error_type, what)
    lock = lock_path(target)
    try:
        fd = os.open(lock, os.O_RDWR | os.O_CREAT | os.O_CLOEXEC | os.O_NOFOLLOW | os.O_NONBLOCK, 0o666)
    except OSError as exc:
        if exc.errno == errno.ENOENT:
            raise error_type("folder does not exist", source=str(target.parent), hint="create it first") from None
        raise error_type(
            f"cannot create the lock file {lock.name}: {exc.strerror}",
            source=str(target),
            hint="check the folder is writable",
        ) from None
    try:
        if not stat.S_ISREG(os.fstat(fd).st_mode):
            raise error_type(
                f"lock file {lock.name} is not a regular file",
                source=str(lock),
                hint="remove it; the advisor recreates it",
            )
        deadline = time.monotonic() + max(0.0, wait_s)
        pause = 0.002
        while True:
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
                break
            except BlockingIOError:
                if time.monotonic() >= deadline:
                    raise error_type(
                        f"another advisor has been writing the {what} for {wait_s:g} s; nothing was changed",
                        source=str(target),
                        hint="try again; if this repeats, look for a hung advisor process",
                    ) from None
                time.sleep(pause)
                pause = min(pause * 2, 0.05)
        yield
    finally:
        os.close(fd)  # releases the lock


def update_text_locked(
    path: Path | str,
    change: Callable[[str | None], str],
    error_type: type[AdvisorError],
    kind: str | FileKind,
    wait_s: float = LOCK_WAIT_S,
) -> str:
    """Read ``path`` (``None`` if absent), apply ``change`` and atomically write the result, all under
    :func:`locked`; returns the text written.  ``change`` may raise to leave the file untouched."""
    spec = _kind(kind)
    with locked(path, error_type, spec.what, wait_s):
        old = read_text_bounded(path, error_type, spec, missing_ok=True, empty_ok=True)
        new = change(old)
        try:
            atomic_write_text(path, new)
        except OSError as exc:
            raise error_type(
                f"cannot write the {spec.what}: {exc.strerror}",
                source=str(path),
                hint="check the folder is writable and the disk is not full",
            ) from None
    return new


# --- outputs that would destroy inputs ----------------------------------------------------


def _same_file(a: Path, b: Path) -> bool:
    try:
        return os.path.samefile(a, b)
    except (OSError, ValueError):
        pass
    try:
        return os.path.realpath(a) == os.path.realpath(b)
    except (OSError, ValueError):  # an impossible input path: its own reader reports it
        return False


def refuse_overwrite(
    output_path: Path | str | None,
    input_paths: Mapping[str, Path | str | Iterable[Path | str] | None] | Iterable[Path | str | None],
    field: str,
) -> None:
    """Refuse an output path that names one of the command's input files.

    Compares by file identity (``os.path.samefile``: symbolic and hard links included) where
    both exist, else by resolved path.  ``input_paths`` maps option names to a path or a list
    of paths (for the message), or is a plain list of paths; ``None`` entries and ``-``
    (stdin/stdout) are ignored.

    Raises
    ------
    UsageError
        Naming ``field`` (the output option) and the input it would overwrite.
    """
    if output_path is None or str(output_path) == "-":
        return
    out = check_path(output_path, UsageError, "output")
    items: list[tuple[str | None, object]] = []
    if isinstance(input_paths, Mapping):
        for name, value in input_paths.items():
            many = value if isinstance(value, (list, tuple, set, frozenset)) else [value]
            items += [(name, p) for p in many]
    else:
        items = [(None, p) for p in input_paths]
    for name, candidate in items:
        if candidate is None or str(candidate) in ("-", ""):
            continue
        if _same_file(out, Path(str(candidate))):
            which = f"the {name} input" if name else "one of its inputs"
            raise UsageError(
                f"{out} is {which}; writing it would destroy the input",
                field=field,
                hint="write the output to another file",
            )
