"""Pointing a site file at a new model file: one line changed, comments and layout kept.

    change = model_path_change(site_path, model_path)   # what would change, nothing written
    change.line_text                                      # the exact line, e.g. "  path: model_2.json"
    install_model_path(site_path, model_path)            # write it (atomically), return the change

The site file is YAML written by people, with comments; it is edited as text (never re-dumped),
and the result is read back by :func:`advisor.io.site.parse_site` before anything is written: the
edit must leave a valid site file whose ``model.path`` is the new file.
"""

from __future__ import annotations

import json
import os
import re
from dataclasses import dataclass
from pathlib import Path

from advisor.errors import SiteError
from advisor.io.fileio import atomic_write_text
from advisor.io.site import parse_site
from advisor.io.yamlio import parse_yaml_text

_TOP_MODEL = re.compile(r"^model\s*:(?P<rest>.*)$")
_PATH_KEY = re.compile(r"^(?P<indent>[ \t]+)path\s*:\s*(?P<value>[^#]*?)(?P<comment>\s+#.*)?$")
_PLAIN = re.compile(r"^[A-Za-z0-9_./+@-]+$")


@dataclass(frozen=True)
class PathChange:
    """The edit that points a site file at a model: new text, the changed line and its number."""

    text: str
    line: int  # 1-based line number of the new or changed line
    line_text: str  # that line as written
    old_value: str | None  # the path the site named before (as written), None if it named none


def yaml_path_text(model_path: Path, site_path: Path) -> str:
    """The model's path as the site file should name it: relative to the site's folder when inside it."""
    folder = site_path.resolve().parent
    target = model_path.resolve()
    try:
        text = str(target.relative_to(folder))
    except ValueError:
        text = str(target)
    return text if _PLAIN.match(text) else json.dumps(text, ensure_ascii=False)


def model_path_change(site_path: Path | str, model_path: Path | str) -> PathChange:
    """The text of ``site_path`` with ``model.path`` set to ``model_path`` (nothing written)."""
    site_path, model_path = Path(site_path), Path(model_path)
    source = str(site_path)
    try:
        text = site_path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise SiteError(f"cannot read the site file: {exc}", source=source) from None
    value = yaml_path_text(model_path, site_path)
    lines = text.splitlines(keepends=True)
    start = next((k for k, line in enumerate(lines) if _TOP_MODEL.match(line.rstrip("\r\n"))), None)
    old = None
    if start is None:
        if lines and not lines[-1].endswith("\n"):
            lines[-1] += "\n"
        lines += ["\n", "model:\n", f"  path: {value}\n"]
        changed = len(lines) - 1
    else:
        top = _TOP_MODEL.match(lines[start].rstrip("\r\n"))
        rest = top.group("rest").split("#")[0].strip() if top else ""
        if rest:
            raise SiteError(
                "model: is written on one line (flow style); cannot change it safely",
                source=source,
                line=start + 1,
                field="model",
                hint=f"write it as a block ('model:' then '  path: {value}' on the next line)",
            )
        end = start + 1
        while end < len(lines) and (not lines[end].strip() or lines[end][0] in " \t#"):
            end += 1
        found = ((k, _PATH_KEY.match(lines[k].rstrip("\r\n"))) for k in range(start + 1, end))
        at, m = next(((k, m) for k, m in found if m is not None), (None, None))
        if at is not None and m is not None:
            old = m.group("value").strip()
            newline = lines[at][len(lines[at].rstrip("\r\n")) :] or "\n"
            lines[at] = f"{m.group('indent')}path: {value}{m.group('comment') or ''}{newline}"
            changed = at
        else:
            indent = next(
                (
                    lines[k][: len(lines[k]) - len(lines[k].lstrip(" \t"))]
                    for k in range(start + 1, end)
                    if lines[k].strip() and not lines[k].lstrip().startswith("#")
                ),
                "  ",
            )
            lines.insert(start + 1, f"{indent}path: {value}\n")
            changed = start + 1
    new_text = "".join(lines)
    data, line_map = parse_yaml_text(new_text, source, SiteError)
    site = parse_site(data, line_map, source, site_path.resolve().parent)
    if site.model_path is None or os.path.realpath(site.model_path) != os.path.realpath(model_path):
        raise SiteError(
            "could not point the site file at the new model safely",
            source=source,
            field="model.path",
            hint=f"set it by hand: model: {{path: {value}}}",
        )
    return PathChange(new_text, changed + 1, lines[changed].rstrip("\r\n"), old)


def install_model_path(site_path: Path | str, model_path: Path | str) -> PathChange:
    """Point ``site_path`` at ``model_path`` (atomic replace of the site file); return the change."""
    change = model_path_change(site_path, model_path)
    try:
        atomic_write_text(Path(site_path), change.text)
    except OSError as exc:
        raise SiteError(
            f"cannot write the site file: {exc.strerror}", source=str(site_path), hint="check the folder is writable"
        ) from None
    return change
