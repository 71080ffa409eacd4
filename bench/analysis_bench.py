"""Benchmark of the analysis core: prints median timings, asserts nothing.

Targets (issue: analysis core): all figures of a typical one-op-amp stage (8 nets,
200 frequency points) under 2 ms; cost no worse than linear in frequency points; a
three-op-amp stage under 3x a one-op-amp stage.

Run: .venv/bin/python bench/analysis_bench.py
"""

from __future__ import annotations

import os
import statistics
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from paired import hold_blas_to_one_thread  # noqa: E402

hold_blas_to_one_thread()  # before numpy: the check's own setting, in process too

import numpy as np  # noqa: E402

from checker.analysis import AnalysisOptions, analyse  # noqa: E402
from checker.analysis.mna import assemble, system_stack, without_rails  # noqa: E402
from checker.analysis.poles import stage_poles  # noqa: E402
from checker.build import build_stages  # noqa: E402
from checker.io.load import parse_text  # noqa: E402
from checker.parts.library import load_library  # noqa: E402

ONE = """
(stage one (supply vcc 12V) (supply vee -12V) (ground gnd)
  (opamp U1 (part jfet-input) (in+ bias) (in- fb) (out out) (v+ vcc) (v- vee))
  (resistor R1 in fb 10k) (resistor R2 fb out 100k) (capacitor C1 fb out 10p)
  (resistor R3 bias gnd 9k1) (resistor R4 out iso 47) (capacitor C2 in2 gnd 1n)
  (resistor R5 in in2 1k)
  (source in (range -0.5V 0.5V) (band 10Hz 20kHz) (impedance 600))
  (load iso (resistance 10k) (capacitance 1n)))
"""

THREE = """
(stage three (supply vcc 12V) (supply vee -12V) (ground gnd)
  (opamp U1 (part jfet-input) (in+ in) (in- a) (out a) (v+ vcc) (v- vee))
  (opamp U2 (part jfet-input) (in+ gnd) (in- fb2) (out b) (v+ vcc) (v- vee))
  (resistor R1 a fb2 10k) (resistor R2 fb2 b 100k) (capacitor C1 fb2 b 10p)
  (opamp U3 (part gp-bipolar) (in+ gnd) (in- fb3) (out out) (v+ vcc) (v- vee))
  (resistor R3 b fb3 10k) (resistor R4 fb3 out 20k) (capacitor C2 fb3 out 100p)
  (source in (range -0.5V 0.5V) (band 10Hz 20kHz) (impedance 600))
  (load out (resistance 10k) (capacitance 1n)))
"""


def stage_of(text: str):
    return build_stages(parse_text(text, "bench.stage"), load_library())[0]


def all_figures(stage, points: int = 200) -> None:
    figures = analyse(stage, AnalysisOptions(points=points))
    figures.loops
    figures.sources
    figures.output_impedance
    figures.inverting_input
    figures.output_range
    figures.output_currents


def median_ms(function, repeats: int = 200) -> float:
    function()  # warm caches of imports and parts
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        function()
        times.append(time.perf_counter() - start)
    return statistics.median(times) * 1e3


def breakdown(stage, points: int = 200) -> dict[str, float]:
    figures = analyse(stage, AnalysisOptions(points=points))
    frequencies = figures.frequencies_hz
    circuit = figures.circuit
    s = 2j * np.pi * frequencies
    solution = figures.solution
    B = solution.excitations(solution.grid_excitations)

    def assembly():
        matrices, _keep, _dropped = without_rails(assemble(circuit), circuit)
        system_stack(matrices, figures.open_loop_gains(frequencies), s)

    def batched_solve():  # the stack with the rails taken out, solved for every column
        figures.solve_columns(frequencies, B)

    def loop_gain():
        fresh = analyse(stage, AnalysisOptions(points=points))
        fresh.solution.grid  # the shared solve, paid before the timer in a real run
        start = time.perf_counter()
        fresh.loops
        return time.perf_counter() - start

    loop_times = sorted(loop_gain() for _ in range(100))
    return {"assembly": median_ms(assembly), "solve": median_ms(batched_solve),
            "loop gain (incl. crossover refinement)": loop_times[50] * 1e3}


def main() -> None:
    one, three = stage_of(ONE), stage_of(THREE)
    print(f"one-op-amp stage: {len(one.nets)} nets, 200 points")
    one_ms = median_ms(lambda: all_figures(one))
    print(f"  all figures, median: {one_ms:.3f} ms (target < 2 ms)")
    for name, value in breakdown(one).items():
        print(f"    {name}: {value:.3f} ms")
    default = AnalysisOptions().points
    default_ms = median_ms(lambda: all_figures(one, default))
    print(f"  all figures on the default grid ({default} points): {default_ms:.3f} ms")
    print("scaling with frequency points (one-op-amp stage, all figures):")
    base = None
    for points in (100, 200, 400, 800, 1600):
        ms = median_ms(lambda: all_figures(one, points), repeats=60)
        base = base or ms / points
        print(f"  {points:5d} points: {ms:.3f} ms  ({ms / points / base:.2f}x per point of 100)")
    three_ms = median_ms(lambda: all_figures(three))
    print(f"three-op-amp stage ({len(three.nets)} nets): {three_ms:.3f} ms,"
          f" {three_ms / one_ms:.2f}x the one-op-amp stage (target < 3x)")
    for name, stage in (("one-op-amp", one), ("three-op-amp", three)):
        def poles():
            stage_poles(analyse(stage, AnalysisOptions(points=default)))
        def build():
            analyse(stage, AnalysisOptions(points=default)).ac_matrices
        cost = median_ms(poles) - median_ms(build)
        print(f"natural frequencies of the {name} stage (pencil + eigenvalues): {cost:.3f} ms"
              f" per stage, {cost / default_ms * 100:.0f} % of its default-grid analysis")


if __name__ == "__main__":
    main()
