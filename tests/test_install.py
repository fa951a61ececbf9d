"""Install for users, install for developers: the README's two commands, CI running them as written.

The quick start installs only what the planner needs (``pip install -e .``);
the test command adds the dev extras (``pip install -e '.[dev]'``). ``.ci/run``
must run both lines exactly as the README writes them, and the planner itself
must run without any of the dev extras.
"""

from __future__ import annotations

import re
import subprocess
import sys
import tomllib
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
README = ROOT / "README.md"
CI = ROOT / ".ci" / "run"
PYPROJECT = ROOT / "pyproject.toml"


def quick_start() -> list[str]:
    """The command lines of the README's quick start block, comments dropped."""
    section = README.read_text().split("## Quick start", 1)[1]
    block = re.search(r"```sh\n(.*?)```", section, flags=re.S).group(1)
    return [line.split("#", 1)[0].strip() for line in block.splitlines() if line.split("#", 1)[0].strip()]


def test_the_quick_start_installs_the_planner_alone_and_the_test_command_adds_the_dev_extras() -> None:
    user, developer = quick_start()
    assert user == "pip install -e . && planner demo"
    assert developer == "pip install -e '.[dev]' && pytest"


def test_ci_runs_both_readme_lines_as_written_in_order() -> None:
    lines = [line.strip() for line in CI.read_text().splitlines()]
    user, developer = quick_start()
    assert lines.count(user) == 1 and lines.count(developer) == 1
    assert lines.index(user) < lines.index(developer)
    # No other install in CI: what the README says is all CI installs (pip itself aside).
    installs = [line for line in lines if re.match(r"^(python -m )?pip install", line)]
    assert installs == ["python -m pip install --quiet --upgrade pip", user, developer]


def test_the_dev_extras_are_not_runtime_dependencies() -> None:
    project = tomllib.loads(PYPROJECT.read_text())["project"]
    runtime = {re.split(r"[<>=\[ ]", d, maxsplit=1)[0].lower() for d in project["dependencies"]}
    dev = {re.split(r"[<>=\[ ]", d, maxsplit=1)[0].lower() for d in project["optional-dependencies"]["dev"]}
    assert {"pytest", "hypothesis", "pot", "highspy", "playwright"} <= dev
    assert not runtime & dev


#: Imports every planner module and shows every command's help with the dev
#: extras made unimportable, as on a machine with the quick start's install only.
WITHOUT_DEV_EXTRAS = r"""
import importlib, pkgutil, sys
BLOCKED = {"pytest", "hypothesis", "ot", "highspy", "playwright", "_pytest"}
class Block:
    def find_spec(self, name, path=None, target=None):
        if name.split(".")[0] in BLOCKED:
            raise ImportError(f"{name} is a dev extra")
        return None
sys.meta_path.insert(0, Block())
import planner
for info in pkgutil.walk_packages(planner.__path__, "planner."):
    if not info.name.endswith("__main__"):
        importlib.import_module(info.name)
from typer.testing import CliRunner
from planner.cli import app
runner = CliRunner()
import typer.main
group = typer.main.get_command(app)
for name in group.list_commands(None):
    result = runner.invoke(app, [name, "--help"])
    assert result.exit_code == 0, (name, result.output)
print("ok", len(group.list_commands(None)))
"""


def test_the_planner_imports_and_shows_every_command_without_the_dev_extras() -> None:
    done = subprocess.run([sys.executable, "-c", WITHOUT_DEV_EXTRAS], capture_output=True, text=True, cwd=ROOT, timeout=300)
    assert done.returncode == 0, done.stderr
    assert done.stdout.startswith("ok ")
    assert int(done.stdout.split()[1]) >= 15  # every command of the workflow
