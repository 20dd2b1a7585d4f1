"""The replay feature cache cannot go stale: its key covers every module that decides the features."""

from __future__ import annotations

import ast
import importlib.util
from pathlib import Path

from advisor.features import FEATURE_SOURCE_MODULES, FEATURES_VERSION, feature_source_paths
from advisor.io import featurecache


def _advisor_imports(module: str) -> set[str]:
    """Modules of the advisor package imported (at any depth in the file) by ``module``."""
    origin = importlib.util.find_spec(module).origin
    tree = ast.parse(Path(origin).read_text(encoding="utf-8"))
    found = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom) and node.module and node.module.startswith("advisor"):
            found.add(node.module)
            for alias in node.names:  # "from advisor.physics import sun" imports a module
                candidate = f"{node.module}.{alias.name}"
                if importlib.util.find_spec(candidate.rsplit(".", 1)[0]) and _is_module(candidate):
                    found.add(candidate)
        elif isinstance(node, ast.Import):
            found.update(a.name for a in node.names if a.name.startswith("advisor"))
    return found


def _is_module(name: str) -> bool:
    try:
        return importlib.util.find_spec(name) is not None
    except ModuleNotFoundError:
        return False


def _closure(roots: tuple[str, ...]) -> set[str]:
    seen, todo = set(), list(roots)
    while todo:
        name = todo.pop()
        if name in seen or name == "advisor":
            continue
        seen.add(name)
        todo.extend(_advisor_imports(name) - seen)
    return {m for m in seen if not importlib.util.find_spec(m).origin.endswith("__init__.py")}


def test_cache_key_covers_the_import_closure_of_the_feature_code():
    # Row features are computed by advisor.features from a frame the feed reader made.
    closure = _closure(("advisor.features", "advisor.io.feed"))
    missing = closure - set(FEATURE_SOURCE_MODULES)
    assert not missing, f"modules that decide the features but are not in the cache key: {sorted(missing)}"


def test_every_listed_module_is_hashed_and_changes_the_key(tmp_path):
    paths = feature_source_paths()
    assert len(paths) == len(FEATURE_SOURCE_MODULES) and all(p.is_file() for p in paths)
    feed = tmp_path / "feed.csv"
    feed.write_text("time\n")
    copies = []
    for p in paths:
        copy = tmp_path / f"{len(copies)}.py"
        copy.write_bytes(p.read_bytes())
        copies.append(copy)
    base = featurecache.key_for(feed, None, None, {}, copies, FEATURES_VERSION)
    copies[-1].write_text(copies[-1].read_text() + "\n# edited\n")
    assert featurecache.key_for(feed, None, None, {}, copies, FEATURES_VERSION) != base
    assert featurecache.key_for(feed, None, None, {}, copies, FEATURES_VERSION + 1) != base
