"""Figures of a stage, each computed on first use and cached.

``analyse(stage)`` returns a Figures object at once; nothing is solved until a rule
reads a figure. The AC figures share one batched solve over the frequency grid with
every excitation as a right-hand-side column; the DC figures share one DC solve.
All values are SI floats (or complex arrays over ``frequencies_hz``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import cached_property

import numpy as np

from checker.analysis.circuit import Circuit, build_circuit
from checker.analysis.loop import (Margins, crossing_index, interpolate_log, return_ratio,
                                   unwrapped_phase_deg)
from checker.analysis.mna import (SingularCircuit, assemble, solve, source_loops,
                                  system_stack, unreferenced_nodes, without_rails)
from checker.model import Source, Stage

REFINE_POINTS = 17  # points of the local grid that pins down each crossover


@dataclass(frozen=True)
class AnalysisOptions:
    """Knobs of the analysis; the engine fills them from configuration."""

    stray_capacitance_f: float = 0.0  # added at every inverting input
    # Log-spaced frequency points (band edges are added). Every crossing a figure is
    # read at (loop crossover, phase crossover, -3 dB edges) is pinned down by a local
    # solve, so the grid only has to bracket them: on the benchmark stages 80 points
    # agree with 600 within 0.1 % for every reported figure.
    points: int = 80


@dataclass(frozen=True)
class AnalysisProblem:
    """A structural reason the stage cannot be solved as drawn, naming nets or elements."""

    message: str
    nets: tuple[str, ...] = ()
    elements: tuple[str, ...] = ()
    fatal: bool = True
    kind: str = "singular"  # "singular" | "output-on-rail" | "floating"


@dataclass(frozen=True)
class LoopFigures:
    """One op-amp's loop, from its return ratio T(f)."""

    ref: str
    loop_gain: np.ndarray  # T over frequencies_hz, complex
    loop_gain_dc: float  # T at 0 Hz (real)
    noise_gain: np.ndarray  # 1/beta over frequencies_hz, complex
    noise_gain_dc: float | None  # None where beta is 0 at DC
    margins: Margins

    @property
    def crossover_hz(self) -> float | None:
        return self.margins.crossover_hz

    @property
    def phase_margin_deg(self) -> float | None:
        return self.margins.phase_margin_deg

    @property
    def feedback(self) -> str:
        """'negative', 'positive' or 'none': the sign of the loop at DC.

        A loop whose DC gain is below 1 but that closes at higher frequencies (an
        integrator with no DC path) reads 'none' at DC; see ``closes_in_band``.
        """
        if self.loop_gain_dc >= 1.0:
            return "negative"
        if self.loop_gain_dc < -1e-9:
            return "positive"
        return "none"

    @property
    def closes_anywhere(self) -> bool:
        """True when negative feedback (Re T > 1) exists at some frequency."""
        return bool(np.any(self.loop_gain.real > 1.0))

    @property
    def negative_somewhere(self) -> bool:
        """Negative feedback at DC, or (an integrator's loop, open at DC) above it: the
        op-amp works closed-loop, so closed-loop figures mean something."""
        return self.feedback == "negative" or (self.feedback == "none" and self.closes_anywhere)

    @property
    def regenerative_at_dc(self) -> bool:
        """Positive feedback of loop gain 1 or more at DC: the output runs to a rail and
        stays there (T <= -1; T is the negated return, so negative T is positive
        feedback)."""
        return self.loop_gain_dc <= -1.0


@dataclass(frozen=True)
class SourceFigures:
    """What one signal source sees and what it gets at the stage output."""

    index: int
    source: Source
    gain: np.ndarray  # from the net: V(out)/V(net) (V/V), or V(out)/I (ohms), over the grid
    gain_from_source: np.ndarray  # the signal's gain: V(out)/EMF, or V(out)/I
    input_impedance: np.ndarray  # looking into the stage from the source's net
    reference_hz: float  # where the single-number figures are read: band centre, or 0 (DC)
    gain_mid: complex  # from the net, at reference_hz
    gain_from_source_mid: complex  # the signal's gain at reference_hz
    input_impedance_mid: complex
    input_resistance_min: float  # smallest |Zin| over the band (DC for a DC source)
    bandwidth_low_hz: float | None  # -3 dB edges of the signal's gain
    bandwidth_high_hz: float | None

    @property
    def loss_db(self) -> float:
        """Loss in dB that loading costs between the source's EMF and the stage output:
        20 log10(|gain from net| / |gain from EMF|) at mid-band; 0 for an ideal source
        (the voltage divider Zin / (Zs + Zin); common practice)."""
        if self.gain_mid == 0 or self.gain_from_source_mid == 0:
            return 0.0
        return float(20 * np.log10(abs(self.gain_mid) / abs(self.gain_from_source_mid)))


@dataclass(frozen=True)
class NodeRange:
    """A net's DC voltage over the sources' ranges, with offset and bias errors."""

    net: str
    nominal_low: float  # over the sources' ranges, no errors
    nominal_high: float
    error: float  # worst-case |error| from offset voltage and bias currents
    clip_low: float | None = None  # op-amp outputs: the rails less the part's headroom
    clip_high: float | None = None

    @property
    def low(self) -> float:
        return self.nominal_low - self.error

    @property
    def high(self) -> float:
        return self.nominal_high + self.error

    @property
    def clipped_low(self) -> float:
        """The lowest value the net reaches with its clip limits applied (a range wholly
        beyond one limit sits at that limit)."""
        return self._clip(self.low)

    @property
    def clipped_high(self) -> float:
        return self._clip(self.high)

    def _clip(self, value: float) -> float:
        if self.clip_low is not None:
            value = max(value, self.clip_low)
        if self.clip_high is not None:
            value = min(value, self.clip_high)
        return value


