"""One stage's solved equations: the circuit, the AC solve over the grid and the DC
solve, each right-hand side a named excitation, and the solves the what-if figures
(checker/analysis/updates.py) build on.

An excitation is named by a typed pair (kind, key): ``source`` i (its EMF or current,
unit), ``output`` (1 A into the output net), ``loop`` ref (a unit at op-amp ref's gain
block: its return ratio), and at DC also ``supply`` net (1 V), ``vos`` ref (the op-amp's
offset voltage, 1 V at its input), ``ib+`` / ``ib-`` ref (1 A drawn out of an input).
Plain tuples of the same two items name the same excitation.

Shapes: unknowns x (n,) are node voltages (ground excluded) then branch currents; the
grid solution is X (F, n, m) for F frequencies and m excitations; the DC solution X
(n, m'). The AC system drops the supply rails (exact: mna.without_rails); rail voltages
read 0 and supply currents are not solved there.
"""

from __future__ import annotations

from functools import cached_property
from typing import NamedTuple

import numpy as np

from checker.analysis.circuit import Circuit, build_circuit
from checker.analysis.grid import frequency_grid, pick
from checker.analysis.mna import (Matrices, SingularCircuit, assemble, inductor_loops, solve,
                                  source_loops, with_winding_resistance,
                                  system_stack, unreferenced_at_dc_and_ac, with_ties,
                                  without_rails)
from checker.analysis.results import AnalysisOptions, AnalysisProblem
from checker.model import Stage


class Excitation(NamedTuple):
    """A right-hand side of the solves, by kind and key (see the module docstring)."""

    kind: str
    key: object = None

    @classmethod
    def source(cls, index: int) -> Excitation:
        return cls("source", index)

    @classmethod
    def loop(cls, ref: str) -> Excitation:
        return cls("loop", ref)


OUTPUT = Excitation("output")


def _named(name) -> Excitation:
    return name if isinstance(name, Excitation) else Excitation(*name)


