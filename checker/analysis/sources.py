"""What each signal source sees and gets: gain from the source and from its net, input
impedance, -3 dB edges, and the stage's output impedance.

The signal's gain is from the source itself (its EMF, or its current) to the output; the
gain from the source's net is kept beside it for the loading figures. Single-number
figures are read at the source's reference frequency: the band's geometric centre, or
0 Hz (the DC solve) for a source with no band or a band from 0 Hz (docs/format.md). The
input resistance is the smallest |Zin| over the band, DC included when the band reaches
it; a source with no band is a DC signal and sees the DC input resistance. Arrays are
over the solution's grid, (F,) complex; impedances in ohms.
"""

from __future__ import annotations

import math

import numpy as np

from checker.analysis.grid import (band_mask, band_peak, bandwidth_edges, pick, reference_frequency,
                                   safe_divide)
from checker.analysis.results import SourceFigures
from checker.analysis.solution import OUTPUT, Excitation, Solution


def source_figures(solution: Solution) -> list[SourceFigures]:
    """Per-source gain, input impedance and bandwidth at the stage output."""
    stage, circuit = solution.stage, solution.circuit
    X = solution.grid
    frequencies = solution.frequencies_hz
    s = 2j * np.pi * frequencies
    result = []
    for i, source in enumerate(stage.sources):
        column = solution.column(Excitation.source(i))
        v_out = solution.net_response(X, stage.output_net, column)
        v_net = solution.net_response(X, source.net, column)
        if source.kind == "voltage":
            current = -X[:, circuit.row_of_branch(circuit.source_branch[i]), column]
            z_in = safe_divide(v_net, current)
            gain = safe_divide(v_out, v_net)
        else:
            shunt = np.zeros_like(s)
            if source.impedance_ohm:
                shunt = shunt + 1 / source.impedance_ohm
            if source.capacitance_f:
                shunt = shunt + s * source.capacitance_f
            z_in = safe_divide(1.0, safe_divide(1.0, v_net) - shunt)
            gain = v_out
        gain_from_source = v_out
        reference = reference_frequency(source)
        if reference > 0:
            at = int(np.argmin(np.abs(frequencies - reference)))
            reference = float(frequencies[at])
            mids = (complex(gain[at]), complex(gain_from_source[at]), complex(z_in[at]))
        else:
            at = 0
            mids = _at_dc(solution, i)
        band = band_mask(frequencies, source) if source.band_high_hz else None
        smallest = abs(mids[2])
        if band is not None:
            smallest = min(float(np.min(np.abs(z_in[band]))),
                           smallest if reference == 0 else math.inf)
        gain_at = gain_function(solution, i)
        if band is not None:  # -3 dB from the largest gain in the band: its passband
            edge_f, edge_gain, edge_at = band_peak(frequencies, gain_from_source, band, gain_at)
        else:
            edge_f, edge_gain, edge_at = frequencies, gain_from_source, at
        low, high = bandwidth_edges(edge_f, edge_gain, edge_at, gain_at)
        result.append(SourceFigures(
            index=i, source=source, gain=gain, gain_from_source=gain_from_source,
            input_impedance=z_in, reference_hz=reference,
            gain_mid=mids[0], gain_from_source_mid=mids[1], input_impedance_mid=mids[2],
            input_resistance_min=smallest, bandwidth_low_hz=low, bandwidth_high_hz=high))
    return result


def _at_dc(solution: Solution, i: int) -> tuple[complex, complex, complex]:
    """(gain from the net, gain from the source, input impedance) of source i at 0 Hz."""
    stage, circuit = solution.stage, solution.circuit
    source = stage.sources[i]
    name = Excitation.source(i)
    out = solution.dc_transfer(stage.output_net, name)
    net = solution.dc_transfer(source.net, name)
    if source.kind == "voltage":
        current = -solution.dc_unknown(circuit.row_of_branch(circuit.source_branch[i]), name)
        z_in = net / current if current else math.inf
        gain = out / net if net else (math.inf if out else 0.0)
    else:
        shunt = 1 / source.impedance_ohm if source.impedance_ohm else 0.0
        conductance = (1 / net if net else math.inf) - shunt
        z_in = 1 / conductance if conductance else math.inf
        gain = out
    return complex(gain), complex(out), complex(z_in)


def gain_function(solution: Solution, i: int):
    """Source i's signal gain (SourceFigures.gain_from_source) at any frequencies, from a
    one-column solve: for refining a band edge, and for searches over copies."""
    out = solution.circuit.node(solution.stage.output_net)

    def gain(frequencies: np.ndarray) -> np.ndarray:
        return pick(solution.solve_excitations(frequencies, [Excitation.source(i)]), out, 0)

    return gain


def signal_response(solution: Solution, weights, frequencies: np.ndarray) -> np.ndarray:
    """The output per unit of a weighted sum of sources, ``weights`` = ((index, weight),
    ...), at any ``frequencies`` (F,) from one solve of their columns; 0 Hz entries come
    from the DC solve. (F,) complex."""
    frequencies = np.asarray(frequencies, dtype=float)
    result = np.zeros(frequencies.shape, dtype=complex)
    dc = frequencies <= 0
    out_net = solution.stage.output_net
    if dc.any():
        for index, weight in weights:
            result[dc] += weight * solution.dc_transfer(out_net, Excitation.source(index))
    if (~dc).any():
        X = solution.solve_excitations(frequencies[~dc],
                                       [Excitation.source(index) for index, _w in weights])
        out = solution.circuit.node(out_net)
        result[~dc] += sum(weight * pick(X, out, k) for k, (_index, weight) in enumerate(weights))
    return result


def output_impedance(solution: Solution) -> np.ndarray:
    """Closed-loop impedance looking back into the stage output (the load excluded),
    over the grid: 1 A into the output net, with the load's admittance taken back out."""
    stage = solution.stage
    z_with_load = solution.node_response(stage.output_net, OUTPUT)
    s = 2j * np.pi * solution.frequencies_hz
    load_admittance = np.zeros_like(s)
    for load in stage.loads:
        if load.net == stage.output_net:
            if load.resistance_ohm:
                load_admittance = load_admittance + 1 / load.resistance_ohm
            if load.capacitance_f:
                load_admittance = load_admittance + s * load.capacitance_f
    return safe_divide(1.0, safe_divide(1.0, z_with_load) - load_admittance)
