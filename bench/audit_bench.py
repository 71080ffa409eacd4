"""Benchmark of bulk audits and the cold start: prints figures, asserts nothing.

Every comparison is paired and interleaved (bench/paired.py): the cold one-file check
against a bare `python -c "import numpy"` in the same rounds, 1 job against 2 jobs on
the same set in turn; each figure is the median with its spread, in CPU and wall time.
Peak memory is that of the largest process of each run (os.wait4), for two file counts.
A peak follows the largest stage a run meets (its Monte Carlo arrays), so a larger set
may raise it without anything being kept; whether memory is kept from file to file is
measured apart: one process checks the larger set file after file as a worker does, and
what it allocates in the second half and still holds at the end (tracemalloc, after its
bounded caches are emptied and a garbage collection) is counted per file, beside its resident memory half-way and at
the end.

Targets (issue: performance): cold one-file check <= 2x `import numpy`; >= 1,000
stages/s with 2 jobs on the plain set and >= 500 on the requirement set; 2 jobs >= 1.8x
one; peak memory per process < 100 MB and flat in the file count (at most 1 KB kept
per file checked, the bounded caches emptied at both readings: at capacity they replace
entries, which would count as memory held).

Every child runs from a throw-away install of this checkout as a user's pip install
makes it (bench/user_install.py: copied, compiled to bytecode, no editable finder), and
the numpy import beside it runs on the same interpreter; the developer's editable
install would time a start that compiles every module from source where
PYTHONDONTWRITEBYTECODE is set.

With ``--against TREE`` (a git worktree of an older commit, from its own user install),
the cold one-file check and the one-job rate of both sets are measured for both builds
in the same interleaved rounds, and the ratios printed: a before/after free of the
machine's drift between separate runs.

Run: .venv/bin/python bench/audit_bench.py [--files 2000] [--memory-files 4000]
    [--rounds 3] [--against TREE]
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)

from generate_stages import generate  # noqa: E402
from paired import Runs, paired_children, run_child, target  # noqa: E402
from user_install import user_install  # noqa: E402

AMPCHECK: list[str] = []  # the user install's ampcheck, set by main()
QUIET = ["--format", "compact", "--fail-on", "never", "--no-progress"]
# Flat in the file count: at most this much kept per file checked (a 100,000-file audit
# would then keep under 100 MB more than a short one). Resident memory moves with what
# the allocator keeps of freed arrays, so the kept bytes are counted by tracemalloc.
KEPT_BYTES_PER_FILE = 1024

# Run in a child of the user install: every file of a folder checked in turn, as a
# worker checks them (checker.audit.check_files, one job), and the memory held half-way and at the end printed.
HELD = """
import gc, glob, os, sys, tracemalloc
for variable in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(variable, "1")
from checker.audit import Request, check_files
paths = sorted(glob.glob(sys.argv[1] + "/**/*.stage*", recursive=True))

def held_mb():
    # the bounded caches (functools.lru_cache) emptied first: at capacity they replace
    # entries, which would count as new memory held without anything growing
    for name, module in list(sys.modules.items()):
        if name.startswith("checker"):
            for value in list(vars(module).values()):
                if callable(getattr(value, "cache_clear", None)):
                    value.cache_clear()
    gc.collect()
    with open("/proc/self/statm") as handle:
        return int(handle.read().split()[1]) * os.sysconf("SC_PAGE_SIZE") / 2 ** 20

# a worker's path (fence, budget, cap), each result dropped as the compact report does
for k, _result in enumerate(check_files(paths, Request(figures_wanted=False)), 1):
    if k == len(paths) // 2:
        half = held_mb()
        tracemalloc.start()  # from here on, every allocation that stays alive is counted
end = held_mb()
kept = tracemalloc.get_traced_memory()[0]
print(len(paths) // 2, half, len(paths), end, kept)
"""


def audit(folder: str, jobs: int) -> list[str]:
    return AMPCHECK + ["check", folder, "--jobs", str(jobs)] + QUIET


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--files", type=int, default=2000)
    parser.add_argument("--memory-files", type=int, default=4000)
    parser.add_argument("--rounds", type=int, default=3)
    parser.add_argument("--cold-rounds", type=int, default=9)
    parser.add_argument("--against", help="an older checkout to compare with, paired")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as folder:
        AMPCHECK[:] = user_install(os.path.join(folder, "install"))
        python = AMPCHECK[0]
        if args.against:
            against(user_install(os.path.join(folder, "install-against"),
                                 os.path.abspath(args.against)), folder, args)
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
            print(f"{name} set, one process file after file: " + held(target_folder))


def against(other: list[str], folder: str, args) -> None:
    """This build beside ``other`` (an older checkout's user install), paired."""
    one = generate(os.path.join(folder, "against-one"), 1)[0]
    cold = paired_children({"this": AMPCHECK + ["check", one] + QUIET,
                            "against": other + ["check", one] + QUIET},
                           args.cold_rounds, python=AMPCHECK[0])
    print(f"against {args.against}: cold one-file check {cold['this'].wall_text()} wall"
          f" here, {cold['against'].wall_text()} there"
          f" ({cold['this'].wall_median / cold['against'].wall_median:.2f}x)")
    for name, requirements in (("plain", False), ("requirement", True)):
        target_folder = os.path.join(folder, f"against-{name}")
        paths = generate(target_folder, args.files, requirements=requirements)
        runs = paired_children({build: command + ["check", target_folder, "--jobs", "1"]
                                + QUIET for build, command in (("this", AMPCHECK),
                                                               ("against", other))},
                               args.rounds, python=AMPCHECK[0])
        rates = {build: len(paths) / runs[build].wall_median for build in ("this", "against")}
        print(f"against {args.against}: {name} set, {len(paths)} files, 1 job:"
              f" {rates['this']:.0f} stages/s here (CPU {runs['this'].cpu_text(1.0, 's')}),"
              f" {rates['against']:.0f} there (CPU {runs['against'].cpu_text(1.0, 's')});"
              f" {rates['this'] / rates['against']:.2f}x the rate")


def held(folder: str) -> str:
    """The memory a process holds half-way through a folder and at its end (HELD)."""
    if not os.path.exists("/proc/self/statm"):
        return "skipped: the resident memory is read from /proc, which this system lacks"
    done = subprocess.run([AMPCHECK[0], "-c", HELD, folder], capture_output=True,
                          text=True, cwd=tempfile.gettempdir())
    if done.returncode:
        return "failed: " + done.stderr.strip()[-500:]
    half_count, half_mb, count, end_mb, kept = done.stdout.split()
    per_file = int(kept) / max(1, int(count) - int(half_count))
    return (f"resident {float(half_mb):.1f} MB after {half_count} files, {float(end_mb):.1f}"
            f" MB after {count}; allocated in the second half and still held"
            f" {int(kept) / 1024:.0f} KB, {per_file:.0f} bytes per file"
            f" {target(per_file, KEPT_BYTES_PER_FILE)}")


if __name__ == "__main__":
    main()