class Solution:
    """The solves of one stage, each computed on first use."""

    def __init__(self, stage: Stage, options: AnalysisOptions):
        self.stage = stage
        self.options = options
        self._unreferenced_cache: dict[bool, tuple[int, ...]] = {}
        self._frequency_cache: dict[tuple, dict] = {}
        self._excitation_cache: dict[tuple, np.ndarray] = {}

    # -- structure -------------------------------------------------------------------
    @cached_property
    def circuit(self) -> Circuit:
        return build_circuit(self.stage, self.options.stray_capacitance_f)

    @cached_property
    def problems(self) -> list[AnalysisProblem]:
        """Structural problems: loops of voltage sources, outputs on supplies, nets with
        no path to ground at DC (the solve then ties them with a tiny conductance)."""
        circuit = self.circuit
        problems = []
        loops = source_loops(circuit)
        if loops:
            problems.append(AnalysisProblem(
                "a loop of voltage sources and inductors (" + ", ".join(loops) +
                ") fixes one net at two voltages; the equations are singular",
                elements=tuple(loops)))
        rails = self.stage.rail_voltages
        for opamp in self.stage.opamps:
            if opamp.out in rails:
                problems.append(AnalysisProblem(
                    f"{opamp.ref}'s output is tied to the rail {opamp.out}: the op-amp fights"
                    " the supply, and its output current is limited only by the part",
                    nets=(opamp.out,), elements=(opamp.ref,), fatal=False,
                    kind="output-on-rail"))
        floating = sorted(self.floating_nets, key=circuit.node)
        if floating:
            problems.append(AnalysisProblem(
                "no DC path to ground from net " + ", ".join(floating) +
                " (only capacitors or op-amp inputs touch it)", nets=tuple(floating),
                fatal=False, kind="floating"))
        return problems

    @cached_property
    def floating_nets(self) -> frozenset[str]:
        """Nets with no DC path to ground (only capacitors or op-amp inputs touch them)."""
        return frozenset(self.circuit.node_names[n] for n in self.unreferenced(at_dc=True))

    def unreferenced(self, at_dc: bool) -> tuple[int, ...]:
        """Nodes with no path to ground (at DC, or with capacitors counted too)."""
        if at_dc not in self._unreferenced_cache:
            dc, ac = unreferenced_at_dc_and_ac(self.circuit)
            self._unreferenced_cache.update({True: tuple(dc), False: tuple(ac)})
        return self._unreferenced_cache[at_dc]

    @cached_property
    def solvable(self) -> bool:
        """No fatal structural problem (fixed once the circuit is built)."""
        return not any(p.fatal for p in self.problems)

    def require_solvable(self) -> None:
        if not self.solvable:
            raise SingularCircuit(self.problems[0].message)

    # -- the grid and the op-amps' gains ------------------------------------------------
    @cached_property
    def frequencies_hz(self) -> np.ndarray:
        """The analysis grid, (F,) Hz (grid.frequency_grid)."""
        return frequency_grid(self.stage, self.options.points)

    def open_loop_gains(self, frequencies: np.ndarray) -> np.ndarray:
        """A_k(j 2 pi f) of every op-amp: (F, K) complex, read-only (computed once per
        frequency array)."""
        frequencies = np.asarray(frequencies, dtype=float)
        entry = self._at(frequencies)
        gains = entry.get("gains")
        if gains is None:
            gains = entry["gains"] = self._gains_of(frequencies)
            gains.flags.writeable = False
        return gains

    def _gains_of(self, frequencies: np.ndarray) -> np.ndarray:
        s = 2j * np.pi * frequencies
        blocks = self.circuit.gain_blocks
        if len(blocks) == 1:
            return blocks[0].gain(s)[:, None]
        return np.stack([block.gain(s) for block in blocks], axis=1) if blocks else \
            np.zeros((s.size, 0), dtype=complex)

    # -- excitations -------------------------------------------------------------------
    def excitation_vector(self, name) -> np.ndarray:
        """The right-hand side (n,) of one excitation (AC or DC)."""
        vector = np.zeros(self.circuit.size)
        entry = self._excitation_entry(name)
        if entry is not None:
            vector[entry[0]] = entry[1]
        return vector

    def _excitation_entry(self, name) -> tuple[int, float] | None:
        """The one non-zero (row, value) of an excitation's right-hand side (None: all
        zero, as the output's when the output is ground)."""
        circuit = self.circuit
        name = _named(name)
        kind, key = name
        if kind == "source":
            if key in circuit.source_branch:
                return circuit.row_of_branch(circuit.source_branch[key]), 1.0
            return circuit.row_of_node(circuit.source_node[key]), 1.0
        if kind == "output":
            out = circuit.node(self.stage.output_net)
            return (circuit.row_of_node(out), 1.0) if out else None
        if kind in ("loop", "vos"):
            block = next(b for b in circuit.gain_blocks if b.ref == key)
            row = circuit.row_of_branch(circuit.gain_branch[key])
            return row, block.open_loop_gain if kind == "vos" else 1.0
        if kind in ("ib+", "ib-"):
            block = next(b for b in circuit.gain_blocks if b.ref == key)
            node = block.in_pos if kind == "ib+" else block.in_neg
            return (node - 1, -1.0) if node else None
        if kind == "supply":
            return circuit.row_of_branch(circuit.supply_branch[key]), 1.0
        raise ValueError(f"{name!r} is not an excitation")

    def _excitation_matrix(self, names: tuple) -> np.ndarray:
        B = np.zeros((self.circuit.size, len(names)))
        for column, name in enumerate(names):
            entry = self._excitation_entry(name)
            if entry is not None:
                B[entry[0], column] = entry[1]
        return B

    def excitations(self, names) -> np.ndarray:
        """Right-hand sides (n, m) of ``names``, read-only (built once per list)."""
        names = tuple(names)
        try:
            B = self._excitation_cache.get(names)
        except TypeError:  # a name that is no hashable pair: built each time
            return self._excitation_matrix(names)
        if B is None:
            B = self._excitation_matrix(names)
            B.flags.writeable = False
            self._excitation_cache[names] = B
        return B

    @cached_property
    def grid_excitations(self) -> tuple[Excitation, ...]:
        """The excitations of the grid solve, in column order."""
        names = [Excitation.source(i) for i in range(len(self.stage.sources))]
        names.append(OUTPUT)
        names.extend(Excitation.loop(block.ref) for block in self.circuit.gain_blocks)
        return tuple(names)

    @cached_property
    def _grid_index(self) -> dict[Excitation, int]:
        return {name: k for k, name in enumerate(self.grid_excitations)}

    def column(self, name) -> int:
        """The column of excitation ``name`` in the grid solution."""
        try:
            return self._grid_index[_named(name)]
        except (KeyError, TypeError):
            raise ValueError(f"{name!r} is not a column of the grid solve") from None

    # -- AC solves ---------------------------------------------------------------------
    @cached_property
    def _untied_matrices(self) -> Matrices:
        """G, C and the gain-block pattern with no net tied: the AC and DC systems differ
        only in the nets they tie (mna.with_ties)."""
        return assemble(self.circuit)

    @cached_property
    def ac_matrices(self) -> Matrices:
        """G, C and the gain-block pattern of the AC system (floating nets tied)."""
        return with_ties(self._untied_matrices, self.unreferenced(at_dc=False))

    @cached_property
    def reduced(self) -> tuple[Matrices, np.ndarray, np.ndarray]:
        """The AC system without the supply rails (see mna.without_rails): (matrices,
        kept unknowns, dropped unknowns)."""
        return without_rails(self.ac_matrices, self.circuit)

    @cached_property
    def _supply_branch_rows(self) -> list[int]:
        circuit = self.circuit
        return [circuit.row_of_branch(branch) for branch in circuit.supply_branch.values()]

    def _at(self, frequencies: np.ndarray) -> dict:
        """The cache of one frequency array (keyed by its bytes): its open-loop gains,
        its system stacks (whole and without the rails) and the columns solved there."""
        key = (frequencies.shape, frequencies.tobytes())
        entry = self._frequency_cache.get(key)
        if entry is None:
            entry = self._frequency_cache[key] = {"columns": {}}
        return entry

    def _stack(self, frequencies: np.ndarray, entry: dict, whole: bool) -> np.ndarray:
        """Y (F, n, n) at ``frequencies``, the whole system or the one without the
        rails, assembled once per frequency array."""
        kind = "whole" if whole else "reduced"
        if kind not in entry:
            matrices = self.ac_matrices if whole else self.reduced[0]
            entry[kind] = system_stack(matrices, self.open_loop_gains(frequencies),
                                       2j * np.pi * frequencies)
        return entry[kind]

    def _solve_new(self, frequencies: np.ndarray, entry: dict, B: np.ndarray) -> np.ndarray:
        """X (F, n, m) for right-hand sides B, (n, m) or (F, n, m), not cached."""
        _matrices, keep, dropped = self.reduced
        n = self.circuit.size
        if not dropped.size or B[..., dropped, :].any():
            # nothing to drop, or an excitation on a rail: solve the whole system
            # B (n, m) as a stack of one, broadcast over the frequencies by the solve
            Y = self._stack(frequencies, entry, whole=True)
            return solve(Y, B[None] if B.ndim == 2 else B)
        B = B[..., keep, :]
        if B.ndim == 2:
            B = B[None]
        X = np.zeros((frequencies.size, n, B.shape[-1]), dtype=complex)
        X[:, keep, :] = solve(self._stack(frequencies, entry, whole=False), B)
        return X

    def solve(self, frequencies: np.ndarray, B: np.ndarray) -> np.ndarray:
        """Solve the AC system at ``frequencies`` (F,) for right-hand sides ``B``, either
        (n, m) for every frequency or (F, n, m); returns X (F, n, m), read-only when B
        is (n, m) and all of it was solved here (it is the cache's own array).

        The system of each frequency array is assembled once, and a column B (n,)
        solved before at the same frequencies is read back, not solved again (fix
        searches and refinements ask for the same columns many times)."""
        self.require_solvable()
        frequencies = np.asarray(frequencies, dtype=float)
        entry = self._at(frequencies)
        if B.ndim != 2:
            return self._solve_new(frequencies, entry, B)
        columns = entry["columns"]
        kind = B.dtype.str
        keys = [(kind, B[:, j].tobytes()) for j in range(B.shape[1])]
        new = [j for j, key in enumerate(keys) if key not in columns]
        if len(new) == len(keys) and len(set(keys)) == len(keys):  # all new: one solve
            X = self._solve_new(frequencies, entry, B)
            X.flags.writeable = False  # shared with the cache: read-only, never copied
            for k, key in enumerate(keys):
                columns[key] = X[:, :, k]
            return X
        if new:
            unique = list(dict.fromkeys(keys[j] for j in new))
            first = [keys.index(key) for key in unique]
            X_new = self._solve_new(frequencies, entry, B[:, first])
            for k, key in enumerate(unique):
                columns[key] = X_new[:, :, k]
        return np.stack([columns[key] for key in keys], axis=2)

    def node_transfers(self, frequencies: np.ndarray, node: int, B: np.ndarray
                       ) -> np.ndarray:
        """The voltage of node ``node`` (not ground) for each right-hand side of B
        (n, m) at ``frequencies`` (F,): (F, m), from one solve of the transposed system
        whatever m: e_node^T Y^-1 B = (Y^-T e_node)^T B, the adjoint network (S. W.
        Director and R. A. Rohrer, "The generalized adjoint network and network
        sensitivities", IEEE Trans. Circuit Theory, 1969). A current into a rail moves
        no other voltage (the rail is held by its ideal source), so B's rows of the
        rail nodes drop out with the rails; only a right-hand side on a supply's branch
        row, or a rail as ``node``, needs the whole system."""
        self.require_solvable()
        frequencies = np.asarray(frequencies, dtype=float)
        entry = self._at(frequencies)
        _matrices, keep, dropped = self.reduced
        e = np.zeros((self.circuit.size, 1))
        e[node - 1, 0] = 1.0
        branches = self._supply_branch_rows
        whole = not dropped.size or bool(B[branches].any()) or node - 1 in dropped
        if not whole:
            B, e = B[keep], e[keep]
        Y = self._stack(frequencies, entry, whole)
        z = solve(np.swapaxes(Y, 1, 2), e[None])
        return z[:, :, 0] @ B

    def solve_excitations(self, frequencies: np.ndarray, names) -> np.ndarray:
        """X (F, n, len(names)) for the named excitations at ``frequencies``."""
        return self.solve(frequencies, self.excitations(names))

    @cached_property
    def grid(self) -> np.ndarray:
        """X (F, n, m) over the grid for every grid excitation."""
        return self.solve(self.frequencies_hz, self.excitations(self.grid_excitations))

    @property
    def grid_solved(self) -> bool:
        """True once the grid solve has been paid for (what-if figures may reuse it)."""
        return "grid" in self.__dict__

    def net_response(self, X: np.ndarray, net: str, column: int) -> np.ndarray:
        """V(net) in column ``column`` of a solution X (F, n, m): (F,)."""
        return pick(X, self.circuit.node(net), column)

    def node_response(self, net: str, name) -> np.ndarray:
        """AC voltage at ``net`` over the grid per unit of excitation ``name``."""
        return self.net_response(self.grid, net, self.column(name))

    def branch_response(self, branch: int, name) -> np.ndarray:
        """The current of branch ``branch`` over the grid per unit of ``name`` (F,)."""
        return self.grid[:, self.circuit.row_of_branch(branch), self.column(name)]

    def unit_currents(self, pairs: list[tuple[int, int]]) -> np.ndarray:
        """Right-hand sides (n, k): 1 A into node a and out of node b for each pair (the
        vectors u = e_a - e_b of a two-terminal element's stamp)."""
        U = np.zeros((self.circuit.size, len(pairs)))
        for j, (a, b) in enumerate(pairs):
            if a:
                U[a - 1, j] += 1.0
            if b:
                U[b - 1, j] -= 1.0
        return U

    # -- the DC solve ------------------------------------------------------------------
    @cached_property
    def dc_excitations(self) -> tuple[Excitation, ...]:
        circuit = self.circuit
        names = [Excitation("supply", net) for net in circuit.supply_branch]
        names.extend(Excitation.source(i) for i in range(len(self.stage.sources)))
        for block in circuit.gain_blocks:
            names.extend([Excitation("vos", block.ref), Excitation("ib+", block.ref),
                          Excitation("ib-", block.ref), Excitation.loop(block.ref)])
        return tuple(names)

    def dc_system(self) -> np.ndarray:
        """The DC system matrix Y(0), real (n, n) (floating nets tied)."""
        matrices = with_ties(self._untied_matrices, self.unreferenced(at_dc=True))
        matrices = with_winding_resistance(matrices, self.circuit,
                                           inductor_loops(self.circuit))
        gains = self.open_loop_gains(np.zeros(1)).real
        return system_stack(matrices, gains, np.zeros(1)).real[0]

    @cached_property
    def dc(self) -> np.ndarray:
        """X (n, m') at DC for every DC excitation, in dc_excitations order."""
        self.require_solvable()
        B = self.excitations(self.dc_excitations)
        return solve(self.dc_system()[None], B[None])[0]

    @cached_property
    def _dc_table(self):
        """The DC solution as Python floats, for the many single reads of dc_transfer."""
        index = {name: k for k, name in enumerate(self.dc_excitations)}
        return index, self.dc.tolist()

    def dc_column(self, name) -> int:
        return self._dc_table[0][_named(name)]

    def dc_transfer(self, net: str, name) -> float:
        """DC voltage at ``net`` per unit of excitation ``name``."""
        index, rows = self._dc_table
        node = self.circuit.node(net)
        if node == 0:
            return 0.0
        try:
            column = index[name]  # an Excitation, or a plain pair equal to one
        except (KeyError, TypeError):
            column = index[_named(name)]
        return rows[node - 1][column]

    def dc_unknown(self, row: int, name) -> float:
        """Unknown ``row`` (a node voltage or a branch current) at DC per unit of
        ``name``."""
        index, rows = self._dc_table
        return rows[row][index[_named(name)]]
