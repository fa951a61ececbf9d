"""Wall time and peak memory of a whole ``planner`` process, for the benchmarks."""

from __future__ import annotations

import os
import subprocess
import sys

# Runs a command; prints its output, then its wall seconds and the peak resident
# memory of its process tree in MiB (ru_maxrss of the children, in KiB on Linux).
_TIMED = """
import resource, subprocess, sys, time
start = time.perf_counter()
done = subprocess.run(sys.argv[1:], capture_output=True, text=True)
seconds = time.perf_counter() - start
sys.stdout.write(done.stdout)
sys.stderr.write(done.stderr)
print(seconds)
print(resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024)
sys.exit(done.returncode)
"""


def run_planner(url: str, *args: str, wrap: list[str] | None = None) -> tuple[float, float, list[str]]:
    """Run ``planner ARGS`` against ``url`` as its own process: seconds, peak MiB, output lines.

    ``wrap`` prefixes the command (a profiler, for one). Exits the benchmark
    with the command's output when it fails.
    """
    command = [*(wrap or []), sys.executable, "-m", "planner.cli", *args]
    env = dict(os.environ, PLANNER_DATABASE_URL=url)
    done = subprocess.run([sys.executable, "-c", _TIMED, *command], env=env, capture_output=True, text=True,
                          check=False)
    if done.returncode != 0:
        raise SystemExit(f"planner {' '.join(args)} failed:\n{done.stdout}\n{done.stderr}")
    *output, seconds, peak = done.stdout.strip().splitlines()
    return float(seconds), float(peak), output
