"""Mutation score of the functional core, measured with mutmut on the database-free tests.

Run from the repository root, in a virtualenv with the ``mutation`` extra::

    pip install -e '.[dev,mutation]'
    python tools/mutation.py                 # full run (tens of minutes on two cores)
    python tools/mutation.py --fresh         # forget the results of an earlier run
    python tools/mutation.py --report-only   # score and survivors of the last run
    python tools/mutation.py --jobs 4 --work /tmp/mutation
    python tools/mutation.py --retest        # after adding tests: retest the mutants not killed
    python tools/mutation.py --sample 0.25   # a seeded random quarter of the mutants only

What it does: copies ``planner/``, ``tests/`` and ``pyproject.toml`` into a scratch
folder (``build/mutation`` by default, ignored by git), adds a ``[tool.mutmut]``
table to the copied ``pyproject.toml`` only, and runs ``mutmut run`` there. mutmut
mutates the modules in :data:`MUTATED` and, for each mutant, runs the tests of
:data:`TESTS` that call the mutated function. Results are cached in the scratch
folder: a second run only retests functions whose source changed.

It prints the score (killed / total, and per module) and writes every surviving
mutant with its line and diff to ``<work>/survivors.txt``. Mutants judged
equivalent are explained in ``tools/mutation_survivors.md``.

Score: killed / total, where "killed" counts mutants that made a test fail and
mutants that timed out (an endless loop is caught by the time limit), and
"total" counts every mutant, including those no test reaches.

This is not part of CI (it takes far longer than the test suite) and is not a
test: it lives outside ``tests/`` and ``planner/``, which pytest collects.
"""

from __future__ import annotations

import argparse
import difflib
import json
import os
import shutil
import subprocess
import sys
from collections import Counter
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent

#: The functional core that is mutated. Left out: ``search.py`` (ctypes glue of the
#: compiled kernel, whose scipy path is the reference) and ``explain.py`` (words).
MUTATED = [
    "planner/core/week.py",
    "planner/core/network.py",
    "planner/core/solve.py",
    "planner/core/residual.py",
    "planner/core/paths.py",
    "planner/core/prices.py",
    "planner/core/limits.py",
    "planner/core/rates.py",
    "planner/core/certificate.py",
    "planner/core/diagnose.py",
    "planner/core/optimize.py",
]

#: Tests that need no PostgreSQL (none of them asks for the ``engine`` or
#: ``database_url`` fixtures), and the doctests of the core. ``tests/core`` holds
#: the tests written to kill mutants; a folder, so that adding a test file there
#: keeps the selection (and mutmut's cached results) as they are.
TESTS = [
    "tests/test_reference_solve.py",
    "tests/test_reference_prices.py",
    "tests/test_limit_values.py",
    "tests/test_horizon_reference.py",
    "tests/test_diagnose.py",
    "tests/core",
    "planner/core",
]

#: Lines never mutated (regular expressions on the source line): none so far.
SKIPPED_LINES: list[str] = []

#: Extra pytest options: a fixed Hypothesis seed, so that each mutant meets the same
#: examples and a run can be repeated; fewer examples per property test
#: (``tools/mutation_examples.py``); no cache written into the scratch tree.
PYTEST_OPTIONS = ["--hypothesis-seed=0", "-p", "mutation_examples", "-p", "no:cacheprovider"]

#: The plugin behind ``-p mutation_examples``, copied next to the mutated sources.
PLUGIN = "mutation_examples.py"

KILLED = {"killed", "timeout", "segfault"}
#: Statuses of mutants not yet tested (an interrupted run): counted, not listed.
PENDING = {"not checked"}


def toml_list(values: list[str]) -> str:
    """A TOML array of strings."""
    return "[" + ", ".join(json.dumps(value) for value in values) + "]"


def mutmut_table(tests: list[str]) -> str:
    """The ``[tool.mutmut]`` table written into the scratch ``pyproject.toml``."""
    return "\n".join(
        [
            "",
            "[tool.mutmut]",
            'source_paths = ["planner"]',
            f"only_mutate = {toml_list(MUTATED)}",
            f"do_not_mutate_patterns = {toml_list(SKIPPED_LINES)}",
            f"pytest_add_cli_args_test_selection = {toml_list(tests)}",
            f"pytest_add_cli_args = {toml_list(PYTEST_OPTIONS)}",
            f"also_copy = {toml_list([PLUGIN])}",
            # A mutant that loops forever is stopped after this many times the time
            # its tests took unmutated (CPU seconds, plus the constant).
            "timeout_multiplier = 4.0",
            "timeout_constant = 5.0",
            "use_git_change_detection = false",
            "",
        ]
    )


