"""Extremes over the sources' ranges: a net's voltage, a voltage across two nets, the
input window that fits, and each op-amp's output current.

The solution is linear in every excitation (supplies, sources, offsets, bias
currents), so an extreme is the rails' operating point plus each source's midpoint
times its DC transfer plus its half-span (or amplitude) times |its transfer| for the
swing: the peak over its band where it gives one (the DC transfer too for a band from
0 Hz), the DC transfer otherwise; and the worst
case of the error terms adds with the sign that hurts (superposition; DC error terms as
in Eggleston, Basic Electronics for Scientists and Engineers, Cambridge University
Press 2011, section 6.4). Volts and amperes, SI.
"""

from __future__ import annotations

import numpy as np

from checker.analysis.grid import band_mask, band_peak, pick
from checker.analysis.results import NodeRange, OutputCurrent
from checker.analysis.solution import Excitation, Solution
from checker.model import Source


def _source_terms(solution: Solution) -> list[tuple[Excitation, float, float, Source]]:
    """Per source with a range: (excitation, midpoint, half-span, source)."""
    terms = []
    for i, source in enumerate(solution.stage.sources):
        if source.low is None:
            continue
        assert source.high is not None  # the builder sets low and high together
        terms.append((Excitation.source(i), (source.low + source.high) / 2,
                      (source.high - source.low) / 2, source))
    return terms


def _band_peak(solution: Solution, source: Source, response: np.ndarray, dc: float,
               response_at) -> float:
    """The largest |transfer| a source's swing meets over its band: the peak of the
    solved ``response`` over the band (pinned down between grid points by
    ``response_at(frequencies)``: grid.band_peak), and ``dc`` too where the band starts
    at 0 Hz (the grid starts above it)."""
    band = band_mask(solution.frequencies_hz, source)
    _freqs, values, at = band_peak(solution.frequencies_hz, response, band, response_at)
    peak = float(abs(values[at]))
    return max(peak, abs(dc)) if not source.band_low_hz else peak


def _net_response_at(solution: Solution, nets: tuple[str, ...], name):
    """response_at(frequencies) -> V(nets[0]) (- V(nets[1])) per unit of ``name``."""
    def at(frequencies: np.ndarray) -> np.ndarray:
        X = solution.solve_excitations(frequencies, [name])
        values = pick(X, solution.circuit.node(nets[0]), 0)
        if len(nets) > 1:
            values = values - pick(X, solution.circuit.node(nets[1]), 0)
        return values

    return at


def read_over_band(source: Source) -> bool:
    """A source whose swing is read over its band (a band given) rather than at DC: a
    range with a band from 10 Hz swings about its midpoint at 10 Hz and up, which a
    coupling capacitor passes and the DC solution does not (docs/format.md)."""
    return bool(source.band_high_hz)


def _swing_transfer(solution: Solution, net: str, i: int, source: Source) -> float:
    """|transfer| from source i to ``net`` for its swing (its half-span, or its AC
    amplitude): the peak over its band where it gives one, else the DC transfer."""
    name = Excitation.source(i)
    dc = solution.dc_transfer(net, name)
    if read_over_band(source):
        return _band_peak(solution, source, solution.node_response(net, name), dc,
                          _net_response_at(solution, (net,), name))
    return abs(dc)


def linear_range(solution: Solution, transfer, swing_transfer) -> tuple[float, float, float]:
    """(nominal low, nominal high, worst-case error) of a DC quantity linear in the
    excitations; ``transfer(name)`` is its DC transfer from one excitation and
    ``swing_transfer(i, source)`` its transfer for source i's swing."""
    stage = solution.stage
    rails = stage.rail_voltages
    base = sum(rails[n] * transfer(Excitation("supply", n))
               for n in solution.circuit.supply_branch)
    swing = 0.0
    for name, mid, half, source in _source_terms(solution):
        base += mid * transfer(name)
        swing += half * swing_transfer(name.key, source)
    error = 0.0
    for opamp in stage.opamps:
        part = opamp.part
        if part.offset_voltage_v:
            error += abs(part.offset_voltage_v * transfer(Excitation("vos", opamp.ref)))
        plus = transfer(Excitation("ib+", opamp.ref))
        minus = transfer(Excitation("ib-", opamp.ref))
        if part.bias_current_a:
            error += abs(part.bias_current_a * (plus + minus))
        if part.offset_current_a:
            error += abs(part.offset_current_a / 2 * (plus - minus))
    return base - swing, base + swing, error


