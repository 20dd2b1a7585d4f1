"""A cache of an archive's features between replays: the rules change, the weather does not.

Staff replay the same season again and again while they tune rules.  The features of every
archive row (sun, moisture, wind windows, reference, calibrators) do not depend on the rules, so
``advisor replay`` keeps them in ``$ADVISOR_CACHE_DIR/replay`` (default
``$XDG_CACHE_HOME/advisor/replay`` or ``~/.cache/advisor/replay``), keyed by a hash of everything they are computed from:

* the bytes of the archive, the site file and the reference registry;
* the replayed period and the feed layout;
* the features' version and the source of every module that computes them (the caller passes
  both: :data:`advisor.features.FEATURES_VERSION`, :func:`advisor.features.feature_source_paths`).

The row features do not depend on the target frequency, so one entry serves every frequency.
A change to any of these gives a new key, so an entry is never stale.

An entry is a directory ``KEY/`` holding ``manifest.json`` and raw little-endian arrays
(:mod:`advisor.io.columnfiles`: each column in the smallest form that keeps every bit, coded
columns packed side by side into shared lanes), memory-mapped when read: no pickle, nothing
executed, and opening one takes milliseconds whatever its length.  It is written a chunk at a
time (:class:`Writer`) under a temporary name renamed into place at the end, so a reader sees a
whole entry or none, and read back chunk by chunk (:meth:`Entry.chunks`) with the same chunk
boundaries, columns, dtypes and bits.  A damaged entry is removed and recomputed.  Only the
newest :data:`MAX_ENTRIES` are kept.

The caller decides what to keep: a replay stores only the row features that cannot be
recomputed cheaply (``advisor.features.STORED_ROW_FEATURES``) and completes each chunk it reads
(``advisor.features.complete_row_features``), so an entry is smaller than the archive's CSV.
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import os
import re
import secrets
import shutil
import time
from collections.abc import Iterator
from pathlib import Path

import pandas as pd

from advisor.io.columnfiles import ColumnWriter, DamagedEntry, pack_lanes
from advisor.io.columnread import ColumnReader, map_lanes
from advisor.io.jsoncache import cache_root

MAX_ENTRIES = 3
FORMAT = "advisor-feature-cache"
VERSION = 2
#: A writer's temporary directory older than this is one whose process died [s].
STALE_TMP_S = 86_400.0
#: A file modified this close to being hashed is hashed again next time [s] (its content may
#: change within the resolution of its modification time).
SETTLE_S = 2.0
#: Remembered file digests kept.
MAX_HASHES = 64
_HASHES = "hashes.json"
_KEY = re.compile(r"[0-9A-Za-z_-]{1,128}")


def cache_dir() -> Path:
    """Where entries live (created on first store): the ``replay`` folder of the advisor's cache
    (:func:`advisor.io.jsoncache.cache_root`), beside the other kinds."""
    return cache_root() / "replay"


def _file_digest(path: Path, memo: dict) -> str:
    """The digest of a file's bytes, remembered by its identity (see the module's text)."""
    st = path.stat()
    identity = [st.st_dev, st.st_ino, st.st_size, st.st_mtime_ns, st.st_ctime_ns]
    name = str(path.resolve())
    known = memo.get(name)
    if isinstance(known, list) and len(known) == 2 and known[0] == identity and isinstance(known[1], str):
        return known[1]
    digest = hashlib.blake2b(digest_size=20)
    with path.open("rb") as fh:
        for block in iter(lambda: fh.read(1 << 22), b""):
            digest.update(block)
    if time.time() - st.st_mtime_ns / 1e9 > SETTLE_S:  # a file written just now may change within its mtime
        memo[name] = [identity, digest.hexdigest()]
    return digest.hexdigest()


def _read_memo() -> dict:
    try:
        memo = json.loads((cache_dir() / _HASHES).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {}
    return memo if isinstance(memo, dict) else {}


def _write_memo(memo: dict) -> None:
    """Keep the newest :data:`MAX_HASHES` remembered digests (atomically; failures are skipped)."""
    folder = cache_dir()
    tmp = folder / f".{_HASHES}.{os.getpid()}.{secrets.token_hex(4)}.tmp"
    try:
        folder.mkdir(parents=True, exist_ok=True)
        kept = dict(list(memo.items())[-MAX_HASHES:])
        tmp.write_text(json.dumps(kept), encoding="utf-8")
        os.replace(tmp, folder / _HASHES)
    except OSError:
        with contextlib.suppress(OSError):
            tmp.unlink()


def key_for(
    feed_path: Path,
    site_path: Path | None,
    registry_path: Path | None,
    settings: dict,
    code_paths=(),
    features_version: int = 0,
) -> str:
    """The cache key of one replay's features: inputs, settings, feature code and its version.

    Each file counts by the digest of its bytes; the digests of the inputs are remembered by file
    identity (device, inode, size, modification and change times) in ``hashes.json`` beside the
    entries, so a long archive is hashed once, not on every replay.  A file changed in any of
    those, or modified within :data:`SETTLE_S` of being hashed, is hashed again.
    """
    memo = _read_memo()
    before = dict(memo)
    digest = hashlib.blake2b(digest_size=20)
    for path in (feed_path, site_path, registry_path):
        if path is None or not Path(path).exists():
            digest.update(b"<none>")
        else:
            digest.update(_file_digest(Path(path), memo).encode())
        digest.update(b"\0")
    for path in code_paths:
        digest.update(Path(path).read_bytes())
        digest.update(b"\0")
    digest.update(json.dumps({"features_version": features_version, **settings}, sort_keys=True, default=str).encode())
    if memo != before:
        _write_memo(memo)
    return digest.hexdigest()


def _entry_dir(key: str) -> Path:
    if not _KEY.fullmatch(key):
        raise ValueError(f"not a cache key: {key!r}")
    return cache_dir() / key


# --------------------------------------------------------------------------- writing
class Writer:
    """Write one entry a chunk at a time: :meth:`add` each chunk, then :meth:`commit` (or :meth:`abort`).

    Every chunk has the same columns with the same dtypes (ValueError otherwise; TypeError for a
    dtype that cannot be kept).  A failure to write (disk full, unwritable cache folder) abandons
    the entry quietly: the cache is an optimisation, never a reason to fail.  As a context
    manager it commits on a clean exit and aborts on an exception.
    """

    def __init__(self, key: str) -> None:
        self.key = key
        target = _entry_dir(key)
        self.rows = 0
        self._columns: list[ColumnWriter] = []
        self._chunks: list[list[int]] = []
        self._folder: Path | None = None
        try:
            target.parent.mkdir(parents=True, exist_ok=True)
            self._folder = target.parent / f".{key}.{os.getpid()}.{secrets.token_hex(4)}.tmp"
            self._folder.mkdir()
        except OSError:
            self._folder = None

    def __enter__(self) -> Writer:
        return self

    def __exit__(self, exc_type, exc, tb) -> None:
        if exc_type is None:
            self.commit()
        else:
            self.abort()

    def add(self, frame: pd.DataFrame) -> None:
        """Append one chunk (its columns, dtypes and values; a RangeIndex's start and step)."""
        if self._folder is None:
            return
        names = list(frame.columns)
        if not self._columns:
            if len(set(names)) != len(names) or not all(isinstance(n, str) for n in names):
                raise ValueError("cached columns need distinct string names")
        elif names != [c.name for c in self._columns]:
            raise ValueError("the columns changed between chunks")
        index = frame.index
        start, step = (index.start, index.step) if isinstance(index, pd.RangeIndex) else (0, 1)
        try:
            if not self._columns:
                self._columns = [ColumnWriter(self._folder, i, frame[name]) for i, name in enumerate(names)]
            for column in self._columns:
                column.add(frame[column.name], self.rows)
        except OSError:
            self.abort()
            return
        except BaseException:
            self.abort()
            raise
        self.rows += len(frame)
        self._chunks.append([len(frame), int(start), int(step)])

    def commit(self) -> None:
        """Publish the entry (atomically: a rename); a concurrent writer of the same key may win."""
        if self._folder is None:
            return
        folder = self._folder
        try:
            metas = [c.finish() for c in self._columns]
            lanes = pack_lanes(folder, self._columns, metas, self.rows)
            manifest = {
                "format": FORMAT,
                "version": VERSION,
                "key": self.key,
                "rows": self.rows,
                "chunks": self._chunks,
                "lanes": lanes,
                "columns": metas,
            }
            (folder / "manifest.json").write_text(json.dumps(manifest), encoding="utf-8")
            target = folder.parent / self.key
            try:
                os.rename(folder, target)  # fails when the key exists: the same content is there
            except OSError:
                shutil.rmtree(folder, ignore_errors=True)
            self._folder = None
            with contextlib.suppress(OSError):
                os.utime(target)
                _prune(target.parent)
        except OSError:
            self.abort()

    def abort(self) -> None:
        """Remove the partial entry."""
        for column in self._columns:
            if column.fh is not None:
                with contextlib.suppress(OSError):
                    column.fh.close()
        if self._folder is not None:
            shutil.rmtree(self._folder, ignore_errors=True)
        self._folder = None


def _prune(folder: Path) -> None:
    """Keep the newest :data:`MAX_ENTRIES`; drop older formats and temporaries of dead writers."""
    entries = []
    now = time.time()
    for path in folder.iterdir():
        with contextlib.suppress(OSError):
            if path.name.startswith("."):
                if path.name.endswith(".tmp") and now - path.stat().st_mtime > STALE_TMP_S:
                    shutil.rmtree(path) if path.is_dir() else path.unlink()
            elif path.suffix == ".npz":  # an entry of the first format
                path.unlink()
            elif path.is_dir():
                entries.append((path.stat().st_mtime, path.name, path))
    for _, _, old in sorted(entries, reverse=True)[MAX_ENTRIES:]:
        shutil.rmtree(old, ignore_errors=True)


# --------------------------------------------------------------------------- reading
class Entry:
    """A stored entry, memory-mapped.  ``rows``: total rows; ``chunk_rows``: rows of each chunk."""

    def __init__(self, folder: Path, manifest: dict) -> None:
        self.folder = folder
        self.rows = int(manifest["rows"])
        chunks = manifest["chunks"]
        self.chunk_rows = [int(c[0]) for c in chunks]
        self._index = [(int(c[1]), int(c[2])) for c in chunks]
        if sum(self.chunk_rows) != self.rows or any(r < 0 for r in self.chunk_rows):
            raise DamagedEntry("chunks do not add up")
        lanes = map_lanes(folder, manifest["lanes"], self.rows)
        self._columns = [ColumnReader(folder, m, self.rows, lanes, len(chunks)) for m in manifest["columns"]]

    @property
    def columns(self) -> list[str]:
        return [c.name for c in self._columns]

    def chunks(self) -> Iterator[pd.DataFrame]:
        """The stored frames, chunk by chunk, as they were added.

        Raises DamagedEntry (and removes the entry) if a file was altered in place after it was
        opened; its size was checked when it was opened.
        """
        start = 0
        for number, n in enumerate(self.chunk_rows):
            index_start, step = self._index[number]
            index = pd.RangeIndex(index_start, index_start + n * step, step)
            try:
                data = {c.name: c.chunk(number, start, start + n) for c in self._columns}
            except DamagedEntry:
                shutil.rmtree(self.folder, ignore_errors=True)
                raise
            for c in self._columns:  # objects stay objects (a frame would infer strings)
                if c.kind == "string" and c.meta["dtype"] == "object":
                    data[c.name] = pd.Series(data[c.name], index=index, dtype=object, copy=False)
            yield pd.DataFrame(data, index=index, copy=False)
            start += n


def open_entry(key: str) -> Entry | None:
    """The stored entry for ``key``, or None (missing, or damaged: a damaged entry is removed)."""
    folder = _entry_dir(key)
    if not folder.is_dir():
        return None
    try:
        manifest = json.loads((folder / "manifest.json").read_text(encoding="utf-8"))
        if manifest.get("format") != FORMAT or manifest.get("version") != VERSION or manifest.get("key") != key:
            raise DamagedEntry("not an entry of this format")
        entry = Entry(folder, manifest)
    except (OSError, ValueError, KeyError, TypeError, IndexError, AttributeError):
        shutil.rmtree(folder, ignore_errors=True)
        return None
    with contextlib.suppress(OSError):
        os.utime(folder)  # most recently used
    return entry


__all__ = ["MAX_ENTRIES", "DamagedEntry", "Entry", "Writer", "cache_dir", "key_for", "open_entry"]