@dataclass(frozen=True)
class OutputCurrent:
    """An op-amp's output current over the sources' ranges (positive: sourced)."""

    ref: str
    most_sourced_a: float
    most_sunk_a: float  # positive number: the largest current pulled into the output

    @property
    def peak_a(self) -> float:
        return max(self.most_sourced_a, self.most_sunk_a)


@dataclass
class _Columns:
    """Names of the right-hand-side columns of one batched solve."""

    names: list[tuple] = field(default_factory=list)
    _index: dict[tuple, int] = field(default_factory=dict)

    def add(self, name: tuple) -> int:
        self._index[name] = len(self.names)
        self.names.append(name)
        return len(self.names) - 1

    def index(self, name: tuple) -> int:
        try:
            return self._index[name]
        except KeyError:
            raise ValueError(f"{name!r} is not a column") from None


def analyse(stage: Stage, options: AnalysisOptions | None = None) -> "Figures":
    """Lazily computed figures of ``stage``."""
    return Figures(stage, options or AnalysisOptions())


class Figures:
    """Every number the rules read, computed on demand and cached."""

    def __init__(self, stage: Stage, options: AnalysisOptions):
        self.stage = stage
        self.options = options
        self._memo: dict = {}

    def cached(self, key, compute):
        """``compute()`` once per ``key`` for this stage: figures that several readers
        (a requirement's verdict and the rule that explains it) ask for alike."""
        if key not in self._memo:
            self._memo[key] = compute()
        return self._memo[key]

    # -- structure -----------------------------------------------------------------
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
        floating = [circuit.node_names[n] for n in self._unreferenced(True)]
        if floating:
            problems.append(AnalysisProblem(
                "no DC path to ground from net " + ", ".join(floating) +
                " (only capacitors or op-amp inputs touch it)", nets=tuple(floating),
                fatal=False, kind="floating"))
        return problems

    @cached_property
    def floating_nets(self) -> frozenset[str]:
        """Nets with no DC path to ground (only capacitors or op-amp inputs touch them):
        DC figures of anything that depends on them are not meaningful."""
        circuit = self.circuit
        return frozenset(circuit.node_names[n] for n in self._unreferenced(True))

    def _unreferenced(self, at_dc: bool) -> tuple[int, ...]:
        """Nodes with no path to ground (at DC, or with capacitors too), computed once."""
        cache = self.__dict__.setdefault("_unreferenced_cache", {})
        if at_dc not in cache:
            cache[at_dc] = tuple(unreferenced_nodes(self.circuit, at_dc=at_dc))
        return cache[at_dc]

    @property
    def solvable(self) -> bool:
        return not any(p.fatal for p in self.problems)

    def _matrices(self, at_dc: bool):
        tie = self._unreferenced(at_dc)
        return assemble(self.circuit, tie)

    # -- frequency grid ------------------------------------------------------------
    @cached_property
    def frequencies_hz(self) -> np.ndarray:
        """Log grid from well below the band to well above every op-amp's GBW, plus
        each source's band edges and centre. Shape (F,)."""
        high = 1e6
        low = 1e-2
        for opamp in self.stage.opamps:
            for value in (opamp.part.gbw_hz, opamp.part.second_pole_hz):
                if value:
                    high = max(high, 30 * value)
        extra = []
        for source in self.stage.sources:
            extra.extend(f for f in (source.band_low_hz, source.band_high_hz,
                                     _band_centre(source)) if f and f > 0)
            if source.band_low_hz:
                low = min(low, source.band_low_hz / 100)
            if source.band_high_hz:
                high = max(high, source.band_high_hz * 1000)
        grid = np.logspace(math.log10(low), math.log10(high), self.options.points)
        values = np.sort(np.concatenate([grid, extra]))
        # sorted and without repeats, as np.unique (which would import numpy.ma)
        return values[np.concatenate([[True], values[1:] != values[:-1]])]

    def open_loop_gains(self, frequencies: np.ndarray) -> np.ndarray:
        """A_k(j 2 pi f) of every op-amp: (F, K) complex."""
        s = 2j * np.pi * frequencies
        blocks = self.circuit.gain_blocks
        if len(blocks) == 1:
            return blocks[0].gain(s)[:, None]
        return np.stack([block.gain(s) for block in blocks], axis=1) if blocks else \
            np.zeros((frequencies.size, 0), dtype=complex)

    # -- AC solve --------------------------------------------------------------------
    @cached_property
    def _ac_columns(self) -> tuple[_Columns, np.ndarray]:
        circuit = self.circuit
        columns = _Columns()
        B = []
        n = circuit.size

        def column(entries: dict[int, float]) -> None:
            vector = np.zeros(n)
            for row, value in entries.items():
                vector[row] += value
            B.append(vector)

        for i, source in enumerate(self.stage.sources):
            columns.add(("source", i))
            if i in circuit.source_branch:
                column({circuit.row_of_branch(circuit.source_branch[i]): 1.0})
            else:
                column({circuit.row_of_node(circuit.source_node[i]): 1.0})
        out = circuit.node(self.stage.output_net)
        columns.add(("output",))
        column({circuit.row_of_node(out): 1.0} if out else {})
        for block in circuit.gain_blocks:
            columns.add(("loop", block.ref))
            column({circuit.row_of_branch(circuit.gain_branch[block.ref]): 1.0})
        return columns, np.stack(B, axis=1)

    def _solve_ac(self, frequencies: np.ndarray, only: list[tuple] | None = None) -> np.ndarray:
        """X (F, n, m) for the given frequencies and columns (all by default)."""
        columns, B = self._ac_columns
        if only is not None:
            B = B[:, [columns.index(name) for name in only]]
        return self.solve_columns(frequencies, B)

    @cached_property
    def ac_matrices(self):
        """G, C and the gain-block pattern of the AC system (floating nets tied)."""
        return self._matrices(at_dc=False)

    @cached_property
    def _ac_reduced(self):
        """The AC system without the supply rails (see mna.without_rails): (matrices,
        kept unknowns, dropped unknowns)."""
        return without_rails(self.ac_matrices, self.circuit)

    def solve_columns(self, frequencies: np.ndarray, B: np.ndarray) -> np.ndarray:
        """Solve the AC system at ``frequencies`` (F,) for right-hand sides ``B``, either
        (n, m) for every frequency or (F, n, m); returns X (F, n, m). Rail voltages
        come back 0 and supply currents are not solved (read as 0)."""
        if not self.solvable:
            raise SingularCircuit(self.problems[0].message)
        s = 2j * np.pi * frequencies
        gains = self.open_loop_gains(frequencies)
        matrices, keep, dropped = self._ac_reduced
        n = self.circuit.size
        if not dropped.size or B[..., dropped, :].any():
            # nothing to drop, or an excitation on a rail: solve the whole system
            Y = system_stack(self.ac_matrices, gains, s)
            if B.ndim == 2:
                B = np.broadcast_to(B, (frequencies.size,) + B.shape)
            return solve(Y, B)
        Y = system_stack(matrices, gains, s)
        B = B[..., keep, :]
        if B.ndim == 2:
            B = np.broadcast_to(B, (frequencies.size,) + B.shape)
        X = np.zeros((frequencies.size, n, B.shape[-1]), dtype=complex)
        X[:, keep, :] = solve(Y, B)
        return X

    @cached_property
    def _ac(self) -> np.ndarray:
        return self._solve_ac(self.frequencies_hz)

    def node_response(self, net: str, column: tuple) -> np.ndarray:
        """AC voltage at ``net`` over frequencies_hz per unit of the excitation
        ``column``: ("source", i) for source i's EMF or current, ("output",) for 1 A
        into the output net."""
        return self._node_response(self._ac, net, column)

    def _node_response(self, X: np.ndarray, net: str, column: tuple) -> np.ndarray:
        node = self.circuit.node(net)
        if node == 0:
            return np.zeros(X.shape[0], dtype=complex)
        return X[:, node - 1, self._ac_columns[0].index(column)]

    # -- DC solve --------------------------------------------------------------------
    @cached_property
    def _dc(self) -> tuple[_Columns, np.ndarray]:
        """DC responses: X (n, m) for unit supplies, sources, offsets and bias currents."""
        if not self.solvable:
            raise SingularCircuit(self.problems[0].message)
        circuit = self.circuit
        columns = _Columns()
        n = circuit.size
        B = []

        def column(name: tuple, entries: dict[int, float]) -> None:
            columns.add(name)
            vector = np.zeros(n)
            for row, value in entries.items():
                vector[row] += value
            B.append(vector)

        for net, branch in circuit.supply_branch.items():
            column(("supply", net), {circuit.row_of_branch(branch): 1.0})
        for i in range(len(self.stage.sources)):
            if i in circuit.source_branch:
                column(("source", i), {circuit.row_of_branch(circuit.source_branch[i]): 1.0})
            else:
                column(("source", i), {circuit.row_of_node(circuit.source_node[i]): 1.0})
        for block in circuit.gain_blocks:
            row = circuit.row_of_branch(circuit.gain_branch[block.ref])
            column(("vos", block.ref), {row: block.open_loop_gain})
            column(("ib+", block.ref), {block.in_pos - 1: -1.0} if block.in_pos else {})
            column(("ib-", block.ref), {block.in_neg - 1: -1.0} if block.in_neg else {})
            column(("loop", block.ref), {row: 1.0})
        X = solve(self._dc_system()[None], np.stack(B, axis=1)[None])[0]
        return columns, X

    def _dc_system(self) -> np.ndarray:
        """The DC system matrix Y(0), real (n, n)."""
        matrices = self._matrices(at_dc=True)
        gains = self.open_loop_gains(np.zeros(1)).real
        return system_stack(matrices, gains, np.zeros(1)).real[0]

    def dc_transfer(self, net: str, column: tuple) -> float:
        """DC voltage at ``net`` per unit of the excitation named by ``column``."""
        index, rows = self._dc_table
        node = self.circuit.node(net)
        return 0.0 if node == 0 else rows[node - 1][index(column)]

    @cached_property
    def _dc_table(self):
        """The DC solution as Python floats, for the many single reads of dc_transfer."""
        columns, X = self._dc
        return columns.index, X.tolist()

    # -- loops -----------------------------------------------------------------------
    @cached_property
    def loops(self) -> dict[str, LoopFigures]:
        """Loop gain, noise gain and margins of every op-amp, by designator."""
        result = {}
        frequencies = self.frequencies_hz
        gains = self.open_loop_gains(frequencies)
        dc_columns, X_dc = self._dc
        for k, block in enumerate(self.circuit.gain_blocks):
            z = self._loop_z(self._ac, block, ("loop", block.ref))
            T, beta = return_ratio(gains[:, k], z)
            z_dc = -(_pick(X_dc[None], block.in_pos, dc_columns.index(("loop", block.ref)))
                     - _pick(X_dc[None], block.in_neg, dc_columns.index(("loop", block.ref))))
            T_dc, beta_dc = return_ratio(np.array([block.open_loop_gain]), z_dc.astype(complex))
            noise_gain = np.divide(1.0, beta, out=np.full_like(beta, np.inf), where=beta != 0)
            closes = block.pole1_hz and np.max(np.abs(T)) >= 1.0
            margins = self._margins(frequencies, T, block) if closes else \
                Margins(None, None, None, None)
            result[block.ref] = LoopFigures(
                ref=block.ref, loop_gain=T, loop_gain_dc=float(T_dc.real[0]),
                noise_gain=noise_gain,
                noise_gain_dc=float(1 / beta_dc.real[0]) if abs(beta_dc[0]) > 1e-15 else None,
                margins=margins)
        return result

    def margins_of(self, ref: str) -> Margins:
        """Op-amp ``ref``'s margins alone: its loop column solved over the grid and at the
        crossover, nothing else (no DC solve, no sources); for fix searches that try
        many copies of a stage and read one margin from each."""
        if "loops" in self.__dict__:
            return self.loops[ref].margins
        return self.margins_from(ref, self._loop_at(ref))

    def margins_from(self, ref: str, loop_at) -> Margins:
        """Margins of op-amp ``ref`` (as margins_of) from ``loop_at(frequencies) ->
        (T, beta)``, a loop other than the solved one (updates.py gives such loops)."""
        block = next(b for b in self.circuit.gain_blocks if b.ref == ref)
        frequencies = self.frequencies_hz
        T, _beta = loop_at(frequencies)
        if not block.pole1_hz or np.max(np.abs(T)) < 1.0:
            return Margins(None, None, None, None)
        return self._margins(frequencies, T, block, refine_gain_margin=False,
                             loop_at=loop_at)

    def _loop_at(self, ref: str):
        """loop_at(frequencies) -> (T, beta) of op-amp ``ref``: its loop column solved."""
        k, block = next((k, b) for k, b in enumerate(self.circuit.gain_blocks) if b.ref == ref)

        def loop_at(frequencies: np.ndarray):
            X = self._solve_ac(frequencies, only=[("loop", ref)])
            z = -(_pick(X, block.in_pos, 0) - _pick(X, block.in_neg, 0))
            return return_ratio(self.open_loop_gains(frequencies)[:, k], z)

        return loop_at

    def _loop_z(self, X: np.ndarray, block, column: tuple) -> np.ndarray:
        index = self._ac_columns[0].index(column)
        return -(_pick(X, block.in_pos, index) - _pick(X, block.in_neg, index))

    def _margins(self, frequencies: np.ndarray, T: np.ndarray, block,
                 refine_gain_margin: bool = True, loop_at=None) -> Margins:
        """Margins from T on the grid, each crossing pinned down by a local solve (one
        solve for both; the gain margin's only when ``refine_gain_margin``, since fix
        searches read the phase margin alone). ``loop_at(frequencies) -> (T, beta)``
        gives the loop on the local grid (default: this stage's loop column solved)."""
        magnitude = np.abs(T)
        phase = unwrapped_phase_deg(T)
        # The crossover is where |T| falls through 1; a loop open at DC (an integrator
        # with nothing across its capacitor) rises through 1 first, and its crossover is
        # the fall that follows.
        i = crossing_index(magnitude, 1.0)
        j = crossing_index(phase, -180.0)
        wanted = [index for index in (i, j if refine_gain_margin else None)
                  if index is not None]
        local = dict(zip(wanted, self._local_loops(frequencies, wanted, phase,
                                                   loop_at or self._loop_at(block.ref))))
        crossover = phase_margin = noise_gain = None
        if i is not None:
            crossover, phase_at, noise_gain = _refined_crossover(frequencies, phase, i,
                                                                 *local[i])
            phase_margin = 180.0 + phase_at
        gain_margin = phase_crossover = None
        if j is not None:
            phase_crossover, gain_margin = _gain_margin(frequencies, j, phase, magnitude)
            if j in local:
                freqs, T_local, local_phase, _noise = local[j]
                j_local = crossing_index(local_phase, -180.0)
                if j_local is not None:
                    phase_crossover, gain_margin = _gain_margin(freqs, j_local, local_phase,
                                                                np.abs(T_local))
        return Margins(crossover, phase_margin, gain_margin, phase_crossover, noise_gain)

    @staticmethod
    def _local_loops(frequencies, brackets: list[int], phase, loop_at) -> list:
        """The loop from ``loop_at`` on a fine local grid between grid points i and i + 1
        for each i in ``brackets``, all in one call: per bracket (frequencies, T,
        unwrapped phase continuing from the grid's, log10 |1/beta|)."""
        if not brackets:
            return []
        grids = [_local_grid(frequencies[i], frequencies[i + 1]) for i in brackets]
        T_all, beta_all = loop_at(np.concatenate(grids))
        result = []
        for n, (i, local) in enumerate(zip(brackets, grids)):
            part = slice(n * REFINE_POINTS, (n + 1) * REFINE_POINTS)
            T_local = T_all[part]
            local_phase = unwrapped_phase_deg(T_local)
            local_phase += 360.0 * np.round((phase[i] - local_phase[0]) / 360.0)
            beta_magnitude = np.maximum(np.abs(beta_all[part]), np.finfo(float).tiny)
            result.append((local, T_local, local_phase, -np.log10(beta_magnitude)))
        return result

    # -- sources: gain, input impedance, bandwidth -------------------------------------
    @cached_property
    def sources(self) -> list[SourceFigures]:
        """Per-source gain, input impedance and bandwidth at the stage output.

        The signal's gain is from the source itself (its EMF, or its current) to the
        output; the gain from the source's net is kept beside it for the loading
        figures. Single-number figures are read at the source's reference frequency:
        the band's geometric centre, or 0 Hz (the DC solve) for a source with no band
        or a band from 0 Hz (docs/format.md, "source"). The input resistance is the
        smallest |Zin| over the band, DC included when the band reaches it; a source
        with no band is a DC signal and sees the DC input resistance."""
        X = self._ac
        frequencies = self.frequencies_hz
        s = 2j * np.pi * frequencies
        circuit = self.circuit
        result = []
        for i, source in enumerate(self.stage.sources):
            column = ("source", i)
            v_out = self._node_response(X, self.stage.output_net, column)
            v_net = self._node_response(X, source.net, column)
            if source.kind == "voltage":
                branch_row = circuit.row_of_branch(circuit.source_branch[i])
                current = -X[:, branch_row, self._ac_columns[0].index(column)]
                z_in = _safe_divide(v_net, current)
                gain = _safe_divide(v_out, v_net)
            else:
                shunt = np.zeros_like(s)
                if source.impedance_ohm:
                    shunt = shunt + 1 / source.impedance_ohm
                if source.capacitance_f:
                    shunt = shunt + s * source.capacitance_f
                z_in = _safe_divide(1.0, _safe_divide(1.0, v_net) - shunt)
                gain = v_out
            gain_from_source = v_out
            reference = reference_frequency(source)
            if reference > 0:
                at = int(np.argmin(np.abs(frequencies - reference)))
                reference = float(frequencies[at])
                mids = (complex(gain[at]), complex(gain_from_source[at]), complex(z_in[at]))
            else:
                at = 0
                mids = self._dc_source_figures(i)
            band = _band_mask(frequencies, source) if source.band_high_hz else None
            smallest = abs(mids[2])
            if band is not None:
                smallest = min(float(np.min(np.abs(z_in[band]))),
                               smallest if reference == 0 else math.inf)
            low, high = bandwidth_edges(frequencies, gain_from_source, at, self._gain_function(i))
            result.append(SourceFigures(
                index=i, source=source, gain=gain, gain_from_source=gain_from_source,
                input_impedance=z_in, reference_hz=reference,
                gain_mid=mids[0], gain_from_source_mid=mids[1], input_impedance_mid=mids[2],
                input_resistance_min=smallest, bandwidth_low_hz=low, bandwidth_high_hz=high))
        return result

    def _dc_source_figures(self, i: int) -> tuple[complex, complex, complex]:
        """(gain from the net, gain from the source, input impedance) of source i at 0 Hz,
        from the DC solve."""
        source = self.stage.sources[i]
        columns, X = self._dc
        column = columns.index(("source", i))
        circuit = self.circuit
        out = self.dc_transfer(self.stage.output_net, ("source", i))
        net = self.dc_transfer(source.net, ("source", i))
        if source.kind == "voltage":
            current = -float(X[circuit.row_of_branch(circuit.source_branch[i]), column])
            z_in = net / current if current else math.inf
            gain = out / net if net else (math.inf if out else 0.0)
        else:
            shunt = 1 / source.impedance_ohm if source.impedance_ohm else 0.0
            conductance = (1 / net if net else math.inf) - shunt
            z_in = 1 / conductance if conductance else math.inf
            gain = out
        return complex(gain), complex(out), complex(z_in)

    def gain_at(self, index: int, frequency_hz: float) -> complex:
        """Source ``index``'s signal gain (as in SourceFigures.gain_from_source) at one frequency, from a
        one-column solve: cheap enough for searches over many copies of a stage."""
        return complex(self._gain_function(index)(np.array([float(frequency_hz)]))[0])

    def signal_response(self, weights, frequencies: np.ndarray) -> np.ndarray:
        """The output per unit of a weighted sum of sources, ``weights`` = ((index,
        weight), ...), at any ``frequencies`` (F,) from one solve of their columns; 0 Hz
        entries come from the DC solve. (F,) complex."""
        frequencies = np.asarray(frequencies, dtype=float)
        result = np.zeros(frequencies.shape, dtype=complex)
        dc = frequencies <= 0
        for index, weight in weights:
            if dc.any():
                result[dc] += weight * self.dc_transfer(self.stage.output_net,
                                                        ("source", index))
        if (~dc).any():
            names = [("source", index) for index, _weight in weights]
            X = self._solve_ac(frequencies[~dc], only=names)
            out = self.circuit.node(self.stage.output_net)
            result[~dc] += sum(weight * _pick(X, out, k)
                               for k, (_index, weight) in enumerate(weights))
        return result

    def _gain_function(self, i: int):
        """Source i's signal gain (as in SourceFigures.gain_from_source) at any
        frequencies, for refining a band edge between two grid points with a small local
        solve."""
        out = self.circuit.node(self.stage.output_net)

        def gain(frequencies: np.ndarray) -> np.ndarray:
            return _pick(self._solve_ac(frequencies, only=[("source", i)]), out, 0)

        return gain

    # -- output impedance ----------------------------------------------------------------
    @cached_property
    def output_impedance(self) -> np.ndarray:
        """Closed-loop impedance looking back into the stage output (the load excluded),
        over frequencies_hz."""
        z_with_load = self._node_response(self._ac, self.stage.output_net, ("output",))
        s = 2j * np.pi * self.frequencies_hz
        load_admittance = np.zeros_like(s)
        for load in self.stage.loads:
            if load.net == self.stage.output_net:
                if load.resistance_ohm:
                    load_admittance = load_admittance + 1 / load.resistance_ohm
                if load.capacitance_f:
                    load_admittance = load_admittance + s * load.capacitance_f
        return _safe_divide(1.0, _safe_divide(1.0, z_with_load) - load_admittance)

    # -- feedback-network pole -----------------------------------------------------------
    @cached_property
    def inverting_input(self) -> dict[str, tuple[float, float, float | None]]:
        """Per op-amp: (resistance seen at in-, capacitance at in-, feedback pole Hz).

        The resistance is the DC resistance from the inverting input to AC ground with
        this op-amp's output held at 0 V (its source zeroed, other op-amps active), its
        own input resistance and capacitances removed; the capacitance is its Ccm + Cdiff
        + stray plus capacitors and sensor capacitance from that net to a fixed net. The
        pole is 1/(2 pi R C) (R. Mancini (ed.), Op Amps for Everyone, stability chapter).
        """
        if not self.solvable:
            raise SingularCircuit(self.problems[0].message)
        result = {}
        stage = self.stage
        rails = set(stage.rail_voltages)
        for opamp in stage.opamps:
            resistance = self.resistance_at(opamp.ref, opamp.in_neg)
            part = opamp.part
            capacitance = (part.input_capacitance_cm_f or 0.0) + \
                (part.input_capacitance_diff_f or 0.0) + self.options.stray_capacitance_f
            for passive in stage.capacitors():
                if opamp.in_neg in passive.nets and passive.other(opamp.in_neg) in rails:
                    capacitance += passive.value
            for source in stage.sources:
                if source.net == opamp.in_neg and source.capacitance_f:
                    capacitance += source.capacitance_f
            pole = None
            if resistance and capacitance and math.isfinite(resistance):
                pole = 1.0 / (2 * math.pi * resistance * capacitance)
            result[opamp.ref] = (resistance, capacitance, pole)
        return result

    def resistance_at(self, ref: str, net: str) -> float:
        """DC resistance from ``net`` to AC ground with op-amp ``ref``'s output held at
        0 V and its input resistance removed (inf where nothing conducts)."""
        circuit = self.circuit
        node = circuit.node(net)
        if node == 0:
            return 0.0
        skip = {f"{ref}.Rin"}
        pruned = Circuit(node_names=circuit.node_names,
                         conductances=[c for c in circuit.conductances if c.element not in skip],
                         capacitances=[], branches=circuit.branches,
                         gain_blocks=[b for b in circuit.gain_blocks if b.ref != ref],
                         gain_branch={r: i for r, i in circuit.gain_branch.items() if r != ref})
        tie = tuple(unreferenced_nodes(pruned, at_dc=True))
        matrices = assemble(pruned, tie)
        gains = np.array([[b.open_loop_gain for b in pruned.gain_blocks]])
        Y = system_stack(matrices, gains, np.zeros(1)).real
        B = np.zeros((1, circuit.size, 1))
        B[0, node - 1, 0] = 1.0
        try:
            X = solve(Y, B)
        except SingularCircuit:
            return math.inf
        if node in tie:
            return math.inf
        return float(X[0, node - 1, 0])

    # -- DC extremes -------------------------------------------------------------------
    def _source_terms(self) -> list[tuple[tuple, float, float, float | None]]:
        """Per source: (column, midpoint, half-span, AC peak gain factor or None)."""
        terms = []
        for i, source in enumerate(self.stage.sources):
            if source.low is None:
                continue
            mid = (source.low + source.high) / 2
            half = (source.high - source.low) / 2
            terms.append((("source", i), mid, half, source))
        return terms

    def _swing_transfer(self, net: str, i: int, source: Source) -> float:
        """|transfer| from source i to ``net`` for its swing: the DC transfer for a
        range, the peak over its band for an AC amplitude."""
        if source.amplitude is not None and source.band_high_hz:
            frequencies = self.frequencies_hz
            band = _band_mask(frequencies, source)
            response = self._node_response(self._ac, net, ("source", i))
            return float(np.max(np.abs(response[band])))
        return abs(self.dc_transfer(net, ("source", i)))

    def unranged_sources(self, *nets: str) -> list[str]:
        """The names of the sources that give no range or amplitude yet move one of
        ``nets`` at DC: the DC extremes there count them at 0 and are not the extremes."""
        found = []
        for i, source in enumerate(self.stage.sources):
            if source.low is None and any(abs(self.dc_transfer(net, ("source", i))) > 1e-12
                                          for net in nets):
                found.append(source.name)
        return found

    def node_range(self, net: str) -> NodeRange:
        """DC extremes of ``net`` over the sources' ranges, with offset and bias errors
        (worst case: each error term adds with the sign that hurts most)."""
        low, high, error = self._linear_range(lambda column: self.dc_transfer(net, column),
                                              lambda i, source: self._swing_transfer(
                                                  net, i, source))
        rails = self.stage.rail_voltages
        clip_low = clip_high = None
        for opamp in self.stage.opamps:
            if opamp.out == net:
                clip_low = rails[opamp.v_neg] + (opamp.part.output_headroom_low_v or 0.0)
                clip_high = rails[opamp.v_pos] - (opamp.part.output_headroom_high_v or 0.0)
        return NodeRange(net, low, high, error, clip_low, clip_high)

    def difference_range(self, net_a: str, net_b: str) -> NodeRange:
        """DC extremes of V(net_a) - V(net_b) (across a resistor, say), like node_range."""

        def transfer(column: tuple) -> float:
            return self.dc_transfer(net_a, column) - self.dc_transfer(net_b, column)

        def swing(i: int, source: Source) -> float:
            if source.amplitude is not None and source.band_high_hz:
                band = _band_mask(self.frequencies_hz, source)
                response = self.node_response(net_a, ("source", i)) - \
                    self.node_response(net_b, ("source", i))
                return float(np.max(np.abs(response[band])))
            return abs(transfer(("source", i)))

        low, high, error = self._linear_range(transfer, swing)
        return NodeRange(f"{net_a}-{net_b}", low, high, error)

    def _linear_range(self, transfer, swing_transfer) -> tuple[float, float, float]:
        """(nominal low, nominal high, worst-case error) of a DC quantity linear in the
        excitations; ``transfer(column)`` is its DC transfer from one excitation."""
        rails = self.stage.rail_voltages
        base = sum(rails[n] * transfer(("supply", n)) for n in self.circuit.supply_branch)
        swing = 0.0
        for column, mid, half, source in self._source_terms():
            base += mid * transfer(column)
            swing += half * swing_transfer(column[1], source)
        error = 0.0
        for opamp in self.stage.opamps:
            part = opamp.part
            if part.offset_voltage_v:
                error += abs(part.offset_voltage_v * transfer(("vos", opamp.ref)))
            plus = transfer(("ib+", opamp.ref))
            minus = transfer(("ib-", opamp.ref))
            if part.bias_current_a:
                error += abs(part.bias_current_a * (plus + minus))
            if part.offset_current_a:
                error += abs(part.offset_current_a / 2 * (plus - minus))
        return base - swing, base + swing, error

    def input_window(self, net: str, index: int) -> tuple[float, float] | None:
        """The values of source ``index`` (volts or amperes) that keep ``net`` inside its
        clip limits, the other sources over their ranges and the errors included; None
        where the net has no clip limits or does not depend on the source."""
        source = self.stage.sources[index]
        node = self.node_range(net)
        if node.clip_low is None or source.low is None:
            return None
        transfer = self.dc_transfer(net, ("source", index))
        if abs(transfer) < 1e-15:
            return None
        mid = (source.low + source.high) / 2
        half = (source.high - source.low) / 2
        centre_other = (node.nominal_low + node.nominal_high) / 2 - mid * transfer
        spread_other = (node.nominal_high - node.nominal_low) / 2 - half * abs(transfer) \
            + node.error
        ends = sorted(((node.clip_low + spread_other - centre_other) / transfer,
                       (node.clip_high - spread_other - centre_other) / transfer))
        return ends[0], ends[1]

    @cached_property
    def output_range(self) -> NodeRange:
        """DC extremes of the stage output net."""
        return self.node_range(self.stage.output_net)

    @cached_property
    def output_currents(self) -> dict[str, OutputCurrent]:
        """Each op-amp's most sourced and most sunk output current over the sources'
        ranges (load plus feedback network), nominal parts."""
        columns, X = self._dc
        circuit = self.circuit
        rails = self.stage.rail_voltages
        result = {}
        for block in circuit.gain_blocks:
            row = circuit.row_of_branch(circuit.gain_branch[block.ref])

            def current(column: tuple) -> float:
                return -float(X[row, columns.index(column)])

            base = sum(rails[n] * current(("supply", n)) for n in circuit.supply_branch)
            swing = 0.0
            for column, mid, half, _source in self._source_terms():
                base += mid * current(column)
                swing += half * abs(current(column))
            result[block.ref] = OutputCurrent(block.ref, max(base + swing, 0.0),
                                              max(-(base - swing), 0.0))
        return result

    # -- summaries ---------------------------------------------------------------------
    @property
    def worst_phase_margin(self) -> tuple[str, float] | None:
        """(op-amp, phase margin) of the op-amp with the smallest margin."""
        margins = [(ref, loop.phase_margin_deg) for ref, loop in self.loops.items()
                   if loop.phase_margin_deg is not None]
        return min(margins, key=lambda item: item[1]) if margins else None