def node_range(solution: Solution, net: str) -> NodeRange:
    """DC extremes of ``net`` over the sources' ranges, with offset and bias errors; an
    op-amp output's clip limits are its rails less the part's headroom."""
    low, high, error = linear_range(
        solution, lambda name: solution.dc_transfer(net, name),
        lambda i, source: _swing_transfer(solution, net, i, source))
    rails = solution.stage.rail_voltages
    clip_low = clip_high = None
    for opamp in solution.stage.opamps:
        if opamp.out == net:
            clip_low = rails[opamp.v_neg] + (opamp.part.output_headroom_low_v or 0.0)
            clip_high = rails[opamp.v_pos] - (opamp.part.output_headroom_high_v or 0.0)
    return NodeRange(net, low, high, error, clip_low, clip_high)


def difference_range(solution: Solution, net_a: str, net_b: str) -> NodeRange:
    """DC extremes of V(net_a) - V(net_b) (across a resistor, say), like node_range."""

    def transfer(name) -> float:
        return solution.dc_transfer(net_a, name) - solution.dc_transfer(net_b, name)

    def swing(i: int, source: Source) -> float:
        name = Excitation.source(i)
        if read_over_band(source):
            response = solution.node_response(net_a, name) - solution.node_response(net_b, name)
            return _band_peak(solution, source, response, transfer(name),
                              _net_response_at(solution, (net_a, net_b), name))
        return abs(transfer(name))

    low, high, error = linear_range(solution, transfer, swing)
    return NodeRange(f"{net_a}-{net_b}", low, high, error)


def unranged_sources(solution: Solution, nets) -> list[str]:
    """The names of the sources that give no range or amplitude yet move one of
    ``nets`` at DC: the DC extremes there count them at 0 and are not the extremes."""
    found = []
    for i, source in enumerate(solution.stage.sources):
        if source.low is None and any(
                abs(solution.dc_transfer(net, Excitation.source(i))) > 1e-12 for net in nets):
            found.append(source.name)
    return found


def input_window(solution: Solution, net: str, index: int) -> tuple[float, float] | None:
    """The values of source ``index`` (volts or amperes) that keep ``net`` inside its
    clip limits, the other sources over their ranges and the errors included; None
    where the net has no clip limits or does not depend on the source. A source whose
    swing reaches the net by another transfer than its midpoint (a band above DC
    through a coupling capacitor) keeps its midpoint: _swing_window."""
    source = solution.stage.sources[index]
    node = node_range(solution, net)
    if node.clip_low is None or source.low is None:
        return None
    # The builder sets low and high together; node_range sets both clip ends or neither.
    assert source.high is not None and node.clip_high is not None
    transfer = solution.dc_transfer(net, Excitation.source(index))
    swing = _swing_transfer(solution, net, index, source)
    mid = (source.low + source.high) / 2
    half = (source.high - source.low) / 2
    if abs(swing - abs(transfer)) > 1e-9 * swing:
        return _swing_window(node, mid, half, swing)
    if abs(transfer) < 1e-15:
        return None
    centre_other = (node.nominal_low + node.nominal_high) / 2 - mid * transfer
    spread_other = (node.nominal_high - node.nominal_low) / 2 - half * abs(transfer) \
        + node.error
    ends = sorted(((node.clip_low + spread_other - centre_other) / transfer,
                   (node.clip_high - spread_other - centre_other) / transfer))
    return ends[0], ends[1]