def prepare(work: Path, fresh: bool) -> list[str]:
    """Copy the sources and tests into ``work``; return the test selection that exists."""
    if fresh and work.exists():
        shutil.rmtree(work)
    work.mkdir(parents=True, exist_ok=True)
    ignore = shutil.ignore_patterns("__pycache__", "*.pyc", ".hypothesis")
    for folder in ("planner", "tests"):
        # copy2 keeps modification times: mutmut regenerates only files that changed.
        shutil.copytree(ROOT / folder, work / folder, ignore=ignore, dirs_exist_ok=True, copy_function=_copy_if_changed)
    shutil.copy2(ROOT / "tools" / PLUGIN, work / PLUGIN)
    tests = [test for test in TESTS if (ROOT / test).exists()]
    text = (ROOT / "pyproject.toml").read_text(encoding="utf-8")
    (work / "pyproject.toml").write_text(text + mutmut_table(tests), encoding="utf-8")
    return tests


def _copy_if_changed(source: str, target: str) -> str:
    """``shutil.copy2`` unless the target already has the same bytes and time."""
    source_stat, target_path = os.stat(source), Path(target)
    if target_path.exists():
        target_stat = target_path.stat()
        if target_stat.st_mtime == source_stat.st_mtime and target_stat.st_size == source_stat.st_size:
            return target
    return shutil.copy2(source, target)


def run_mutmut(work: Path, jobs: int, examples: int, names: list[str] | None = None) -> int:
    """Run ``mutmut run`` in ``work`` with ``examples`` per property test; return its exit code.

    With ``names``, only those mutants are tested (again, if they were before).
    """
    mutmut = Path(sys.executable).with_name("mutmut")
    command = [str(mutmut) if mutmut.exists() else "mutmut", "run", "--max-children", str(jobs)]
    print("+", " ".join(command), f"[{len(names)} mutants]" if names else "", f"(in {work})", flush=True)
    command += names or []
    env = dict(os.environ, MUTATION_MAX_EXAMPLES=str(examples))
    return subprocess.run(command, cwd=work, env=env, check=False).returncode


def read_results(work: Path) -> dict[str, dict[str, str]]:
    """Status of every mutant, by module path and mutant name, from mutmut's metadata."""
    from mutmut.stats import status_by_exit_code

    results: dict[str, dict[str, str]] = {}
    for module in MUTATED:
        meta = work / "mutants" / (module + ".meta")
        if not meta.exists():
            continue
        data = json.loads(meta.read_text(encoding="utf-8"))
        results[module] = {name: status_by_exit_code[code] for name, code in data["exit_code_by_key"].items()}
    return results


def pick(results: dict[str, dict[str, str]], fraction: float | None, seed: int, retest: bool) -> list[str]:
    """Names of the mutants to test: a seeded random ``fraction`` of all, or those not killed."""
    import random

    names = [name for statuses in results.values() for name in statuses]
    if retest:
        return [name for statuses in results.values() for name, status in statuses.items() if status not in KILLED]
    if fraction is None:
        return []
    return sorted(random.Random(seed).sample(names, round(fraction * len(names))))


def restrict(results: dict[str, dict[str, str]], names: list[str]) -> dict[str, dict[str, str]]:
    """``results`` of the mutants in ``names`` only."""
    chosen = set(names)
    return {module: {n: s for n, s in statuses.items() if n in chosen} for module, statuses in results.items()}


def score_table(results: dict[str, dict[str, str]]) -> str:
    """Killed / total per module and overall, with the other statuses counted."""
    lines = [f"{'module':<28} {'killed':>7} {'total':>7} {'score':>7}  other"]
    all_killed = all_total = 0
    for module, statuses in results.items():
        counts = Counter(statuses.values())
        killed = sum(counts[status] for status in KILLED)
        total = len(statuses)
        all_killed += killed
        all_total += total
        other = ", ".join(f"{status} {n}" for status, n in sorted(counts.items()) if status not in KILLED)
        lines.append(f"{Path(module).name:<28} {killed:>7} {total:>7} {_percent(killed, total):>7}  {other}")
    lines.append(f"{'all':<28} {all_killed:>7} {all_total:>7} {_percent(all_killed, all_total):>7}")
    return "\n".join(lines)


def _percent(part: int, whole: int) -> str:
    return f"{100.0 * part / whole:.1f}%" if whole else "-"


