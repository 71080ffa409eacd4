"""Benchmark of bulk audits and the cold start: prints figures, asserts nothing.

Every comparison is paired and interleaved (bench/paired.py): the cold one-file check
against a bare `python -c "import numpy"` in the same rounds, 1 job against 2 jobs on
the same set in turn; each figure is the median with its spread, in CPU and wall time.
Peak memory is that of the largest process of each run (os.wait4), for two file counts,
so a growth with the count shows.

Targets (issue: performance): cold one-file check <= 2x `import numpy`; >= 1,000
stages/s with 2 jobs on the plain set and >= 500 on the requirement set; 2 jobs >= 1.8x
one; peak memory per process < 100 MB and flat in the file count.

Every child runs from a throw-away install of this checkout as a user's pip install
makes it (bench/user_install.py: copied, compiled to bytecode, no editable finder), and
the numpy import beside it runs on the same interpreter; the developer's editable
install would time a start that compiles every module from source where
PYTHONDONTWRITEBYTECODE is set.

Run: .venv/bin/python bench/audit_bench.py [--files 2000] [--memory-files 4000]
    [--rounds 3]
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)

from generate_stages import generate  # noqa: E402
from paired import Runs, paired_children, run_child, target  # noqa: E402
from user_install import user_install  # noqa: E402

AMPCHECK: list[str] = []  # the user install's ampcheck, set by main()
QUIET = ["--format", "compact", "--fail-on", "never", "--no-progress"]


def audit(folder: str, jobs: int) -> list[str]:
    return AMPCHECK + ["check", folder, "--jobs", str(jobs)] + QUIET


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--files", type=int, default=2000)
    parser.add_argument("--memory-files", type=int, default=4000)
    parser.add_argument("--rounds", type=int, default=3)
    parser.add_argument("--cold-rounds", type=int, default=9)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as folder:
        AMPCHECK[:] = user_install(os.path.join(folder, "install"))
        python = AMPCHECK[0]
        one = generate(os.path.join(folder, "one"), 1)[0]
        cold = paired_children({"cold check": AMPCHECK + ["check", one] + QUIET},
                               args.cold_rounds, python=python)
        ratio = cold["cold check"].wall_median / cold["numpy import"].wall_median
        print(f"cold one-file check: {cold['cold check'].wall_text()} wall,"
              f" {cold['cold check'].cpu_text()} CPU; bare numpy import"
              f" {cold['numpy import'].wall_text()} wall; ratio {ratio:.2f}"
              f" {target(ratio, 2.0)}")

        for name, requirements, goal in (("plain", False, 1000), ("requirement", True, 500)):
            target_folder = os.path.join(folder, name)
            paths = generate(target_folder, args.files, requirements=requirements)
            runs = paired_children({f"{jobs} job(s)": audit(target_folder, jobs)
                                    for jobs in (1, 2)}, args.rounds, python=python)
            rates = {jobs: len(paths) / runs[f"{jobs} job(s)"].wall_median for jobs in (1, 2)}
            for jobs in (1, 2):
                r = runs[f"{jobs} job(s)"]
                print(f"{name} set, {len(paths)} files, {jobs} job(s): {rates[jobs]:.0f}"
                      f" stages/s (wall {r.wall_text(1.0, 's')}, CPU {r.cpu_text(1.0, 's')})"
                      + (f" {target(rates[2], goal, at_most=False)}" if jobs == 2 else ""))
            speedup = rates[2] / rates[1]
            print(f"{name} set: 2 jobs over 1 {speedup:.2f}x {target(speedup, 1.8, False)};"
                  f" machine speed beside: numpy import {runs['numpy import'].wall_text()}")

        for name, requirements in (("plain", False), ("requirement", True)):
            peaks = []
            for count in (args.memory_files // 4, args.memory_files):
                target_folder = os.path.join(folder, f"memory-{name}-{count}")
                generate(target_folder, count, requirements=requirements)
                runs = Runs()
                run_child(audit(target_folder, 2), runs)
                peaks.append((count, runs.peak_mb_max))
            print(f"{name} set, 2 jobs, peak memory of the largest process: "
                  + ", ".join(f"{count} files {mb:.0f} MB" for count, mb in peaks)
                  + f" {target(max(mb for _c, mb in peaks), 100.0)}")


if __name__ == "__main__":
    main()
