"""Presentation is a layer of its own: computation and io never import the views or rich.

Every ``import`` statement of a module counts, wherever it stands (module top, inside a
function, under ``if TYPE_CHECKING``), because a function-local import is still a dependency.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "advisor"

#: Modules that compute or read and write files: none may import a view or rich.
BELOW_VIEWS = (
    "errors.py",
    "text.py",
    "units.py",
    "fmt.py",
    "vocabulary.py",
    "catalogue.py",
    "physics",
    "io",
    "features.py",
    "derived_features.py",
    "budget.py",
    "calibrator_choice.py",
    "weather_stats.py",
    "rules",
    "model",
    "decision.py",
    "explain.py",
    "evaluation",
)
FORBIDDEN_BELOW_VIEWS = ("advisor.views", "rich")


def module_name(path: Path) -> str:
    parts = path.relative_to(ROOT).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def package_of(path: Path) -> str:
    """The package a module's relative imports start from."""
    name = module_name(path)
    return name if path.name == "__init__.py" else name.rsplit(".", 1)[0]


def imported_modules(source: str, package: str) -> list[tuple[int, str]]:
    """(line, absolute module name) of every import in ``source``; relative ones resolved in ``package``."""
    found = []
    for node in ast.walk(ast.parse(source)):
        if isinstance(node, ast.Import):
            found += [(node.lineno, alias.name) for alias in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[: len(base) - (node.level - 1)]
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module or ""
            found.append((node.lineno, target))
            # ``from advisor import views`` names the package in the alias, not in the module
            found += [(node.lineno, f"{target}.{alias.name}") for alias in node.names if alias.name != "*"]
    return found


def is_under(module: str, prefixes) -> bool:
    return any(module == p or module.startswith(p + ".") for p in prefixes)


def files_of(entries) -> list[Path]:
    files = []
    for entry in entries:
        path = PACKAGE / entry
        files += sorted(path.rglob("*.py")) if path.is_dir() else [path]
    return files


def violations(paths, forbidden) -> list[str]:
    bad = []
    for path in paths:
        for line, target in imported_modules(path.read_text(encoding="utf-8"), package_of(path)):
            if is_under(target, forbidden):
                bad.append(f"{path.relative_to(ROOT)}:{line}: imports {target}")
    return bad


def test_the_walk_sees_every_kind_of_import():
    source = (
        "import rich.console\n"
        "from advisor.views.panel import render_panel\n"
        "def f():\n    from rich.text import Text\n"
        "if TYPE_CHECKING:\n    from advisor import views\n"
        "from ..views import plain\n"
    )
    found = {m for _, m in imported_modules(source, "advisor.evaluation")}
    assert {m for m in found if is_under(m, FORBIDDEN_BELOW_VIEWS)} == {
        "rich.console",
        "advisor.views.panel",
        "advisor.views.panel.render_panel",
        "rich.text",
        "rich.text.Text",
        "advisor.views",
        "advisor.views.plain",
    }
    assert not is_under("richer", ("rich",)) and not is_under("advisor.viewsx", ("advisor.views",))


@pytest.mark.parametrize("entry", BELOW_VIEWS)
def test_computation_and_io_never_import_views_or_rich(entry):
    paths = files_of([entry])
    assert paths and all(p.exists() for p in paths), f"advisor/{entry} is gone: update BELOW_VIEWS"
    assert violations(paths, FORBIDDEN_BELOW_VIEWS) == []


def test_every_module_below_views_is_checked():
    checked = set(files_of(BELOW_VIEWS))
    upper = set(files_of(["views", "commands"])) | {PACKAGE / "__init__.py", PACKAGE / "__main__.py"}
    unplaced = sorted(str(p.relative_to(ROOT)) for p in PACKAGE.rglob("*.py") if p not in checked | upper)
    assert unplaced == [], "place these modules in BELOW_VIEWS or in views/commands"


def test_views_never_import_commands():
    assert violations(files_of(["views"]), ("advisor.commands",)) == []