def _refined_crossover(frequencies, phase, i, local, T_local, local_phase, log_noise
                       ) -> tuple[float, float, float]:
    """Crossover frequency, unwrapped phase and noise gain |1/beta| there, from the local
    solve between grid points i and i + 1."""
    log_mag = np.log10(np.abs(T_local))
    j = crossing_index(log_mag, 0.0)
    if j is None:  # numerically flat at the crossing: take the grid point
        return float(frequencies[i]), float(phase[i]), float(10 ** log_noise[0])
    crossover = interpolate_log(local, j, 0.0, log_mag)
    fraction = (np.log(crossover) - np.log(local[j])) / (np.log(local[j + 1]) - np.log(local[j]))

    def at_crossover(values: np.ndarray) -> float:
        return float(values[j] + fraction * (values[j + 1] - values[j]))

    return crossover, at_crossover(local_phase), float(10 ** at_crossover(log_noise))


_REFINE_STEPS = np.linspace(0.0, 1.0, REFINE_POINTS)


def _local_grid(start: float, stop: float) -> np.ndarray:
    """REFINE_POINTS log-spaced frequencies from ``start`` to ``stop`` (either order)."""
    return start * (stop / start) ** _REFINE_STEPS


def _gain_margin(frequencies: np.ndarray, j: int, phase: np.ndarray,
                 magnitude: np.ndarray) -> tuple[float, float]:
    """(phase crossover Hz, gain margin dB) where the phase falls through -180 deg
    between points j and j + 1: -20 log10 |T| there, log|T| linear in log f."""
    crossover = interpolate_log(frequencies, j, -180.0, phase)
    log_mag = np.log10(np.maximum(magnitude, np.finfo(float).tiny))  # a zero has no log
    fraction = (np.log(crossover) - np.log(frequencies[j])) / (
        np.log(frequencies[j + 1]) - np.log(frequencies[j]))
    return crossover, float(-20 * (log_mag[j] + fraction * (log_mag[j + 1] - log_mag[j])))


