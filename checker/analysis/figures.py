"""Figures of a stage for the rules: a thin cache over the solution and the figure
modules, each figure computed on first use.

``analyse(stage)`` returns a Figures object at once; nothing is solved until a rule reads
a figure. The solves live in solution.py (one AC solve over the grid with every
excitation as a column, one DC solve); the figures are pure functions of the solution in
loops.py, sources.py, ranges.py and network.py. All values are SI floats, or complex
arrays over ``frequencies_hz``.
"""

from __future__ import annotations

from functools import cached_property

import numpy as np

from checker.analysis import loops as loop_figures
from checker.analysis import network, ranges
from checker.analysis import sources as source_module
from checker.analysis.circuit import Circuit
from checker.analysis.grid import (REFINE_POINTS, band_peak, bandwidth_edges,  # noqa: F401
                                   grid_upper_edges, pick,
                                   reference_frequency, signed_gain)
from checker.analysis.loop import Margins
from checker.analysis.results import (AnalysisOptions, AnalysisProblem, LoopFigures,  # noqa: F401
                                      NodeRange, OutputCurrent, SourceFigures)
from checker.analysis.solution import Solution
from checker.model import Stage


def analyse(stage: Stage, options: AnalysisOptions | None = None) -> Figures:
    """Lazily computed figures of ``stage``."""
    return Figures(stage, options or AnalysisOptions())


