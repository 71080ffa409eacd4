"""Netlist reading and stage extraction: time per 1,000 netlist lines.

A synthetic board of chained stages (an inverting gain with a feedback capacitor, then
a Sallen-Key low-pass, repeated, with a lamp transistor and a connector per pair) is
written at several sizes; for each, the reader alone, the reader with extraction, and
the whole way to the model (schema validation, build, upstream ranges) are timed,
median of five runs, and reported per 1,000 lines.

    .venv/bin/python bench/netlist_bench.py
"""

from __future__ import annotations

import os
import statistics
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.dirname(os.path.abspath(__file__))))

from checker.io.netlist_reader import read_netlist  # noqa: E402
from checker.netlist.extract import extract  # noqa: E402
from checker.netlist.load import build_netlist_stages, parse_netlist  # noqa: E402
from checker.netlist.mapping import parse_map  # noqa: E402
from checker.parts.library import load_library  # noqa: E402

MAP = """(version 1)
(opamp-model OPX (part gp-bipolar) (pins in+ in- v+ v- out))
(connector CONN)
"""
RUNS = 5


def board(pairs: int) -> str:
    """A netlist of ``pairs`` gain-then-filter stage pairs, each fed by the one before."""
    lines = ["* synthetic board", "V1 vcc 0 DC 12", "V2 vee 0 DC -12", "XJ0 in0 0 CONN"]
    for i in range(pairs):
        src = f"in{i}"
        lines += [f"* pair {i}",
                  f"R{i}a {src} fb{i} 10k", f"R{i}b fb{i} g{i}", "+ 47k",
                  f"C{i}a fb{i} g{i} 10p", f"XUa{i} 0 fb{i} vcc vee g{i} OPX",
                  f"R{i}c g{i} s{i}a 22k", f"R{i}d s{i}a s{i}b 22k",
                  f"C{i}b s{i}a in{i + 1} 100n", f"C{i}c s{i}b 0 47n",
                  f"XUb{i} s{i}b in{i + 1} vcc vee in{i + 1} OPX",
                  f"Q{i} lamp{i} base{i} 0 NPN", f"R{i}e base{i} 0 10k"]
    lines.append(f"XJ1 in{pairs} 0 CONN")
    return "\n".join(lines) + "\n"


def median_ms(function) -> float:
    times = []
    for _ in range(RUNS):
        start = time.perf_counter()
        function()
        times.append(time.perf_counter() - start)
    return statistics.median(times) * 1e3


def main() -> None:
    netlist_map = parse_map(MAP, "bench.netmap")
    library = load_library()
    print(f"{'lines':>7} {'stages':>7} {'read ms/kline':>14} {'extract ms/kline':>17}"
          f" {'to model ms/kline':>18}")
    for pairs in (10, 50, 200):
        text = board(pairs)
        lines = text.count("\n")
        kilo = lines / 1000

        def to_model():
            parsed, extraction = parse_netlist(text, "bench.cir", netlist_map)
            return build_netlist_stages(parsed, extraction, library)

        read = median_ms(lambda: read_netlist(text, "bench.cir"))
        cut = median_ms(lambda: extract(read_netlist(text, "bench.cir"), netlist_map))
        model = median_ms(to_model)
        stages = len(to_model())
        print(f"{lines:>7} {stages:>7} {read / kilo:>14.1f} {cut / kilo:>17.1f}"
              f" {model / kilo:>18.1f}")
    print("to model: reading, extraction, schema validation, build, and each fed stage's"
          " input range from its upstream stage's analysis")


if __name__ == "__main__":
    main()
