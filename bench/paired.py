"""Honest timing for the benchmarks: paired, interleaved runs with CPU and wall time.

A shared machine's speed drifts by tens of percent between runs, so two things compared
are run in turn (A B A B ...) and each is reported as the median with its spread (the
lowest and highest run), beside a bare ``import numpy`` timed in the same rounds as the
machine's speed. A child process's CPU time and peak memory are read from ``os.wait4``
for that one run (the largest resident set of the process and the children it waited
for), so a figure can fall as well as rise between runs.
"""

from __future__ import annotations

import os
import statistics
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass, field

# BLAS held to one thread, as ampcheck's main() holds it (checker/cli.py): with the
# default threads numpy spends CPU on spinning threads the check never starts, and a
# large product (a Monte Carlo's) runs threaded, so CPU time would count both.
BLAS_THREAD_VARIABLES = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")


def hold_blas_to_one_thread() -> None:
    """As ampcheck's main(): effective only before numpy is first imported."""
    for variable in BLAS_THREAD_VARIABLES:
        os.environ.setdefault(variable, "1")


# A bare numpy import with BLAS held to one thread.
NUMPY_IMPORT = [sys.executable, "-c",
                "import os\n"
                f"for v in {BLAS_THREAD_VARIABLES!r}:\n"
                "    os.environ.setdefault(v, '1')\n"
                "import numpy"]


@dataclass
class Runs:
    """The runs of one command or function: wall and CPU seconds, peak memory in MB."""

    wall: list[float] = field(default_factory=list)
    cpu: list[float] = field(default_factory=list)
    peak_mb: list[float] = field(default_factory=list)

    @staticmethod
    def _text(values: list[float], scale: float, unit: str) -> str:
        middle = statistics.median(values) * scale
        return (f"{middle:.3g} {unit} (spread {min(values) * scale:.3g}-"
                f"{max(values) * scale:.3g}, {len(values)} runs)")

    def wall_text(self, scale: float = 1e3, unit: str = "ms") -> str:
        return self._text(self.wall, scale, unit)

    def cpu_text(self, scale: float = 1e3, unit: str = "ms") -> str:
        return self._text(self.cpu, scale, unit)

    @property
    def wall_median(self) -> float:
        return statistics.median(self.wall)

    @property
    def cpu_median(self) -> float:
        return statistics.median(self.cpu)

    @property
    def peak_mb_max(self) -> float:
        return max(self.peak_mb) if self.peak_mb else float("nan")


def run_child(command: list[str], runs: Runs, cwd: str | None = None,
              env: dict | None = None) -> None:
    """Run ``command`` once and add its wall time, CPU time (user + system, its own and
    its waited-for children's) and peak resident memory to ``runs``."""
    start = time.perf_counter()
    child = subprocess.Popen(command, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                             cwd=cwd or tempfile.gettempdir(), env=env)
    _pid, status, usage = os.wait4(child.pid, 0)
    runs.wall.append(time.perf_counter() - start)
    child.returncode = os.waitstatus_to_exitcode(status)
    if child.returncode not in (0, 1):  # 1: findings, which a benchmark set has
        raise RuntimeError(f"{command} exited {child.returncode}")
    runs.cpu.append(usage.ru_utime + usage.ru_stime)
    runs.peak_mb.append(usage.ru_maxrss / 1024)  # Linux: kilobytes


def run_function(function, runs: Runs) -> None:
    """Call ``function`` once in this process and add its wall and CPU time."""
    wall, cpu = time.perf_counter(), time.process_time()
    function()
    runs.cpu.append(time.process_time() - cpu)
    runs.wall.append(time.perf_counter() - wall)


def paired_children(commands: dict[str, list[str]], rounds: int,
                    probe: bool = True, python: str = sys.executable) -> dict[str, Runs]:
    """Each command run ``rounds`` times, in turn (A B A B ...), with a bare numpy
    import by ``python`` timed in each round under the name ``"numpy import"`` when
    ``probe``."""
    results = {name: Runs() for name in commands}
    if probe:
        results["numpy import"] = Runs()
    for _ in range(rounds):
        for name, command in commands.items():
            run_child(command, results[name])
        if probe:
            run_child([python] + NUMPY_IMPORT[1:], results["numpy import"])
    return results


def paired_functions(functions: dict[str, object], rounds: int) -> dict[str, Runs]:
    """Each function called ``rounds`` times in this process, in turn."""
    results = {name: Runs() for name in functions}
    for function in functions.values():
        function()  # warm: imports, part library, caches of the first call
    for _ in range(rounds):
        for name, function in functions.items():
            run_function(function, results[name])
    return results


def python_calls(function) -> int:
    """Python function calls (and calls into C functions) made by one ``function()``:
    a count of the work that does not depend on the machine's speed or load, for
    comparing two builds where timings on a shared machine swing by tens of percent."""
    calls = 0

    def count(_frame, event, _arg) -> None:
        nonlocal calls
        if event == "call" or event == "c_call":
            calls += 1

    sys.setprofile(count)
    try:
        function()
    finally:
        sys.setprofile(None)
    return calls


def target(measured: float, limit: float, at_most: bool = True) -> str:
    """``(target <= 3: met)`` and the like, for a printed ratio."""
    met = measured <= limit if at_most else measured >= limit
    sign = "<=" if at_most else ">="
    return f"(target {sign} {limit:g}: {'met' if met else 'NOT met'})"
