"""Where the data shipped with the package lives: the default rule files and the invented demo.

    default_rules_dir() / "wind.yaml"      # a default rule file
    demo_site_path()                       # the demo site file (invented site)

The top-level ``rules/`` and ``example_weather/`` folders of the source tree are the source of
truth; the build copies them into the package as ``advisor.default_rules`` and ``advisor.demo``
(see ``pyproject.toml``).  An installed advisor reads the copies; run from a checkout, the
functions fall back to the top-level folders.  Nothing here reads a file.
"""

from __future__ import annotations

import importlib
from pathlib import Path

__all__ = ["package_data_dir", "default_rules_dir", "default_rule_files", "demo_dir", "demo_site_path"]


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
