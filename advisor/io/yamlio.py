"""Reading staff-edited YAML safely, keeping line numbers for error messages.

``load_yaml(path, error_type)`` returns ``(data, lines)`` where ``lines`` maps a key path
(tuple of keys/indices) to its 1-based line in the file.  Only the safe loader is used;
object-constructing tags, anchors/aliases (and so "billion laughs" bombs), tabs used for
indentation, duplicate keys (the second ``high_frequency_wind_limit_ms: 40`` would silently win),
numbers too large to be a physical value, empty and oversized files are refused with one clear
error.  Files are read with the bounded reader of :mod:`advisor.io.fileio` (regular files only,
UTF-8 with or without a BOM).
"""

from __future__ import annotations

import math
import re
from pathlib import Path
from typing import TYPE_CHECKING

from advisor.errors import AdvisorError
from advisor.io.fileio import KINDS, FileKind, read_text_bounded

if TYPE_CHECKING:
    import yaml

# PyYAML is imported where a text is parsed: a cached parse (load_yaml(..., cached=True)) needs none.

MAX_YAML_BYTES = KINDS["yaml"].max_bytes
MAX_YAML_NODES = 200_000
#: Largest magnitude of a number in a staff-edited file: every value is a physical quantity or a
#: count, and larger integers would lose precision (or overflow) as floats.
MAX_YAML_NUMBER = 1e15

_INT_TAG = "tag:yaml.org,2002:int"
_FLOAT_TAG = "tag:yaml.org,2002:float"
_SPECIAL_FLOAT = re.compile(r"^[-+]?\.(?:inf|Inf|INF|nan|NaN|NAN)$")

KeyPath = tuple


def _node_lines(
    root: yaml.Node, error_type: type[AdvisorError], source: str, duplicate_keys: bool = True
) -> dict[KeyPath, int]:
    """Map every key path in a composed YAML tree to its 1-based line.

    Refuses aliases, numbers out of range and (with ``duplicate_keys``) a key given twice in one
    mapping.
    """
    import yaml

    lines: dict[KeyPath, int] = {}
    seen: set[int] = set()
    stack: list[tuple[yaml.Node, KeyPath]] = [(root, ())]
    count = 0
    while stack:
        node, path = stack.pop()
        count += 1
        if count > MAX_YAML_NODES:
            raise error_type(
                f"more than {MAX_YAML_NODES} YAML nodes",
                source=source,
                hint="split the file or remove generated content",
            )
        if id(node) in seen:
            raise error_type(
                "YAML anchors and aliases are not supported",
                source=source,
                line=node.start_mark.line + 1,
                hint="write the values out in full",
            )
        seen.add(id(node))
        lines[path] = node.start_mark.line + 1
        if isinstance(node, yaml.MappingNode):
            first_line: dict[tuple, int] = {}
            for key_node, value_node in node.value:
                key = key_node.value if isinstance(key_node, yaml.ScalarNode) else str(key_node.value)
                line = key_node.start_mark.line + 1
                identity = (key_node.tag, key)
                if duplicate_keys and identity in first_line:
                    raise error_type(
                        f"key {key!r} given twice (first at line {first_line[identity]})",
                        source=source,
                        line=line,
                        column=key_node.start_mark.column + 1,
                        hint="keep one; YAML would silently use the last",
                    )
                first_line.setdefault(identity, line)
                lines[path + (key,)] = line
                if isinstance(key_node, yaml.ScalarNode) and key_node.tag in (_INT_TAG, _FLOAT_TAG):
                    _check_number(key_node, error_type, source)
                stack.append((value_node, path + (key,)))
        elif isinstance(node, yaml.SequenceNode):
            for i, item in enumerate(node.value):
                stack.append((item, path + (i,)))
        elif isinstance(node, yaml.ScalarNode) and node.tag in (_INT_TAG, _FLOAT_TAG):
            _check_number(node, error_type, source)
    return lines


def _check_number(node: yaml.ScalarNode, error_type: type[AdvisorError], source: str) -> None:
    """Refuse a numeric scalar that overflows or is too large to be a physical value."""
    text = node.value.replace("_", "").strip()
    if node.tag == _FLOAT_TAG and _SPECIAL_FLOAT.match(text):
        return  # an explicit .inf / .nan: the schema decides whether it is allowed
    digits = len(text.lstrip("+-"))
    too_large = digits > 40
    if not too_large:
        try:
            value = float(text) if node.tag == _FLOAT_TAG or not text.lstrip("+-").isdigit() else int(text)
            too_large = not math.isfinite(value) or abs(value) >= MAX_YAML_NUMBER
        except (ValueError, OverflowError):
            too_large = False  # sexagesimal, hex, ...: PyYAML builds it; the schema checks it
    if too_large:
        shown = text if len(text) <= 24 else f"{text[:12]}…{text[-6:]} ({digits} digits)"
        raise error_type(
            f"number {shown} is too large",
            source=source,
            line=node.start_mark.line + 1,
            column=node.start_mark.column + 1,
            hint="write a plain value below 1e15 in magnitude",
        )


