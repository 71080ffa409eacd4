"""Instructions per stage under valgrind's callgrind: prints figures, asserts nothing.

On a shared machine the timings of two builds swing by tens of percent between runs (a
numpy floor alone was seen at 0.16 and 0.39 ms on the same day); the count of machine
instructions a check executes does not. This runs the full check (read, build, analyse,
every rule, every fix re-checked) and the analysis core of the same generated stages
under callgrind, once with one round and once with three, so the start-up cost falls
out of the difference: instructions per stage per round, for the plain and the
requirement set. With ``--against TREE`` the same is measured for another checkout (a
git worktree of an older commit) and the ratio printed. Each checkout runs from its own
user install (bench/user_install.py), so neither borrows the other's modules through the
developer's editable install.

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
from user_install import user_install  # noqa: E402

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
            # an older checkout's figures answer solvable themselves
            if getattr(figures, "solution", figures).solvable:
                figures.loops, figures.sources, figures.output_range
                figures.output_currents, figures.inverting_input
print(len(paths) if what == "check" else len(stages))
"""


def instructions(python: str, what: str, folder: str, rounds: int) -> tuple[int, int]:
    """(instructions executed, items per round) of one child run under callgrind, by the
    ``python`` of a checkout's user install."""
    env = dict(os.environ, **dict.fromkeys(BLAS_THREAD_VARIABLES, "1"))
    env.pop("PYTHONPATH", None)
    with tempfile.TemporaryDirectory() as scratch:
        done = subprocess.run(
            ["valgrind", "--tool=callgrind", f"--callgrind-out-file={scratch}/out",
             python, "-c", CHILD, what, folder, str(rounds)],
            capture_output=True, text=True, env=env, cwd=scratch)
    if done.returncode:
        raise SystemExit(f"the check under callgrind failed ({python}):\n" + done.stderr[-2000:])
    found = re.search(r"refs:\s*([\d,]+)", done.stderr)
    if not found:
        raise RuntimeError("callgrind printed no instruction count:\n" + done.stderr[-2000:])
    return int(found.group(1).replace(",", "")), int(done.stdout.split()[-1])


def per_item(python: str, what: str, folder: str) -> tuple[float, int]:
    """(instructions per item per round: the difference of three rounds and one, items)."""
    one, count = instructions(python, what, folder, 1)
    three, _count = instructions(python, what, folder, 3)
    return (three - one) / 2 / max(count, 1), count


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
        # each checkout from its own user install (bench/user_install.py): compiled, and
        # no editable finder that would lend this checkout's rules to an older one
        pythons = {tree: user_install(os.path.join(folder, f"install-{k}"), root)[0]
                   for k, (tree, root) in enumerate(trees.items())}
        sets = {"plain": os.path.join(folder, "plain"),
                "requirement": os.path.join(folder, "req")}
        generate(sets["plain"], args.stages)
        generate(sets["requirement"], args.stages, requirements=True)
        for what, label in (("core", "analysis core"), ("check", "full check")):
            for name, path in sets.items():
                measured = {tree: per_item(python, what, path)
                            for tree, python in pythons.items()}
                counts = {tree: value for tree, (value, _items) in measured.items()}
                line = ", ".join(f"{tree} {value / 1e6:.2f} M" for tree, value in counts.items())
                items = {tree: n for tree, (_value, n) in measured.items()}
                if len(set(items.values())) > 1:  # an older reader refused some files
                    line += " (over " + ", ".join(f"{n} in {tree}" for tree, n in items.items()) \
                        + " readable: not the same stages)"
                if "against" in counts:
                    line += f" ({counts['this checkout'] / counts['against']:.2f}x)"
                print(f"{label}, {name} set: instructions per stage: {line}")


if __name__ == "__main__":
    main()
