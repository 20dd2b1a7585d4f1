"""A small cache of plain JSON documents keyed by the content they were made from.

    key = content_key([b"...", "..."], code_digest(["advisor.io.yamlio"]))   # the parts and that code
    doc = jsoncache.load("yaml", key)                                   # None: missing, damaged, other key
    jsoncache.store("yaml", key, doc)                                   # atomically; failures are silent

For work that gives the same result as long as its inputs do: the parse of a site or rule
file, a checked and compiled rule set (done on every ``check``).  Entries live beside the
replay's feature cache, one folder per kind: ``$ADVISOR_CACHE_DIR/KIND`` (by default
``$XDG_CACHE_HOME/advisor/KIND`` or ``~/.cache/advisor/KIND``), one ``KEY.json`` each.

* The key covers every input byte and the source of the code that turns the inputs into the
  document (:func:`code_digest`), so an entry is never stale: a change gives another key.
* An entry is plain JSON (never pickle, nothing in it is executed) holding its key and a digest
  of its document; an entry that cannot be read, is not JSON, names another key or whose
  document does not match its digest is ignored (the caller rebuilds and stores it again).
* Writes go to a temporary file renamed into place; only the newest :data:`MAX_ENTRIES` of a
  kind are kept.  A cache that cannot be written (no home folder, read-only disk) is skipped.
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import os
import secrets
from collections.abc import Iterable
from pathlib import Path

__all__ = ["MAX_ENTRIES", "cache_root", "code_digest", "content_key", "is_plain", "load", "store"]

#: Newest entries kept per kind.
MAX_ENTRIES = 32
#: Raise when the layout of an entry changes (entries of another layout are then never read).
FORMAT = 1
_PACKAGE = Path(__file__).resolve().parents[1]


def cache_root() -> Path:
    """The cache folder shared with the replay's feature cache (one folder per kind beneath)."""
    if os.environ.get("ADVISOR_CACHE_DIR"):
        return Path(os.environ["ADVISOR_CACHE_DIR"])
    return Path(os.environ.get("XDG_CACHE_HOME") or Path.home() / ".cache") / "advisor"


def code_digest(modules: Iterable[str]) -> str | None:
    """A digest of the source files of ``modules`` (``advisor.x.y`` names), read, not imported.

    None when one has no source file beside it (then nothing is cached).
    """
    digest = hashlib.blake2b(digest_size=20)
    for name in modules:
        parts = name.split(".")[1:]
        path = _PACKAGE.joinpath(*parts).with_suffix(".py") if parts else _PACKAGE / "__init__.py"
        if not path.is_file():
            path = _PACKAGE.joinpath(*parts, "__init__.py")
        try:
            digest.update(name.encode() + b"\0" + path.read_bytes() + b"\0")
        except OSError:
            return None
    return digest.hexdigest()


def content_key(parts: Iterable[bytes | str], code: str) -> str:
    """The key of a document made from ``parts`` (in order) by the code of digest ``code``."""
    digest = hashlib.blake2b(digest_size=20)
    digest.update(f"{FORMAT}\0{code}\0".encode())
    for part in parts:
        data = part.encode("utf-8", "surrogatepass") if isinstance(part, str) else part
        digest.update(f"{len(data)}:".encode())
        digest.update(data)
    return digest.hexdigest()


def is_plain(value) -> bool:
    """Whether ``value`` survives a JSON round trip unchanged: mappings with text keys, lists,
    text, booleans, integers and finite floats only (no dates, sets, tuples, NaN)."""
    kind = type(value)
    if kind in (str, bool, int) or value is None:
        return True
    if kind is float:
        return value - value == 0.0  # finite
    if kind is list:
        return all(is_plain(v) for v in value)
    if kind is dict:
        return all(type(k) is str and is_plain(v) for k, v in value.items())
    return False


def _digest(text: str) -> str:
    return hashlib.blake2b(text.encode("utf-8", "surrogatepass"), digest_size=20).hexdigest()


def _path(kind: str, key: str) -> Path:
    return cache_root() / kind / f"{key}.json"


def load(kind: str, key: str):
    """The document stored under ``key``, or None (missing, unreadable, damaged or another key's)."""
    try:
        with _path(kind, key).open("rb") as fh:
            entry = json.loads(fh.read())
        if not isinstance(entry, dict) or entry.get("format") != FORMAT or entry.get("key") != key:
            return None
        doc = entry["doc"]
        if entry.get("digest") != _digest(json.dumps(doc, allow_nan=False, sort_keys=True)):
            return None
        return doc
    except (OSError, ValueError, KeyError, TypeError, RecursionError, RuntimeError):  # RuntimeError: no home
        return None


def store(kind: str, key: str, doc) -> None:
    """Keep the plain-JSON ``doc`` under ``key`` (written beside, renamed into place); never raises."""
    tmp = None
    try:
        folder = cache_root() / kind
        body = json.dumps(doc, allow_nan=False, sort_keys=True)
        text = json.dumps({"format": FORMAT, "key": key, "digest": _digest(body), "doc": doc}, allow_nan=False)
        folder.mkdir(parents=True, exist_ok=True)
        tmp = folder / f".{key}.{os.getpid()}.{secrets.token_hex(4)}.tmp"
        tmp.write_text(text, encoding="utf-8")
        os.replace(tmp, folder / f"{key}.json")
        tmp = None
        entries = sorted(folder.glob("*.json"), key=_mtime, reverse=True)
        for old in entries[MAX_ENTRIES:]:
            old.unlink(missing_ok=True)
    except (OSError, ValueError, TypeError, RecursionError, RuntimeError):
        if tmp is not None:
            with contextlib.suppress(OSError):
                tmp.unlink(missing_ok=True)


def _mtime(path: Path) -> float:
    try:
        return path.stat().st_mtime
    except OSError:
        return 0.0
