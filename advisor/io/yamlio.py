"""Reading staff-edited YAML safely, keeping line numbers for error messages.

``load_yaml(path, error_type)`` returns ``(data, lines)`` where ``lines`` maps a key path
(tuple of keys/indices) to its 1-based line in the file.  Only the safe loader is used;
object-constructing tags, anchors/aliases (and so "billion laughs" bombs), tabs used for
indentation, and oversized files are refused with one clear error.
"""

from __future__ import annotations

from pathlib import Path

import yaml

from advisor.errors import AdvisorError
from advisor.io.fileio import regular_file_size

# libyaml's safe loader where PyYAML was built with it (the wheels are), else the pure-Python one.
_SafeLoader = getattr(yaml, "CSafeLoader", yaml.SafeLoader)

MAX_YAML_BYTES = 2_000_000
MAX_YAML_NODES = 200_000

KeyPath = tuple


def _node_lines(root: yaml.Node, error_type: type[AdvisorError], source: str) -> dict[KeyPath, int]:
    """Map every key path in a composed YAML tree to its 1-based line; refuse aliases."""
    lines: dict[KeyPath, int] = {}
    seen: set[int] = set()
    stack: list[tuple[yaml.Node, KeyPath]] = [(root, ())]
    count = 0
    while stack:
        node, path = stack.pop()
        count += 1
        if count > MAX_YAML_NODES:
            raise error_type(f"more than {MAX_YAML_NODES} YAML nodes", source=source,
                             hint="split the file or remove generated content")
        if id(node) in seen:
            raise error_type("YAML anchors and aliases are not supported", source=source,
                             line=node.start_mark.line + 1, hint="write the values out in full")
        seen.add(id(node))
        lines[path] = node.start_mark.line + 1
        if isinstance(node, yaml.MappingNode):
            for key_node, value_node in node.value:
                key = key_node.value if isinstance(key_node, yaml.ScalarNode) else str(key_node.value)
                lines[path + (key,)] = key_node.start_mark.line + 1
                stack.append((value_node, path + (key,)))
                # value line recorded under the same path; keep the key's line
                lines.setdefault(path + (key,), key_node.start_mark.line + 1)
        elif isinstance(node, yaml.SequenceNode):
            for i, item in enumerate(node.value):
                stack.append((item, path + (i,)))
    return lines


def parse_yaml_text(text: str, source: str, error_type: type[AdvisorError]):
    """Parse YAML text safely; return ``(data, lines)``."""
    for number, raw in enumerate(text.splitlines(), start=1):
        stripped = raw.lstrip(" ")
        if stripped.startswith("\t"):
            raise error_type("tab used for indentation", source=source, line=number,
                             hint="indent with spaces")
    loader = _SafeLoader(text)
    try:
        root = loader.get_single_node()
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        line = mark.line + 1 if mark else None
        column = mark.column + 1 if mark else None
        what = exc.problem or "invalid YAML"
        raise error_type(f"YAML syntax error: {what}", source=source, line=line, column=column,
                         hint="check indentation, colons and quotes") from None
    except yaml.YAMLError as exc:
        raise error_type(f"YAML syntax error: {exc}", source=source) from None
    if root is None:
        return None, {}
    lines = _node_lines(root, error_type, source)
    try:
        data = loader.construct_document(root)
    except yaml.constructor.ConstructorError as exc:
        mark = exc.problem_mark
        raise error_type(f"YAML tag not allowed: {exc.problem}", source=source,
                         line=mark.line + 1 if mark else None,
                         hint="remove the '!' tag; only plain values, lists and mappings are read") from None
    except yaml.YAMLError as exc:
        raise error_type(f"YAML error: {exc}", source=source) from None
    return data, lines


def load_yaml(path: Path | str, error_type: type[AdvisorError]):
    """Read and parse a YAML file safely; return ``(data, lines)``."""
    path = Path(path)
    source = str(path)
    if path.exists() and not path.is_dir() and path.stat().st_size == 0:
        return None, {}
    what = {"RulesError": "rule file", "SiteError": "site file"}.get(error_type.__name__, "YAML file")
    regular_file_size(path, error_type, what, max_bytes=MAX_YAML_BYTES)
    try:
        raw = path.read_bytes()
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise error_type("not UTF-8 text", source=source, hint="save the file as UTF-8") from None
    except OSError as exc:
        raise error_type(f"cannot read file: {exc.strerror}", source=source) from None
    if "\x00" in text:
        raise error_type("binary content (NUL bytes)", source=source, hint="expected a YAML text file")
    return parse_yaml_text(text, source, error_type)