def mutant_diff(work: Path, module: str, name: str) -> tuple[int, str]:
    """First changed line (1-based, in the source) and unified diff of one mutant."""
    import libcst as cst
    from mutmut.mutation.diff_apply import (
        find_top_level_function_or_method,
        read_functions_from_index,
    )
    from mutmut.utils.format_utils import orig_function_and_class_names_from_key

    previous = Path.cwd()
    os.chdir(work)
    try:
        source = Path(module).read_text(encoding="utf-8")
        functions = read_functions_from_index(name, module)
    finally:
        os.chdir(previous)
    if functions is None:
        return 0, "(no diff: mutmut's line index is missing)"
    function_name = orig_function_and_class_names_from_key(name)[0].rpartition(".")[-1]
    original_module = cst.parse_module(source)
    original = find_top_level_function_or_method(original_module, function_name)
    if original is None:
        return 0, f"(no diff: {function_name} not found)"
    mutated = functions[1].with_changes(name=cst.Name(function_name))
    mutated_source = original_module.deep_replace(original, mutated).code
    diff = list(
        difflib.unified_diff(
            source.splitlines(), mutated_source.splitlines(), fromfile=module, tofile=module, lineterm="", n=0
        )
    )
    line = 0
    for row in diff:
        if row.startswith("@@"):
            line = int(row.split()[1].lstrip("-").split(",")[0])
            break
    return line, "\n".join(diff[2:])


def function_of(name: str) -> str:
    """The source function of a mutant name (``Class.method`` or ``function``)."""
    from mutmut.utils.format_utils import orig_function_and_class_names_from_key

    function, class_name = orig_function_and_class_names_from_key(name)
    function = function.rpartition(".")[-1]
    return f"{class_name}.{function}" if class_name else function


def write_survivors(work: Path, results: dict[str, dict[str, str]], target: Path) -> int:
    """Write each mutant that was not killed with its status, line and diff; return the count."""
    rows: list[tuple[str, int, str, str, str]] = []
    for module, statuses in results.items():
        for name, status in statuses.items():
            if status in KILLED or status in PENDING:
                continue
            line, diff = mutant_diff(work, module, name)
            rows.append((module, line, name, status, diff))
    rows.sort(key=lambda row: (MUTATED.index(row[0]), row[1], row[2]))
    with target.open("w", encoding="utf-8") as out:
        for module, line, name, status, diff in rows:
            out.write(f"## {module}:{line} {function_of(name)} [{status}] {name}\n{diff}\n\n")
    return len(rows)


def main(argv: list[str] | None = None) -> int:
    """Command line entry point; see the module docstring."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--work", type=Path, default=ROOT / "build" / "mutation", help="scratch folder")
    parser.add_argument("--jobs", type=int, default=os.cpu_count() or 2, help="mutants tested at once")
    parser.add_argument("--examples", type=int, default=10, help="Hypothesis examples per property test")
    parser.add_argument("--fresh", action="store_true", help="start over: delete the scratch folder first")
    parser.add_argument("--report-only", action="store_true", help="only print the score of the last run")
    parser.add_argument("--sample", type=float, help="test only this seeded random fraction of the mutants")
    parser.add_argument("--seed", type=int, default=1, help="seed of --sample")
    parser.add_argument("--retest", action="store_true", help="retest the mutants the last run did not kill")
    parser.add_argument("--survivors", type=Path, help="where to write the survivors (default <work>/survivors.txt)")
    args = parser.parse_args(argv)
    work = args.work.resolve()
    names: list[str] = []
    if (args.sample is not None or args.retest) and not read_results(work):
        print(f"--sample and --retest need the mutants of an earlier run in {work}", file=sys.stderr)
        return 1
    if not args.report_only:
        prepare(work, args.fresh)
        names = pick(read_results(work), args.sample, args.seed, args.retest)
        if args.retest and not names:
            print("every mutant is killed already")
        else:
            code = run_mutmut(work, args.jobs, args.examples, names)
            if code != 0:
                print(f"mutmut run exited with {code}", file=sys.stderr)
                return code
    results = read_results(work)
    if not results:
        print(f"no results in {work}: run without --report-only first", file=sys.stderr)
        return 1
    if args.sample is not None:
        names = pick(results, args.sample, args.seed, False)
        results = restrict(results, names)
        print(f"sample of {len(names)} mutants (seed {args.seed})")
    print(score_table(results))
    target = args.survivors or work / "survivors.txt"
    count = write_survivors(work, results, target)
    print(f"{count} mutants not killed, listed in {target}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