def signed_gain(gain: complex) -> float:
    """A mid-band gain as a real number: its magnitude with the sign of its real part."""
    return math.copysign(abs(gain), gain.real) if gain.real else abs(gain)


def _pick(X: np.ndarray, node: int, column: int) -> np.ndarray:
    if node == 0:
        return np.zeros(X.shape[0], dtype=X.dtype)
    return X[:, node - 1, column]


def _safe_divide(a, b):
    a = np.asarray(a, dtype=complex)
    b = np.asarray(b, dtype=complex)
    with np.errstate(divide="ignore", invalid="ignore"):
        result = a / b
    return np.where(b == 0, np.inf, result)


def reference_frequency(source: Source) -> float:
    """The frequency a source's single-number figures are read at: the geometric centre
    of its band, or 0 Hz (DC) for a source with no band or a band from 0 Hz."""
    return _band_centre(source) or 0.0


def _band_centre(source: Source) -> float | None:
    if source.band_high_hz and source.band_low_hz:
        return math.sqrt(source.band_low_hz * source.band_high_hz)
    return None


def _band_mask(frequencies: np.ndarray, source: Source) -> np.ndarray:
    if source.band_high_hz:
        low = source.band_low_hz or frequencies[0]
        mask = (frequencies >= low * (1 - 1e-12)) & (frequencies <= source.band_high_hz * (1 + 1e-12))
        if mask.any():
            return mask
    return np.ones(frequencies.shape, dtype=bool)


