"""Parsed YAML kept between runs: a site file is parsed once per content.

    data, lines = load_yaml_cached(path, SiteError)      # as advisor.io.yamlio.load_yaml

The file is read and checked as always (:func:`advisor.io.yamlio.read_yaml_text`: a regular
file within its size cap, UTF-8, not blank), but the parse of a text seen before comes from the
cache of :mod:`advisor.io.jsoncache` (kind ``yaml``), keyed by the text, the options and the
parser's code (this module, :mod:`advisor.io.yamlio` and PyYAML's version), so it is exactly what
parsing would give.  Only documents of plain JSON values are kept (a file with dates, non-text
keys, NaN or sets is parsed every time); a file with an error is never kept, so its error is
reported every time as without a cache.  An entry that is not a stored parse is ignored.
"""

from __future__ import annotations

import importlib.util
from pathlib import Path

from advisor.errors import AdvisorError
from advisor.io import jsoncache
from advisor.io.fileio import FileKind
from advisor.io.yamlio import KeyPath, parse_yaml_text, read_yaml_text

__all__ = ["load_yaml_cached"]

#: The code a parse depends on (read as text, nothing imported).
PARSER_MODULES = ("advisor.io.yamlio", "advisor.io.yamlcache", "advisor.io.jsoncache")


def load_yaml_cached(
    path: Path | str, error_type: type[AdvisorError], duplicate_keys: bool = True, kind: str | FileKind | None = None
):
    """:func:`advisor.io.yamlio.load_yaml`, the parse taken from the cache when the text was parsed before."""
    text = read_yaml_text(path, error_type, kind)
    code = _parser_digest()
    key = jsoncache.content_key([text, f"{duplicate_keys}"], code) if code else None
    if key is not None:
        hit = _from_stored(jsoncache.load("yaml", key))
        if hit is not None:
            return hit
    data, lines = parse_yaml_text(text, str(path), error_type, duplicate_keys)
    if key is not None and jsoncache.is_plain(data):
        jsoncache.store("yaml", key, {"data": data, "lines": [[list(p), n] for p, n in lines.items()]})
    return data, lines


def _parser_digest() -> str | None:
    """Digest of the parser's code: ours, and PyYAML's version (its ``__init__.py``, not imported)."""
    ours = jsoncache.code_digest(PARSER_MODULES)
    spec = importlib.util.find_spec("yaml")
    if ours is None or spec is None or spec.origin is None:
        return None
    try:
        theirs = Path(spec.origin).read_bytes()
    except OSError:
        return None
    return jsoncache.content_key([ours, theirs], "yaml")


def _from_stored(doc) -> tuple | None:
    """``(data, lines)`` from a stored parse, or None when it is not one."""
    if not isinstance(doc, dict) or not isinstance(doc.get("lines"), list) or "data" not in doc:
        return None
    lines: dict[KeyPath, int] = {}
    for item in doc["lines"]:
        if not (isinstance(item, list) and len(item) == 2 and isinstance(item[0], list) and type(item[1]) is int):
            return None
        if not all(type(k) in (str, int) for k in item[0]):
            return None
        lines[tuple(item[0])] = item[1]
    return doc["data"], lines