def _swing_window(node: NodeRange, mid: float, half: float, swing: float
                  ) -> tuple[float, float] | None:
    """For a source whose swing reaches the net by another transfer than its midpoint
    (read over a band: a coupling capacitor passes the swing, not the midpoint), the
    values about the declared midpoint whose swing keeps the net inside its clip limits,
    the other sources and the errors included; None where no swing fits."""
    assert node.clip_low is not None and node.clip_high is not None
    centre = (node.nominal_low + node.nominal_high) / 2
    spread_other = (node.nominal_high - node.nominal_low) / 2 - half * swing + node.error
    room = min(node.clip_high - centre - spread_other, centre - spread_other - node.clip_low)
    if room < 0:
        return None
    return mid - room / swing, mid + room / swing


def output_currents(solution: Solution) -> dict[str, OutputCurrent]:
    """Each op-amp's most sourced and most sunk output current over the sources' ranges
    (load plus feedback network), nominal parts: the gain block's branch current."""
    circuit = solution.circuit
    rails = solution.stage.rail_voltages
    result = {}
    for block in circuit.gain_blocks:
        row = circuit.row_of_branch(circuit.gain_branch[block.ref])

        def current(name) -> float:
            return -solution.dc_unknown(row, name)

        base = sum(rails[n] * current(Excitation("supply", n)) for n in circuit.supply_branch)
        swing = 0.0
        for name, mid, half, _source in _source_terms(solution):
            base += mid * current(name)
            swing += half * abs(current(name))
        result[block.ref] = OutputCurrent(block.ref, max(base + swing, 0.0),
                                          max(-(base - swing), 0.0))
    return result


def output_loads(solution: Solution) -> dict[str, float | None]:
    """Per op-amp, the least resistance its output pin drives as a source moves it, the
    load and the feedback network together (an inverting stage's feedback resistor ends
    at a virtual ground, so it loads the output as a resistor to ground): per source
    that moves the output, dV(out) / dI(out) at DC (Ohm's law on the incremental
    solution), or for a source read over its band 1 / Re(I/V) where its swing peaks
    (pinned down: grid.band_peak). Only the in-phase current counts: a capacitor's
    current is zero at the voltage's peak, where the headroom is decided (i = C dv/dt).
    None where no source moves the output."""
    circuit = solution.circuit
    result: dict[str, float | None] = {}
    for block in circuit.gain_blocks:
        branch = circuit.gain_branch[block.ref]
        row = circuit.row_of_branch(branch)
        least = None
        for name, _mid, half, source in _source_terms(solution):
            if half <= 0 or not block.out:
                continue
            if read_over_band(source):
                ohms = _band_load(solution, block, name, source)
            else:
                dv = abs(solution.dc_unknown(block.out - 1, name))
                di = abs(solution.dc_unknown(row, name))
                ohms = dv / di if dv > 0 and di > dv * 1e-15 else None
            if ohms is not None:
                least = ohms if least is None else min(least, ohms)
        result[block.ref] = least
    return result


def _band_load(solution: Solution, block, name, source: Source) -> float | None:
    """1 / Re(I/V) of op-amp ``block``'s output where source ``name``'s swing of it
    peaks over the band; None where the output draws no in-phase current there."""
    net = solution.circuit.node_names[block.out]
    grid = solution.frequencies_hz
    branch = solution.circuit.gain_branch[block.ref]
    freqs, values, at = band_peak(grid, solution.node_response(net, name),
                                  band_mask(grid, source),
                                  _net_response_at(solution, (net,), name))
    if freqs is grid:  # the peak is a grid point: read the grid's solution there
        volts, amps = values[at], -solution.branch_response(branch, name)[at]
    else:
        X = solution.solve_excitations(np.array([freqs[at]]), [name])
        volts = X[0, block.out - 1, 0]
        amps = -X[0, solution.circuit.row_of_branch(branch), 0]
    if volts == 0:
        return None
    conductance = float((amps / volts).real)
    return 1 / conductance if conductance > 1e-15 else None