def grid_upper_edges(frequencies: np.ndarray, gains: np.ndarray, at: int) -> np.ndarray:
    """-3 dB upper edges of many gains (V, F) above grid index ``at``, read on the grid
    alone (log-log interpolation, no local solve); NaN where the response stays up.
    For ranking candidates; reported edges come from bandwidth_edges."""
    if at >= frequencies.size - 1:
        return np.full(gains.shape[0], np.nan)
    magnitude = np.maximum(np.abs(gains[:, at:]), np.finfo(float).tiny)
    level = magnitude[:, :1] / math.sqrt(2)
    above = magnitude >= level
    falls = above[:, :-1] & ~above[:, 1:]
    found = falls.any(axis=1)
    i = np.argmax(falls, axis=1)
    rows = np.arange(gains.shape[0])
    log_f = np.log(frequencies[at:])
    m0, m1 = np.log(magnitude[rows, i]), np.log(magnitude[rows, i + 1])
    with np.errstate(divide="ignore", invalid="ignore"):
        fraction = np.where(found & (m1 != m0), (np.log(level[:, 0]) - m0) / (m1 - m0), 0.0)
    edge = np.exp(log_f[i] + fraction * (log_f[np.minimum(i + 1, log_f.size - 1)] - log_f[i]))
    return np.where(found, edge, np.nan)


