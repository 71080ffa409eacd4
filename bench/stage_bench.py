"""Per-stage cost in process, against the numpy floor: prints figures, asserts nothing.

Two stage sets from generate_stages.py: the plain set (no requirements) and the
requirement set (requirements, tolerances and bands like the samples, so the tolerance
analyses, noise and the verdicts run). For each, the full check of one file in process
(read, build, analyse, every rule, every fix re-checked) in CPU and wall time, median
and spread, the two sets interleaved; beside it the numpy floor of the same stages: the
AC system stacked over the default grid, one batched solve of every grid excitation and
one DC solve of the same size, which no implementation of the same analysis can beat.

Targets (issue: performance): the analysis core <= 3x the numpy floor for the same
system; a full check of a stage with real requirements <= 3 ms in process.

BLAS is held to one thread before numpy loads, as ampcheck's main() holds it, so CPU
time counts no spinning BLAS threads. Beside the timings, the Python calls per stage (a
count of the work, the same on a busy machine as on a quiet one) compare two builds
where the timings of a shared machine cannot.

There is no comparison against a general-purpose circuit simulator here: none is part of
this project's environment, and the numpy floor is the bound the target is set against.

Run: .venv/bin/python bench/stage_bench.py [--stages 120] [--rounds 5]
"""

from __future__ import annotations

import argparse
import os
import statistics
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)

from paired import (hold_blas_to_one_thread, paired_functions, python_calls,  # noqa: E402
                    target)

hold_blas_to_one_thread()  # before numpy: the check's own setting, in process too

import numpy as np  # noqa: E402
from generate_stages import generate  # noqa: E402

from checker.analysis import AnalysisOptions, analyse  # noqa: E402
from checker.analysis.mna import system_stack  # noqa: E402
from checker.engine import RunOptions, load_rules  # noqa: E402
from checker.files import load_file  # noqa: E402
from checker.parts.library import load_library  # noqa: E402
from checker.review import review_file  # noqa: E402

LIBRARY = load_library()
RULES = load_rules()


def readable(paths: list[str]) -> list[str]:
    """The files of a set that read and build (the set holds ~2 % broken files)."""
    return [p for p in paths if load_file(p, LIBRARY).ok]


def check_all(paths: list[str]):
    rules, options = list(RULES.values()), RunOptions()

    def run() -> None:
        for path in paths:
            review_file(path, LIBRARY, rules, options, catalogue=RULES)

    return run


def analyse_all(paths: list[str]):
    stages = [s for p in paths for s in load_file(p, LIBRARY).stages]

    def run() -> None:
        for stage in stages:
            figures = analyse(stage, AnalysisOptions())
            if figures.solution.solvable:
                figures.loops, figures.sources, figures.output_range
                figures.output_currents, figures.inverting_input

    return run, len(stages)


def floor_seconds(paths: list[str], repeats: int = 20) -> float:
    """Median CPU seconds per stage of the numpy floor (see the module docstring)."""
    per_stage = []
    for path in paths:
        for stage in load_file(path, LIBRARY).stages:
            solution = analyse(stage, AnalysisOptions()).solution
            if not solution.solvable:
                continue
            frequencies = solution.frequencies_hz
            s = 2j * np.pi * frequencies
            gains = solution.open_loop_gains(frequencies)
            matrices, keep, _dropped = solution.reduced
            B = solution.excitations(solution.grid_excitations)[keep, :]
            Bf = np.broadcast_to(B, (frequencies.size,) + B.shape)
            times = []
            for _ in range(repeats):
                start = time.process_time()
                Y = system_stack(matrices, gains, s)
                np.linalg.solve(Y, Bf)
                np.linalg.solve(Y[0].real, B)  # a DC solve of the same size
                times.append(time.process_time() - start)
            per_stage.append(statistics.median(times))
    return statistics.median(per_stage)


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--stages", type=int, default=120)
    parser.add_argument("--rounds", type=int, default=5)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as folder:
        sets = {"plain": readable(generate(os.path.join(folder, "plain"), args.stages)),
                "requirement": readable(generate(os.path.join(folder, "req"), args.stages,
                                                 requirements=True))}
        floors = {name: floor_seconds(paths[:40]) for name, paths in sets.items()}
        analysis = {name: analyse_all(paths) for name, paths in sets.items()}
        runs = paired_functions({f"analysis, {name}": run
                                 for name, (run, _n) in analysis.items()}, args.rounds)
        print(f"numpy floor per stage (stack + one batched solve + DC, default grid):"
              f" plain {floors['plain'] * 1e3:.3f} ms, requirement"
              f" {floors['requirement'] * 1e3:.3f} ms CPU")
        for name, (_run, count) in analysis.items():
            result = runs[f"analysis, {name}"]
            per = result.cpu_median / count
            print(f"analysis core, {name} set ({count} stages): {per * 1e3:.3f} ms CPU per"
                  f" stage, {per / floors[name]:.1f}x the floor"
                  f" {target(per / floors[name], 3.0)}; runs {result.cpu_text()} per set")
        for name, (run, count) in analysis.items():
            print(f"analysis core, {name} set: {python_calls(run) / count:,.0f} Python calls"
                  " per stage (a count of the work, free of the machine's speed)")
        checks = paired_functions({name: check_all(paths) for name, paths in sets.items()},
                                  args.rounds)
        for name, paths in sets.items():
            result = checks[name]
            per = result.cpu_median / len(paths)
            wall = result.wall_median / len(paths)
            limit = f" {target(per * 1e3, 3.0)}" if name == "requirement" else ""
            print(f"full check, {name} set ({len(paths)} files): {per * 1e3:.2f} ms CPU"
                  f" ({wall * 1e3:.2f} ms wall) per stage, {per / floors[name]:.0f}x the"
                  f" floor{limit}; runs {result.cpu_text(1.0, 's')} per set")
        for name, paths in sets.items():
            print(f"full check, {name} set: {python_calls(check_all(paths)) / len(paths):,.0f}"
                  " Python calls per stage")


if __name__ == "__main__":
    main()
