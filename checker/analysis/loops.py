"""Every op-amp's loop from its return ratio, and the margins read from it.

T and beta come from the closed-loop solve by the Sherman-Morrison identity (loop.py);
each crossing (|T| = 1, arg T = -180 deg) is bracketed on the grid and pinned down on a
local grid solved between the bracketing points (grid.REFINE_POINTS), so a margin does
not depend on the grid's density. Arrays are over the solution's grid, (F,) complex.
"""

from __future__ import annotations

import numpy as np

from checker.analysis.grid import REFINE_POINTS, local_grid, pick
from checker.analysis.loop import (Margins, crossing_index, interpolate_log, return_ratio,
                                   unwrapped_phase_deg)
from checker.analysis.results import LoopFigures
from checker.analysis.solution import Excitation, Solution

NO_MARGINS = Margins(None, None, None, None)


def _block(solution: Solution, ref: str):
    return next((k, b) for k, b in enumerate(solution.circuit.gain_blocks) if b.ref == ref)


def _across_inputs(X: np.ndarray, block, column: int) -> np.ndarray:
    """-(v+ - v-) of ``block``'s inputs in column ``column`` of X: z of loop.py."""
    return -(pick(X, block.in_pos, column) - pick(X, block.in_neg, column))


def stage_loops(solution: Solution) -> dict[str, LoopFigures]:
    """Loop gain, noise gain and margins of every op-amp, by designator."""
    result = {}
    frequencies = solution.frequencies_hz
    gains = solution.open_loop_gains(frequencies)
    X_dc = solution.dc[None]
    for k, block in enumerate(solution.circuit.gain_blocks):
        name = Excitation.loop(block.ref)
        z = _across_inputs(solution.grid, block, solution.column(name))
        T, beta = return_ratio(gains[:, k], z)
        z_dc = _across_inputs(X_dc, block, solution.dc_column(name))
        T_dc, beta_dc = return_ratio(np.array([block.open_loop_gain]), z_dc.astype(complex))
        noise_gain = np.divide(1.0, beta, out=np.full_like(beta, np.inf), where=beta != 0)
        closes = block.pole1_hz and np.max(np.abs(T)) >= 1.0
        margins = margins_on(solution, frequencies, T, block) if closes else NO_MARGINS
        result[block.ref] = LoopFigures(
            ref=block.ref, loop_gain=T, loop_gain_dc=float(T_dc.real[0]),
            noise_gain=noise_gain,
            noise_gain_dc=float(1 / beta_dc.real[0]) if abs(beta_dc[0]) > 1e-15 else None,
            margins=margins)
    return result


def loop_at(solution: Solution, ref: str):
    """loop_at(frequencies) -> (T, beta) of op-amp ``ref``: its loop column solved."""
    k, block = _block(solution, ref)

    def at(frequencies: np.ndarray):
        X = solution.solve_excitations(frequencies, [Excitation.loop(ref)])
        z = _across_inputs(X, block, 0)
        return return_ratio(solution.open_loop_gains(frequencies)[:, k], z)

    return at


def margins_from(solution: Solution, ref: str, loop) -> Margins:
    """Margins of op-amp ``ref`` from ``loop(frequencies) -> (T, beta)``, any loop (the
    solved one, or one with elements changed: updates.py); the gain margin is read on
    the grid only (fix searches read the phase margin)."""
    _k, block = _block(solution, ref)
    frequencies = solution.frequencies_hz
    T, _beta = loop(frequencies)
    if not block.pole1_hz or np.max(np.abs(T)) < 1.0:
        return NO_MARGINS
    return margins_on(solution, frequencies, T, block, refine_gain_margin=False, loop=loop)


def margins_on(solution: Solution, frequencies: np.ndarray, T: np.ndarray, block,
               refine_gain_margin: bool = True, loop=None) -> Margins:
    """Margins from T on the grid, each crossing pinned down by a local solve (one
    solve for both; the gain margin's only when ``refine_gain_margin``). ``loop``
    gives the loop on the local grid (default: the op-amp's loop column solved)."""
    magnitude = np.abs(T)
    phase = unwrapped_phase_deg(T)
    # The crossover is where |T| falls through 1; a loop open at DC (an integrator with
    # nothing across its capacitor) rises through 1 first, and its crossover is the
    # fall that follows.
    i = crossing_index(magnitude, 1.0)
    j = crossing_index(phase, -180.0)
    wanted = [index for index in (i, j if refine_gain_margin else None) if index is not None]
    local = dict(zip(wanted, _local_loops(frequencies, wanted, phase,
                                          loop or loop_at(solution, block.ref))))
    crossover = phase_margin = noise_gain = None
    if i is not None:
        crossover, phase_at, noise_gain = _refined_crossover(frequencies, phase, i, *local[i])
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


def _local_loops(frequencies, brackets: list[int], phase, loop) -> list:
    """The loop on a fine local grid between grid points i and i + 1 for each i in
    ``brackets``, all in one call: per bracket (frequencies, T, unwrapped phase
    continuing from the grid's, log10 |1/beta|)."""
    if not brackets:
        return []
    grids = [local_grid(frequencies[i], frequencies[i + 1]) for i in brackets]
    T_all, beta_all = loop(np.concatenate(grids))
    result = []
    for n, (i, local) in enumerate(zip(brackets, grids)):
        part = slice(n * REFINE_POINTS, (n + 1) * REFINE_POINTS)
        T_local = T_all[part]
        local_phase = unwrapped_phase_deg(T_local)
        local_phase += 360.0 * np.round((phase[i] - local_phase[0]) / 360.0)
        beta_magnitude = np.maximum(np.abs(beta_all[part]), np.finfo(float).tiny)
        result.append((local, T_local, local_phase, -np.log10(beta_magnitude)))
    return result


def _refined_crossover(frequencies, phase, i, local, T_local, local_phase, log_noise
                       ) -> tuple[float, float, float]:
    """Crossover frequency, unwrapped phase and noise gain |1/beta| there, from the local
    solve between grid points i and i + 1."""
    log_mag = np.log10(np.maximum(np.abs(T_local), np.finfo(float).tiny))
    j = crossing_index(log_mag, 0.0)
    if j is None:  # numerically flat at the crossing: take the grid point
        return float(frequencies[i]), float(phase[i]), float(10 ** log_noise[0])
    crossover = interpolate_log(local, j, 0.0, log_mag)
    fraction = (np.log(crossover) - np.log(local[j])) / (np.log(local[j + 1]) - np.log(local[j]))

    def at_crossover(values: np.ndarray) -> float:
        return float(values[j] + fraction * (values[j + 1] - values[j]))

    return crossover, at_crossover(local_phase), float(10 ** at_crossover(log_noise))


def _gain_margin(frequencies: np.ndarray, j: int, phase: np.ndarray,
                 magnitude: np.ndarray) -> tuple[float, float]:
    """(phase crossover Hz, gain margin dB) where the phase falls through -180 deg
    between points j and j + 1: -20 log10 |T| there, log|T| linear in log f."""
    crossover = interpolate_log(frequencies, j, -180.0, phase)
    log_mag = np.log10(np.maximum(magnitude, np.finfo(float).tiny))  # a zero has no log
    fraction = (np.log(crossover) - np.log(frequencies[j])) / (
        np.log(frequencies[j + 1]) - np.log(frequencies[j]))
    return crossover, float(-20 * (log_mag[j] + fraction * (log_mag[j + 1] - log_mag[j])))
