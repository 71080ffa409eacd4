"""Worst-case inputs: time and peak memory of `ampcheck check` on each hostile family.

Each family is one small file built to cost as much as it can (or to break something),
checked by a fresh `ampcheck check --jobs 1` process; the script prints the wall time,
the peak resident memory of that process, its exit status and the finding that stopped
it, if any. Every family must finish, or be stopped, within the per-file time budget,
with the peak memory well under the per-file cap.

Run: .venv/bin/python bench/hostile_bench.py [--budget SECONDS] [--only NAME] [--keep DIR]
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time

RAILS = "(ground gnd) (supply vcc 15V) (supply vee -15V)"
OPAMP = "(opamp U1 (part gp-bipolar) (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))"
SOURCE = "(source in (amplitude 0.1V) (band 10Hz 1kHz) (impedance 100))"
LOAD = "(load out (resistance 10k))"


def stage(body: str, require: str = "", name: str = "s") -> str:
    return f"(version 1)\n(stage {name} {RAILS}\n  {body}\n  {SOURCE} {LOAD} {require})\n"


def inverting(r1: str = "10k", r2: str = "100k", require: str = "") -> str:
    return stage(f"{OPAMP}\n  (resistor R1 in fb {r1}) (resistor R2 fb out {r2})", require)


def tolerance_ladder(count: int) -> str:
    """The input resistor as ``count`` toleranced resistors in series, a gain
    requirement: corners for 2^count combinations if nothing bounded them."""
    chain = " ".join(f"(resistor R{i + 1} n{i} n{i + 1} 100 (tolerance 1%))"
                     for i in range(count))
    chain = chain.replace("n0 ", "in ", 1).replace(f"n{count} ", "fb ", 1)
    return stage(f"{OPAMP}\n  {chain}\n  (resistor RF fb out {count}k (tolerance 1%))",
                 "(require (gain -10) (gain-tolerance 0.5%))")


def wide_monte_carlo(nodes: int) -> str:
    """A gain requirement over a resistor ladder of ``nodes`` nets: a Monte Carlo whose
    (samples, n, n) stack would be gigabytes in one piece."""
    rungs = []
    for i in range(nodes):
        a = "in" if i == 0 else f"n{i}"
        b = "fb" if i == nodes - 1 else f"n{i + 1}"
        rungs.append(f"(resistor RS{i} {a} {b} 100 (tolerance 1%))")
        if 0 < i < nodes - 1:
            rungs.append(f"(resistor RP{i} n{i} gnd 1M (tolerance 1%))")
    return stage(f"{OPAMP}\n  " + "\n  ".join(rungs) +
                 "\n  (resistor RF fb out 100k (tolerance 1%))",
                 "(require (gain -1) (gain-tolerance 0.1%))")


def followers(count: int) -> str:
    """``count`` unity followers in a chain, each an op-amp loop of its own."""
    chain = []
    for i in range(count):
        a = "in" if i == 0 else f"n{i}"
        b = "out" if i == count - 1 else f"n{i + 1}"
        chain.append(f"(opamp U{i + 1} (part gp-bipolar) (in+ {a}) (in- {b}) (out {b})"
                     " (v+ vcc) (v- vee))")
    return stage("\n  ".join(chain))


def dangling(count: int) -> str:
    """``count`` resistors, each to a net of its own that nothing else touches."""
    extra = " ".join(f"(resistor X{i} out d{i} 1k)" for i in range(count))
    return stage(f"{OPAMP}\n  (resistor R1 in fb 10k) (resistor R2 fb out 100k)\n  {extra}")


def off_series(count: int) -> str:
    """``count`` resistors at the op-amp's input with values off every series."""
    extra = " ".join(f"(resistor X{i} fb gnd 10.37M)" for i in range(count))
    return stage(f"{OPAMP}\n  (resistor R1 in fb 10k) (resistor R2 fb out 100k)\n  {extra}")


def many_stages(count: int) -> str:
    body = "".join(inverting().split("\n", 1)[1].replace("(stage s", f"(stage s{i}")
                   for i in range(count))
    return "(version 1)\n" + body


FAMILIES = {
    "400-digit resistor": lambda: inverting(r1="1" + "0" * 400),
    "7000 dB gain": lambda: inverting(require="(require (gain 7000dB))"),
    "1e400 value": lambda: inverting(r2="1e400"),
    "denormal resistor": lambda: inverting(r1="5e-324"),
    "100 toleranced resistors": lambda: tolerance_ladder(100),
    "Monte Carlo at 212 nodes": lambda: wide_monte_carlo(212),
    "160 followers": lambda: followers(160),
    "64,000 dangling nets": lambda: dangling(64000),
    "6,400 off-series resistors": lambda: off_series(6400),
    "200 stages in one file": lambda: many_stages(200),
    # the same families at the size limits (checker/stage_limits.py): reviewed in full
    "Monte Carlo at the limit": lambda: wide_monte_carlo(127),
    "16 followers": lambda: followers(16),
    "250 dangling nets": lambda: dangling(250),
    "250 off-series resistors": lambda: off_series(250),
    "64 stages in one file": lambda: many_stages(64),
}


def _stopper(out: bytes, err: bytes) -> str:
    try:
        document = json.loads(out)
    except ValueError:
        return "no valid JSON report: " + err.decode(errors="replace").strip()[:80]
    for entry in document["files"]:
        for finding in entry["problems"]:
            return f"{finding['rule']}: {finding['message'][:70]}"
    return "reviewed"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--budget", type=float, help="per-file time budget (default: the"
                        " tool's own)")
    parser.add_argument("--only", help="run the families whose name contains this")
    parser.add_argument("--keep", help="write the files into this folder and keep them")
    args = parser.parse_args()
    folder = args.keep or tempfile.mkdtemp(prefix="ampcheck-hostile-")
    os.makedirs(folder, exist_ok=True)
    print(f"{'family':28} {'bytes':>9} {'seconds':>8} {'peak MB':>8} {'exit':>4}  outcome")
    for name, make in FAMILIES.items():
        if args.only and args.only not in name:
            continue
        path = os.path.join(folder, name.replace(" ", "-").replace(",", "") + ".stage")
        with open(path, "w", encoding="utf-8") as handle:
            handle.write(make())
        seconds, peak, status, outcome = _measure(path, args.budget)
        print(f"{name:28} {os.path.getsize(path):>9} {seconds:>8.2f} {peak:>8.0f} {status:>4}"
              f"  {outcome}", flush=True)
    if not args.keep:
        for entry in os.listdir(folder):
            os.unlink(os.path.join(folder, entry))
        os.rmdir(folder)


def _measure(path: str, budget: float | None) -> tuple[float, float, int, str]:
    """Run one family in a child process and read its own resource usage (wait4)."""
    command = [sys.executable, "-m", "checker", "check", path, "--format", "json",
               "--no-config", "--no-progress", "--jobs", "1"]
    if budget is not None:
        command += ["--time-budget", str(budget)]
    start = time.perf_counter()
    with tempfile.TemporaryFile() as out, tempfile.TemporaryFile() as err:
        process = subprocess.Popen(command, stdout=out, stderr=err)
        _pid, status, usage = os.wait4(process.pid, 0)
        seconds = time.perf_counter() - start
        process.returncode = os.waitstatus_to_exitcode(status)
        out.seek(0)
        err.seek(0)
        outcome = _stopper(out.read(), err.read())
    return seconds, usage.ru_maxrss / 1024, process.returncode, outcome


if __name__ == "__main__":
    main()