class Figures:
    """Every number the rules read, computed on demand and cached."""

    def __init__(self, stage: Stage, options: AnalysisOptions):
        self.stage = stage
        self.options = options
        self.solution = Solution(stage, options)
        self._memo: dict = {}

    def cached(self, key, compute):
        """``compute()`` once per ``key`` for this stage: figures that several readers
        (a requirement's verdict and the rule that explains it) ask for alike."""
        if key not in self._memo:
            self._memo[key] = compute()
        return self._memo[key]

    # -- the solution's structure and solves -----------------------------------------
    @property
    def circuit(self) -> Circuit:
        return self.solution.circuit

    @property
    def problems(self) -> list[AnalysisProblem]:
        return self.solution.problems

    @property
    def floating_nets(self) -> frozenset[str]:
        """Nets with no DC path to ground: DC figures of what depends on them mean
        nothing."""
        return self.solution.floating_nets

    @property
    def solvable(self) -> bool:
        return self.solution.solvable

    @property
    def frequencies_hz(self) -> np.ndarray:
        return self.solution.frequencies_hz

    @property
    def ac_matrices(self):
        return self.solution.ac_matrices

    def open_loop_gains(self, frequencies: np.ndarray) -> np.ndarray:
        return self.solution.open_loop_gains(frequencies)

    def solve_columns(self, frequencies: np.ndarray, B: np.ndarray) -> np.ndarray:
        """The AC system solved for right-hand sides B: Solution.solve."""
        return self.solution.solve(frequencies, B)

    def node_transfers(self, frequencies: np.ndarray, node: int, B: np.ndarray) -> np.ndarray:
        """Node ``node``'s voltage per right-hand side of B (n, m): Solution.node_transfers."""
        return self.solution.node_transfers(frequencies, node, B)

    def node_response(self, net: str, column) -> np.ndarray:
        """AC voltage at ``net`` over the grid per unit of the excitation ``column``:
        ("source", i) for source i's EMF or current, ("output",) for 1 A into the output
        net."""
        return self.solution.node_response(net, column)

    def node_response_at(self, net: str, column, frequencies: np.ndarray) -> np.ndarray:
        """AC voltage at ``net`` per unit of ``column`` at any ``frequencies`` (F,)."""
        X = self.solution.solve_excitations(np.asarray(frequencies, dtype=float), [column])
        return pick(X, self.solution.circuit.node(net), 0)

    def band_peak(self, net: str, column, band: np.ndarray, weight=None
                  ) -> tuple[float, complex]:
        """(frequency, value) where |V(net)| per unit of ``column`` (times
        ``weight(f)``) is largest over the grid points ``band``, pinned down between
        grid points (grid.band_peak)."""
        freqs, values, at = band_peak(
            self.frequencies_hz, self.node_response(net, column), band,
            lambda f: self.node_response_at(net, column, f), weight)
        return float(freqs[at]), complex(values[at])

    def dc_transfer(self, net: str, column) -> float:
        """DC voltage at ``net`` per unit of the excitation named by ``column``."""
        return self.solution.dc_transfer(net, column)

    # -- loops -------------------------------------------------------------------------
    @cached_property
    def loops(self) -> dict[str, LoopFigures]:
        """Loop gain, noise gain and margins of every op-amp, by designator."""
        return loop_figures.stage_loops(self.solution)

    def margins_of(self, ref: str) -> Margins:
        """Op-amp ``ref``'s margins alone: its loop column solved over the grid and at the
        crossover, nothing else; for fix searches that read one margin from a copy."""
        if "loops" in self.__dict__:
            return self.loops[ref].margins
        return loop_figures.margins_from(self.solution, ref,
                                         loop_figures.loop_at(self.solution, ref))

    def margins_from(self, ref: str, loop_at) -> Margins:
        """Margins of op-amp ``ref`` from ``loop_at(frequencies) -> (T, beta)``."""
        return loop_figures.margins_from(self.solution, ref, loop_at)

    @property
    def worst_phase_margin(self) -> tuple[str, float] | None:
        """(op-amp, phase margin) of the op-amp with the smallest margin."""
        margins = [(ref, loop.phase_margin_deg) for ref, loop in self.loops.items()
                   if loop.phase_margin_deg is not None]
        return min(margins, key=lambda item: item[1]) if margins else None

    # -- sources -----------------------------------------------------------------------
    @cached_property
    def sources(self) -> list[SourceFigures]:
        """Per-source gain, input impedance and bandwidth (sources.py)."""
        return source_module.source_figures(self.solution)

    def gain_at(self, index: int, frequency_hz: float) -> complex:
        """Source ``index``'s signal gain at one frequency, from a one-column solve."""
        gain = source_module.gain_function(self.solution, index)
        return complex(gain(np.array([float(frequency_hz)]))[0])

    def signal_response(self, weights, frequencies: np.ndarray) -> np.ndarray:
        return source_module.signal_response(self.solution, weights, frequencies)

    @cached_property
    def output_impedance(self) -> np.ndarray:
        return source_module.output_impedance(self.solution)

    # -- the inverting inputs ------------------------------------------------------------
    @cached_property
    def inverting_input(self) -> dict[str, tuple[float, float, float | None]]:
        """Per op-amp: (resistance at in-, capacitance at in-, feedback pole Hz)."""
        return network.inverting_inputs(self.solution)

    def resistance_at(self, ref: str, net: str) -> float:
        return network.resistance_at(self.solution, ref, net)

    # -- DC extremes ---------------------------------------------------------------------
    def unranged_sources(self, *nets: str) -> list[str]:
        return ranges.unranged_sources(self.solution, nets)

    def node_range(self, net: str) -> NodeRange:
        """Extremes of ``net`` (ranges.node_range), once per net: several rules and the
        verdicts read the same outputs and inputs."""
        return self.cached(("node_range", net), lambda: ranges.node_range(self.solution, net))

    def difference_range(self, net_a: str, net_b: str) -> NodeRange:
        return self.cached(("difference_range", net_a, net_b),
                           lambda: ranges.difference_range(self.solution, net_a, net_b))

    def input_window(self, net: str, index: int) -> tuple[float, float] | None:
        return ranges.input_window(self.solution, net, index)

    @cached_property
    def output_range(self) -> NodeRange:
        """DC extremes of the stage output net."""
        return self.node_range(self.stage.output_net)

    @cached_property
    def output_currents(self) -> dict[str, OutputCurrent]:
        return ranges.output_currents(self.solution)

    def output_current_transfer(self, ref: str, column) -> tuple[float, np.ndarray]:
        """The current op-amp ``ref``'s output pin delivers per unit of the excitation
        ``column``: (at DC, over the grid (F,) complex)."""
        circuit = self.solution.circuit
        branch = circuit.gain_branch[ref]
        return (-self.solution.dc_unknown(circuit.row_of_branch(branch), column),
                -self.solution.branch_response(branch, column))

    def output_current_at(self, ref: str, column, frequencies: np.ndarray) -> np.ndarray:
        """output_current_transfer's AC part at any ``frequencies`` (F,)."""
        circuit = self.solution.circuit
        X = self.solution.solve_excitations(np.asarray(frequencies, dtype=float), [column])
        return -X[:, circuit.row_of_branch(circuit.gain_branch[ref]), 0]

    @cached_property
    def output_loads(self) -> dict[str, float | None]:
        """The resistance each op-amp's output drives as the signal moves it."""
        return ranges.output_loads(self.solution)
