"""Benchmark of the two tolerance rules (gain-tolerance, difference-balance): prints
figures, asserts nothing.

Target (issue 18): linear in the number of varied elements; a 100-passive stage's
tolerance rules under 1 s and 200 MB.

Each stage is a difference amplifier (the topology both rules read) whose four arms are
chains (the feedback arm: parallel parts) of 1 % resistors, so every resistor is varied:
5, 20, 50 and 100 passives. The
stage states a gain tolerance and a CMRR that its resistors miss, so both rules find,
run their Monte Carlo (10,000 boards, the rules' default) and try every stock tolerance
for their fixes: the heaviest path.

Per size, in a fresh process each: CPU time (time.process_time) and wall time of a check
with the two rules and the requirement verdicts (the verdicts share the spreads; the
analysis figures they read are included), and the process's peak resident memory
(resource.getrusage max RSS) after the check, beside its peak when the stage was built.

Then the first-order worst corner alone (corner_search.py, what the rules use beyond
``max_corner_resistors``): on the same stages at 20, 50 and 100 passives, the CPU time of
the sensitivity pass (central differences at nominal, then the single-flip verification
rounds) for the gain's highest and lowest corners and for the pair's lowest CMRR, from a
fresh analysis each time (the factorisation included); the rounds used and whether each
corner was verified. Target: well under 1 s at 100 passives.

The last lines judge the largest size against the target, and the growth between the
two largest sizes against linear (the time per passive no more than 1.25x at twice the
passives; the smallest sizes are dominated by the check's fixed cost).

Run: .venv/bin/python bench/tolerance_bench.py [--sizes 5 20 50 100] [--repeats 3]
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from paired import target  # noqa: E402

SIZES = (5, 20, 50, 100)
ARMS = (("in1", "fb", 10e3), ("fb", "out", 100e3), ("in2", "pos", 10e3),
        ("pos", "gnd", 100e3))  # (from, to, total ohms): a difference gain of 10


def stage_text(passives: int) -> str:
    """A difference stage whose four arms share ``passives`` resistors: three arms in
    series chains, the feedback arm in parallel (so the topology stays a difference)."""
    counts = [passives // 4 + (1 if k < passives % 4 else 0) for k in range(4)]
    parts, index = [], 1
    for arm, ((start, end, total), count) in enumerate(zip(ARMS, counts)):
        nets = [start] + [f"a{arm}n{k}" for k in range(1, count)] + [end]
        for k in range(count):
            if arm == 1:  # the feedback arm in parallel: a part from out to in- names it
                a, b, ohms = start, end, total * count
            else:
                a, b, ohms = nets[k], nets[k + 1], total / count
            parts.append(f"(resistor R{index} {a} {b} {ohms:.6g} (tolerance 1%))")
            index += 1
    body = "\n  ".join(parts)
    return (f"(version 1)\n(stage bench-{passives}\n  (ground gnd) (supply vcc 15V)"
            " (supply vee -15V)\n"
            "  (opamp U1 (part precision-bipolar) (in+ pos) (in- fb) (out out) (v+ vcc)"
            " (v- vee))\n"
            f"  {body}\n"
            "  (source in1 (range -0.1V 0.1V) (band 0Hz 10Hz) (impedance 10))\n"
            "  (source in2 (range -0.1V 0.1V) (band 0Hz 10Hz) (impedance 10))\n"
            "  (load out (resistance 10k))\n"
            "  (require (gain 10) (gain-tolerance 1%) (cmrr 80dB)))\n")


def measure(passives: int, repeats: int) -> dict:
    """In this process: build the stage, check it ``repeats`` times, report the best."""
    from checker.build import build_stages
    from checker.engine import RunOptions, check_stages, load_rules
    from checker.io.load import parse_text
    from checker.parts.library import load_library

    stage = build_stages(parse_text(stage_text(passives), "bench.stage"), load_library())[0]
    catalogue = load_rules()
    rules = [catalogue["gain-tolerance"], catalogue["difference-balance"]]
    options = RunOptions()
    built_rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    cpu, wall, found = [], [], []
    for _ in range(repeats):
        start_cpu, start_wall = time.process_time(), time.perf_counter()
        _figures, by_stage = check_stages([stage], rules, options)
        cpu.append(time.process_time() - start_cpu)
        wall.append(time.perf_counter() - start_wall)
        found = [(f.rule, f.measured) for fs in by_stage.values() for f in fs]
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    return {"cpu": min(cpu), "wall": min(wall), "built_kb": built_rss, "peak_kb": peak,
            "findings": found}


FIRST_ORDER_SIZES = (20, 50, 100)


def first_order(passives: int, repeats: int) -> dict:
    """The sensitivity pass alone, best CPU time of ``repeats`` fresh analyses."""
    from checker.analysis import AnalysisOptions, analyse
    from checker.analysis.signal import stage_signals
    from checker.analysis.spread import GainSpread
    from checker.build import build_stages
    from checker.io.load import parse_text
    from checker.parts.library import load_library

    stage = build_stages(parse_text(stage_text(passives), "bench.stage"), load_library())[0]
    refs = [p.ref for p in stage.resistors()]
    tolerances = {p.ref: p.tolerance for p in stage.resistors()}
    gain_cpu, cmrr_cpu, notes = [], [], ""
    for _ in range(repeats):
        figures = analyse(stage, AnalysisOptions())
        signals = stage_signals(figures)
        signal = signals[0]
        pair = next(s for s in signals if s.pair)
        start = time.process_time()
        gain = GainSpread(figures, signal.weights, signal.reference_hz)
        high, low = gain.gain_corners(refs, tolerances)
        middle = time.process_time()
        spread = GainSpread(figures, pair.weights, pair.reference_hz)
        corner = spread.rejection_corner(refs, tolerances)
        gain_cpu.append(middle - start)
        cmrr_cpu.append(time.process_time() - middle)
        notes = (f"gain high {high.rounds} rounds {'verified' if high.verified else 'NOT'},"
                 f" low {low.rounds} {'verified' if low.verified else 'NOT'};"
                 f" cmrr {corner.rounds} {'verified' if corner.verified else 'NOT'}")
    return {"gain": min(gain_cpu), "cmrr": min(cmrr_cpu), "notes": notes}


def in_child(passives: int, repeats: int) -> dict:
    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    env = dict(os.environ, PYTHONPATH=root + os.pathsep + os.environ.get("PYTHONPATH", ""))
    out = subprocess.run([sys.executable, os.path.abspath(__file__), "--child", str(passives),
                          "--repeats", str(repeats)],
                         capture_output=True, text=True, env=env, check=True)
    return json.loads(out.stdout)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=list(SIZES))
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--first-order-sizes", type=int, nargs="+",
                        default=list(FIRST_ORDER_SIZES))
    parser.add_argument("--child", type=int, help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child is not None:
        print(json.dumps(measure(args.child, args.repeats)))
        return
    print("first-order worst corner (sensitivity pass + verification), CPU s, best of"
          f" {args.repeats}; target for 100 passives: well under 1 s")
    print(f"{'passives':>8} {'gain (2 corners)':>17} {'CMRR':>8}  rounds")
    for size in args.first_order_sizes:
        figures = first_order(size, args.repeats)
        print(f"{size:8d} {figures['gain']:17.4f} {figures['cmrr']:8.4f}  {figures['notes']}")
    print("tolerance rules (gain-tolerance + difference-balance + verdicts), best of"
          f" {args.repeats}; target for 100 passives: < 1 s, < 200 MB")
    print(f"{'passives':>8} {'rules CPU s':>12} {'rules wall s':>13}"
          f" {'peak MB':>8} {'built MB':>9} {'extra MB':>9}  findings")
    previous = None
    rows = {}
    for size in args.sizes:
        with_rules = rows[size] = in_child(size, args.repeats)
        peak, built = with_rules["peak_kb"] / 1024, with_rules["built_kb"] / 1024
        found = ", ".join(f"{rule} {measured:.6g}" for rule, measured in with_rules["findings"])
        growth = ""
        if previous is not None:
            growth = (f"  ({with_rules['cpu'] / previous[1]:.1f}x CPU for"
                      f" {size / previous[0]:.1f}x passives)")
        print(f"{size:8d} {with_rules['cpu']:12.3f} {with_rules['wall']:13.3f}"
              f" {peak:8.1f} {built:9.1f} {peak - built:9.1f}  {found}"
              f"{growth}")
        previous = (size, with_rules["cpu"])
    largest = max(rows)
    row = rows[largest]
    print(f"{largest} passives: {row['cpu']:.3f} s CPU"
          f" {target(row['cpu'], 1.0)}, {row['peak_kb'] / 1024:.0f} MB peak"
          f" {target(row['peak_kb'] / 1024, 200.0)}")
    grown = sorted(rows)[-2:]
    if len(grown) == 2 and rows[grown[0]]["cpu"] > 0:
        # linear: the CPU time grows no faster than the passives (the slope between the
        # two largest sizes, where the fixed cost of a check no longer dominates)
        slope = (rows[grown[1]]["cpu"] / rows[grown[0]]["cpu"]) / (grown[1] / grown[0])
        print(f"{grown[0]} to {grown[1]} passives: CPU time grew {slope:.2f}x as fast as the"
              f" passives {target(slope, 1.25)}")


if __name__ == "__main__":
    main()
