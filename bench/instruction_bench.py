"""Instructions per stage under valgrind's callgrind: prints figures, asserts nothing.

On a shared machine the timings of two builds swing by tens of percent between runs (a
numpy floor alone was seen at 0.16 and 0.39 ms on the same day); the count of machine
instructions a check executes does not. This runs the full check (read, build, analyse,
every rule, every fix re-checked) and the analysis core of the same generated stages
under callgrind, once with one round and once with three, so the start-up cost falls
out of the difference: instructions per stage per round, for the plain and the
requirement set. With ``--against TREE`` the same is measured for another checkout (a
git worktree of an older commit) and the ratio printed.

BLAS is held to one thread, as ampcheck's main() holds it. Skipped, with a note, where
valgrind is not installed (it is no dependency of the project).

Run: .venv/bin/python bench/instruction_bench.py [--stages 40] [--against TREE]
"""

from __future__ import annotations

import argparse
import os
import re
import shutil
import subprocess
import sys
import tempfile

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
sys.path.insert(0, HERE)

from generate_stages import generate  # noqa: E402
from paired import BLAS_THREAD_VARIABLES  # noqa: E402

# Run in the child: read every readable file of a folder once (start-up and reading
# outside the rounds for the core), then the rounds.
CHILD = """
import glob, sys
from checker.analysis import AnalysisOptions, analyse
from checker.engine import RunOptions, load_rules
from checker.files import load_file
from checker.parts.library import load_library
from checker.review import review_file
what, folder, rounds = sys.argv[1], sys.argv[2], int(sys.argv[3])
library, rules = load_library(), load_rules()
paths = [p for p in sorted(glob.glob(folder + "/**/*.stage*", recursive=True))
         if load_file(p, library).ok]
stages = [s for p in paths for s in load_file(p, library).stages]
for _ in range(rounds):
    if what == "check":
        for path in paths:
            review_file(path, library, list(rules.values()), RunOptions(), catalogue=rules)
    else:
        for stage in stages:
            figures = analyse(stage, AnalysisOptions())
            if figures.solution.solvable:
                figures.loops, figures.sources, figures.output_range
                figures.output_currents, figures.inverting_input
print(len(paths) if what == "check" else len(stages))
"""


def instructions(tree: str, what: str, folder: str, rounds: int) -> tuple[int, int]:
    """(instructions executed, items per round) of one child run under callgrind."""
    env = dict(os.environ, PYTHONPATH=tree, **dict.fromkeys(BLAS_THREAD_VARIABLES, "1"))
    with tempfile.TemporaryDirectory() as scratch:
        done = subprocess.run(
            ["valgrind", "--tool=callgrind", f"--callgrind-out-file={scratch}/out",
             sys.executable, "-c", CHILD, what, folder, str(rounds)],
            capture_output=True, text=True, env=env, cwd=tree, check=True)
    found = re.search(r"refs:\s*([\d,]+)", done.stderr)
    if not found:
        raise RuntimeError("callgrind printed no instruction count:\n" + done.stderr[-2000:])
    return int(found.group(1).replace(",", "")), int(done.stdout.split()[-1])


def per_item(tree: str, what: str, folder: str) -> float:
    """Instructions per item per round: the difference of three rounds and one."""
    one, count = instructions(tree, what, folder, 1)
    three, _count = instructions(tree, what, folder, 3)
    return (three - one) / 2 / max(count, 1)


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--stages", type=int, default=40)
    parser.add_argument("--against", help="another checkout to measure beside this one")
    args = parser.parse_args()
    if shutil.which("valgrind") is None:
        print("instruction counts skipped: valgrind is not installed (apt-get install"
              " valgrind); the timing benches still run")
        return
    trees = {"this checkout": ROOT}
    if args.against:
        trees["against"] = os.path.abspath(args.against)
    with tempfile.TemporaryDirectory() as folder:
        sets = {"plain": os.path.join(folder, "plain"),
                "requirement": os.path.join(folder, "req")}
        generate(sets["plain"], args.stages)
        generate(sets["requirement"], args.stages, requirements=True)
        for what, label in (("core", "analysis core"), ("check", "full check")):
            for name, path in sets.items():
                counts = {tree: per_item(root, what, path) for tree, root in trees.items()}
                line = ", ".join(f"{tree} {value / 1e6:.2f} M" for tree, value in counts.items())
                if "against" in counts:
                    line += f" ({counts['this checkout'] / counts['against']:.2f}x)"
                print(f"{label}, {name} set: instructions per stage: {line}")


if __name__ == "__main__":
    main()
