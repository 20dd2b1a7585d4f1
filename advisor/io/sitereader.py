"""Walking a parsed site file with key paths: every problem becomes one :class:`SiteError`
naming the key path and its line, with a hint.  Used by :mod:`advisor.io.site` and
:mod:`advisor.io.feedlayout`."""

from __future__ import annotations

import difflib
from pathlib import Path
from typing import Any

from advisor.errors import SiteError
from advisor.text import clean_text


class Reader:
    """Walks the YAML data with key paths, turning every problem into a SiteError."""

    def __init__(self, data: dict, lines: dict, source: str) -> None:
        self.data, self.lines, self.source = data, lines, source

    def fail(self, path: tuple, message: str, hint: str | None = None) -> SiteError:
        line = None
        for n in range(len(path), -1, -1):
            if path[:n] in self.lines:
                line = self.lines[path[:n]]
                break
        dotted = ".".join(str(p) for p in path) or "<top>"
        return SiteError(message, source=self.source, line=line, field=dotted, hint=hint)

    def section(self, path: tuple, known: set[str], required: bool = False) -> dict:
        value = self.get_raw(path)
        if value is None:
            if required:
                raise self.fail(path, "missing section", hint=f"add '{path[-1]}:' with {sorted(known)}")
            return {}
        if not isinstance(value, dict):
            raise self.fail(path, f"expected a mapping, got {type(value).__name__}")
        for key in value:
            if key not in known:
                if clean_text(key) != str(key):
                    raise self.fail(
                        path + (key,),
                        "unknown key: it contains control characters or escape sequences",
                        hint="retype the key; known keys: " + ", ".join(sorted(known)),
                    )
                close = difflib.get_close_matches(str(key), sorted(known), n=1)
                hint = f"did you mean '{close[0]}'?" if close else f"known keys: {', '.join(sorted(known))}"
                raise self.fail(path + (key,), "unknown key", hint=hint)
        return value

    def get_raw(self, path: tuple) -> Any:
        node: Any = self.data
        for key in path:
            if (
                isinstance(node, dict)
                and key in node
                or isinstance(node, list)
                and isinstance(key, int)
                and key < len(node)
            ):
                node = node[key]
            else:
                return None
        return node

    def number(
        self,
        path: tuple,
        default: float | None = None,
        lo: float | None = None,
        hi: float | None = None,
        required: bool = False,
    ) -> float:
        value = self.get_raw(path)
        if value is None:
            if required or default is None:
                raise self.fail(path, "missing value", hint="add a number")
            return float(default)
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise self.fail(path, f"expected a number, got {value!r}", hint="write a plain number, e.g. 4.0")
        try:
            value = float(value)
        except OverflowError:
            raise self.fail(path, "number too large", hint="write a plain number, e.g. 4.0") from None
        if value != value:
            raise self.fail(path, "expected a number, got NaN")
        if (lo is not None and value < lo) or (hi is not None and value > hi):
            raise self.fail(path, f"{value:g} is outside {lo:g}..{hi:g}")
        return value

    def text(self, path: tuple, default: str | None = None, required: bool = False) -> str | None:
        value = self.get_raw(path)
        if value is None:
            if required:
                raise self.fail(path, "missing value", hint="add a text value")
            return default
        if not isinstance(value, str):
            raise self.fail(path, f"expected text, got {value!r}", hint="quote the value")
        return value

    def path_value(self, path: tuple, base: Path) -> Path | None:
        value = self.text(path)
        if value is None:
            return None
        p = Path(value).expanduser()
        return p if p.is_absolute() else (base / p)