def bandwidth_edges(frequencies: np.ndarray, gain: np.ndarray, at: int,
               gain_at=None) -> tuple[float | None, float | None]:
    """-3 dB edges of |gain| around index ``at`` (None where the response stays up).

    Each edge is bracketed on the grid, then pinned down on a local grid of
    REFINE_POINTS solved by ``gain_at(frequencies)`` (when given; one call for both
    edges), so its accuracy does not depend on the grid's density."""
    magnitude = np.abs(gain)
    reference = magnitude[at]
    if reference == 0 or not math.isfinite(reference):  # no gain, or the net is held
        return None, None
    level = reference / math.sqrt(2)
    tiny = np.finfo(float).tiny  # a zero response has no log
    sides = [(frequencies[at:], magnitude[at:]),  # upwards from the reference
             (frequencies[: at + 1][::-1], magnitude[: at + 1][::-1])]  # downwards
    brackets = [crossing_index(values, level) for _freqs, values in sides]
    locals_ = [_local_grid(freqs[i], freqs[i + 1])
               for (freqs, _values), i in zip(sides, brackets) if i is not None]
    solved = iter(np.split(np.maximum(np.abs(gain_at(np.concatenate(locals_))), tiny),
                           len(locals_))) if gain_at is not None and locals_ else None
    local_grids = iter(locals_)
    edges = []
    for (freqs, values), i in zip(sides, brackets):
        if i is None:
            edges.append(None)
            continue
        if solved is not None:
            local, local_values = next(local_grids), next(solved)
            j = crossing_index(local_values, level)
            if j is not None:
                edges.append(interpolate_log(local, j, math.log10(level),
                                             np.log10(local_values)))
                continue
        edges.append(interpolate_log(freqs, i, math.log10(level),
                                     np.log10(np.maximum(values, tiny))))
    high, low = edges
    return low, high
