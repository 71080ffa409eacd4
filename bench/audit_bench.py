"""Benchmark of bulk audits: prints figures, asserts nothing.

Targets (issue: team workflow): one-file cold start of `ampcheck check` under 3x a bare
`python -c "import numpy"`; at least 400 stages per second with 2 jobs; 2 jobs at least
1.7x faster than 1; peak memory under 300 MB for 10,000 files, not growing with count.

Run: .venv/bin/python bench/audit_bench.py [--files 2000] [--memory-files 10000]
    [--audit-repeats 3]
from a virtual environment with a regular (not editable) install, so that the cold
start reads compiled modules as a user's does.
"""

from __future__ import annotations

import argparse
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)

from generate_stages import generate  # noqa: E402

_SCRIPT = os.path.join(os.path.dirname(sys.executable), "ampcheck")
AMPCHECK = [_SCRIPT] if os.path.exists(_SCRIPT) else [sys.executable, "-m", "checker"]


def wall(command: list[str], repeats: int) -> float:
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        subprocess.run(command, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                       cwd=tempfile.gettempdir(), check=True)
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def peak_rss_mb(command: list[str]) -> float:
    """Peak resident memory of a child process tree's largest member, in MB."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    subprocess.run(command, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                   cwd=tempfile.gettempdir(), check=True)
    after = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    return max(after, before) / 1024


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--files", type=int, default=2000)
    parser.add_argument("--memory-files", type=int, default=10000)
    parser.add_argument("--repeats", type=int, default=7, help="cold-start runs")
    parser.add_argument("--audit-repeats", type=int, default=3,
                        help="runs of each audit, 1 and 2 jobs alternating (the median is"
                             " reported: a shared machine's speed drifts by tens of"
                             " percent between runs)")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as folder:
        one = generate(os.path.join(folder, "one"), 1)[0]
        numpy_s = wall([sys.executable, "-c", "import numpy"], args.repeats)
        cold_s = wall(AMPCHECK + ["check", one, "--fail-on", "never"], args.repeats)
        print(f"cold start, one file: {cold_s * 1e3:.0f} ms median; bare numpy import"
              f" {numpy_s * 1e3:.0f} ms; ratio {cold_s / numpy_s:.2f} (target < 3)")

        paths = generate(os.path.join(folder, "audit"), args.files)
        # 1 and 2 jobs alternate, so a drift of the shared machine's speed hits both;
        # a bare numpy import timed beside each pair shows how fast the machine was.
        times: dict[int, list[float]] = {1: [], 2: []}
        probes = []
        for _ in range(args.audit_repeats):
            for jobs in (1, 2):
                times[jobs].append(wall(AMPCHECK + [
                    "check", os.path.join(folder, "audit"), "--jobs", str(jobs), "--format",
                    "compact", "--fail-on", "never"], 1))
            probes.append(wall([sys.executable, "-c", "import numpy"], 3))
        rates = {jobs: len(paths) / statistics.median(seconds)
                 for jobs, seconds in times.items()}
        for jobs in (1, 2):
            runs = ", ".join(f"{len(paths) / t:.0f}" for t in times[jobs])
            print(f"{len(paths)} files, {jobs} job(s): {rates[jobs]:.0f} stages/s median"
                  f" (runs: {runs}){' (target >= 400)' if jobs == 2 else ''}")
        print(f"speedup of 2 jobs over 1: {rates[2] / rates[1]:.2f}x (target >= 1.7)")
        print("machine speed beside those runs: bare numpy import "
              + ", ".join(f"{p * 1e3:.0f}" for p in probes) + " ms")

        for count in (args.memory_files // 5, args.memory_files):
            target = os.path.join(folder, f"memory{count}")
            generate(target, count)
            peak = peak_rss_mb(AMPCHECK + ["check", target, "--jobs", "2", "--format",
                                           "compact", "--fail-on", "never"])
            print(f"{count} files, 2 jobs: peak memory {peak:.0f} MB (target < 300,"
                  " not growing with the count)")


if __name__ == "__main__":
    main()
