"""The house: folders by stage of the flow, a core without I/O, functions a reader can hold in mind.

These are rules of the code base itself (common practice, no source): the
functional core is importable without any database, data-frame or plotting
library; each folder imports only the stages before it; every folder says in
its ``__init__`` docstring what lives there and what it may import; no
function is longer than a reader can hold in mind.
"""

from __future__ import annotations

import ast
import pkgutil
import subprocess
import sys
from pathlib import Path

import pytest

import planner

PACKAGE = Path(planner.__file__).parent
FOLDERS = ("core", "database", "runs", "reports", "cli", "synthetic")
#: Modules at the top of the package that every folder may use.
SHARED = {"errors", "periods", "contract"}
#: Which other folders each folder may import: the stages before it.
ALLOWED = {
    "core": set(),
    "database": {"core"},
    "runs": {"core", "database", "synthetic"},  # the demo runs a synthetic network
    "reports": {"core", "database"},
    "cli": {"core", "database", "runs", "reports", "synthetic"},
    "synthetic": {"core"},
}
IO_LIBRARIES = ("sqlalchemy", "psycopg", "alembic", "pandas", "matplotlib")
#: Longest function, docstring included.
MAX_FUNCTION_LINES = 80


def python_files():
    return sorted(PACKAGE.rglob("*.py"))


def planner_imports(path: Path) -> set[str]:
    """Every ``planner.X`` module a file imports, at any depth (inside functions too)."""
    found = set()
    for node in ast.walk(ast.parse(path.read_text())):
        if isinstance(node, ast.ImportFrom) and node.module and node.module.startswith("planner"):
            found.add(node.module)
            found.update(f"{node.module}.{alias.name}" for alias in node.names)
        elif isinstance(node, ast.Import):
            found.update(alias.name for alias in node.names if alias.name.startswith("planner"))
    return found


def test_core_imports_no_io_library_in_a_fresh_interpreter() -> None:
    modules = sorted(f"planner.core.{m.name}" for m in pkgutil.iter_modules([str(PACKAGE / "core")]))
    assert len(modules) >= 8
    script = (
        "import importlib, sys\n"
        f"for name in {modules!r}:\n"
        "    importlib.import_module(name)\n"
        f"print(' '.join(sorted({{m.split('.')[0] for m in sys.modules}} & set({IO_LIBRARIES!r}))))\n"
    )
    done = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, check=False)
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == "", f"the core pulled in: {done.stdout.strip()}"


@pytest.mark.parametrize("folder", FOLDERS)
def test_each_folder_imports_only_the_stages_before_it(folder: str) -> None:
    offences = []
    for path in sorted((PACKAGE / folder).rglob("*.py")):
        for module in planner_imports(path):
            parts = module.split(".")
            if len(parts) < 2 or parts[1] in SHARED | {"__version__"} or parts[1] == folder:
                continue
            if parts[1] not in ALLOWED[folder]:
                offences.append(f"{path.relative_to(PACKAGE)} imports {module}")
    assert not offences, "\n".join(offences)


@pytest.mark.parametrize("folder", FOLDERS)
def test_each_folder_says_what_lives_there_and_what_it_may_import(folder: str) -> None:
    doc = ast.get_docstring(ast.parse((PACKAGE / folder / "__init__.py").read_text()))
    assert doc, f"planner/{folder}/__init__.py has no docstring"
    assert "import" in doc.lower(), f"planner/{folder}/__init__.py does not say what it may import"
    modules = {m.name for m in pkgutil.iter_modules([str(PACKAGE / folder)]) if m.name != "__main__"}
    missing = [m for m in sorted(modules) if f":mod:`.{m}`" not in doc]
    assert not missing, f"planner/{folder}/__init__.py does not list {missing}"


def test_top_level_holds_only_the_shared_modules() -> None:
    top = {p.stem for p in PACKAGE.glob("*.py")} - {"__init__"}
    assert top == SHARED
    assert {p.name for p in PACKAGE.iterdir() if (p / "__init__.py").exists()} == set(FOLDERS)


def test_no_function_is_longer_than_a_reader_can_hold_in_mind() -> None:
    long = []
    for path in python_files():
        for node in ast.walk(ast.parse(path.read_text())):
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
                lines = node.end_lineno - node.lineno + 1
                if lines > MAX_FUNCTION_LINES:
                    long.append(f"{path.relative_to(PACKAGE)}:{node.lineno} {node.name} ({lines} lines)")
    assert not long, "\n".join(long)
