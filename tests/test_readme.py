"""The README's Python examples run as written (they name the documented import paths)."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

README = Path(__file__).resolve().parents[1] / "README.md"


def python_blocks() -> list[str]:
    return re.findall(r"```python\n(.*?)```", README.read_text(), flags=re.S)


def test_readme_has_python_examples() -> None:
    assert python_blocks()


@pytest.mark.parametrize("number", range(len(python_blocks())))
def test_readme_python_example_runs(number: int, database_url: str, monkeypatch: pytest.MonkeyPatch, capsys) -> None:
    monkeypatch.chdir(README.parent)  # the examples load seeds/
    block = python_blocks()[number]
    exec(compile(block, f"README.md python block {number + 1}", "exec"), {})
    if "print(summary.status, summary.cost, summary.certificate_ok)" in block:
        words = capsys.readouterr().out.split()
        assert (words[0], words[-1]) == ("optimal", "True")
