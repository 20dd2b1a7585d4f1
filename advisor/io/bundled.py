"""Where the data shipped with the package lives: the default rule files and the invented demo.

    default_rules_dir() / "wind.yaml"      # a default rule file
    demo_site_path()                       # the demo site file (invented site)

The top-level ``rules/`` and ``example_weather/`` folders of the source tree are the source of
truth; the build copies them into the package as ``advisor.default_rules`` and ``advisor.demo``
(see ``pyproject.toml``).  An installed advisor reads the copies; run from a checkout, the
functions fall back to the top-level folders.  :func:`is_demo_file` recognises a demo file
however it is named (a copy is compared by size, then by content), so demo data always says so.
"""

from __future__ import annotations

import functools
import hashlib
import importlib
from pathlib import Path

__all__ = [
    "package_data_dir",
    "default_rules_dir",
    "default_rule_files",
    "demo_dir",
    "demo_site_path",
    "is_demo_file",
    "is_bundled",
]


def package_data_dir(package: str, source_folder: str) -> Path:
    """Folder of bundled data: the installed copy, or the source tree's folder when run from a checkout."""
    try:
        module = importlib.import_module(package)
        return Path(next(iter(module.__path__)))
    except (ModuleNotFoundError, StopIteration):
        return Path(__file__).resolve().parents[2] / source_folder


def default_rules_dir() -> Path:
    """Folder of the default rule files (a copy of the top-level rules/ folder)."""
    return package_data_dir("advisor.default_rules", "rules")


def default_rule_files() -> list[Path]:
    """The default rule files, in the order they are layered (by file name)."""
    return sorted(default_rules_dir().glob("*.yaml"))


def demo_dir() -> Path:
    """Folder of the bundled invented demo data (a copy of example_weather/)."""
    return package_data_dir("advisor.demo", "example_weather")


def demo_site_path() -> Path:
    """Path of the bundled demo site file."""
    return demo_dir() / "larch_basin.yaml"


@functools.lru_cache(maxsize=1)
def _demo_files() -> dict[int, tuple[Path, ...]]:
    """The bundled demo files by size [bytes] (a copy is recognised by size, then by content)."""
    by_size: dict[int, list[Path]] = {}
    folder = demo_dir()
    for path in sorted(folder.iterdir()) if folder.is_dir() else ():
        if path.is_file() and path.suffix in (".yaml", ".csv", ".jsonl", ".json"):
            by_size.setdefault(path.stat().st_size, []).append(path.resolve())
    return {size: tuple(paths) for size, paths in by_size.items()}


def is_demo_file(path: Path | str | None) -> bool:
    """Whether ``path`` is one of the bundled invented demo files, however it is named: the file
    itself (by resolved path, through any link) or a byte-identical copy of it."""
    if path is None:
        return False
    try:
        target = Path(path).resolve()
        size = target.stat().st_size
    except (OSError, ValueError):
        return False
    candidates = _demo_files().get(size, ())
    if target in candidates:
        return True
    if not candidates:
        return False
    digest = _sha256(target)
    return any(_sha256(c) == digest for c in candidates)


def _sha256(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def is_bundled(path: Path | str | None) -> bool:
    """Whether ``path`` lies in the package's own demo folder (read-only: never written to).

    Unlike :func:`is_demo_file`, a user's copy of the demo is not bundled: it may be edited.
    """
    if path is None or str(path).startswith("<"):
        return False
    try:
        Path(path).resolve().relative_to(demo_dir().resolve())
    except (ValueError, OSError):
        return False
    return True