def parse_yaml_text(text: str, source: str, error_type: type[AdvisorError], duplicate_keys: bool = True):
    """Parse YAML text safely; return ``(data, lines)``.

    ``duplicate_keys=False`` lets a caller that reports duplicated keys itself (the rule lint,
    which lists every problem of a file at once) see them.
    """
    import yaml

    if text.startswith("\ufeff"):
        text = text[1:]
    for number, raw in enumerate(text.splitlines(), start=1):
        stripped = raw.lstrip(" ")
        if stripped.startswith("\t"):
            raise error_type("tab used for indentation", source=source, line=number, hint="indent with spaces")
    # libyaml's safe loader where PyYAML was built with it (the wheels are), else the pure-Python one.
    loader = getattr(yaml, "CSafeLoader", yaml.SafeLoader)(text)
    try:
        root = loader.get_single_node()
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        line = mark.line + 1 if mark else None
        column = mark.column + 1 if mark else None
        what = exc.problem or "invalid YAML"
        raise error_type(
            f"YAML syntax error: {what}",
            source=source,
            line=line,
            column=column,
            hint="check indentation, colons and quotes",
        ) from None
    except yaml.reader.ReaderError as exc:
        line = text.count("\n", 0, exc.position) + 1 if isinstance(exc.position, int) else None
        what = f"control character U+{exc.character:04X}" if isinstance(exc.character, int) else "a character"
        raise error_type(
            f"{what} is not allowed in YAML",
            source=source,
            line=line,
            hint="remove it; write special characters with escapes inside double quotes",
        ) from None
    except yaml.YAMLError as exc:
        raise error_type(f"YAML syntax error: {exc}", source=source) from None
    except RecursionError:
        raise error_type(
            "YAML nested too deeply", source=source, hint="a site or rule file is a few levels deep"
        ) from None
    if root is None:
        return None, {}
    lines = _node_lines(root, error_type, source, duplicate_keys)
    try:
        data = loader.construct_document(root)
    except yaml.constructor.ConstructorError as exc:
        mark = exc.problem_mark
        raise error_type(
            f"YAML tag not allowed: {exc.problem}",
            source=source,
            line=mark.line + 1 if mark else None,
            hint="remove the '!' tag; only plain values, lists and mappings are read",
        ) from None
    except yaml.YAMLError as exc:
        raise error_type(f"YAML error: {exc}", source=source) from None
    except (ValueError, TypeError, RecursionError) as exc:  # e.g. an unhashable key
        raise error_type(f"YAML value cannot be read: {exc}", source=source) from None
    return data, lines


_KIND_OF_ERROR = {"RulesError": "rules", "SiteError": "site"}


def read_yaml_text(path: Path | str, error_type: type[AdvisorError], kind: str | FileKind | None = None) -> str:
    """The text of a YAML file, read with every check of :func:`load_yaml` but not parsed.

    ``kind`` (default: from ``error_type``: rule file, site file, else YAML file) sets the size
    cap and the name used in messages.  An empty file is refused: a truncated or unsaved file
    looks the same, and silently reading it as "nothing" would hide the mistake.
    """
    spec = KINDS[kind or _KIND_OF_ERROR.get(error_type.__name__, "yaml")] if not isinstance(kind, FileKind) else kind
    hint = "a truncated or unsaved file looks the same; restore its content"
    text = read_text_bounded(path, error_type, spec, expected="a YAML text file", empty_hint=hint) or ""
    if not text.strip():
        raise error_type(f"{spec.what} holds only blank space", source=str(path), hint=hint)
    return text


def load_yaml(
    path: Path | str, error_type: type[AdvisorError], duplicate_keys: bool = True, kind: str | FileKind | None = None
):
    """Read and parse a YAML file safely (:func:`read_yaml_text`, :func:`parse_yaml_text`); return ``(data, lines)``."""
    return parse_yaml_text(read_yaml_text(path, error_type, kind), str(path), error_type, duplicate_keys)
