"""Output noise: every noise source's transfer computed by the solver, then integrated.

Noise sources (uncorrelated, white): each resistor's thermal noise as a current
4kT/R (A^2/Hz) across it (Johnson-Nyquist; k the Boltzmann constant, exact in the SI
since 2019), each op-amp's input voltage noise en in series with its non-inverting
input, and its input current noise in into each input. Output power density is the sum
of |transfer|^2 times each density; the rms over a band is the square root of its
integral (trapezoid rule on a log grid, the white density extended to 0 Hz below it).
"""

from __future__ import annotations

import math
from checker.record import record

import numpy as np

from checker.analysis.poles import stage_poles

# numpy < 2 names it trapz; numpy 2's stubs no longer declare trapz (a third-party typing gap).
_trapezoid = getattr(np, "trapezoid", None) or np.trapz  # type: ignore[attr-defined]
BOLTZMANN = 1.380649e-23  # J/K, exact in the SI (2019 redefinition; CODATA)
INTERNAL = (".Rin", ".Ro")  # parts of the op-amp model, not resistors on the board


@record(frozen=True)
class NoiseContribution:
    name: str  # "R2 thermal", "U1 voltage noise", "U1 current noise (in-)"
    element: str
    vrms: float


@record(frozen=True)
class NoiseResult:
    band_low_hz: float
    band_high_hz: float
    total_vrms: float
    contributions: tuple[NoiseContribution, ...]  # largest first
    missing: tuple[str, ...]  # op-amps whose part gives no en or in

    @property
    def largest(self) -> NoiseContribution | None:
        return self.contributions[0] if self.contributions else None


def noise_band(stage) -> tuple[float, float] | None:
    """The band a stage's output noise is integrated over: the sources' lowest to highest
    band edge, else 0 Hz to the `bandwidth` requirement; None when neither is given."""
    highs = [s.band_high_hz for s in stage.sources if s.band_high_hz]
    if highs:
        lows = [s.band_low_hz or 0.0 for s in stage.sources if s.band_high_hz]
        return min(lows), max(highs)
    if stage.require.bandwidth_hz:
        return 0.0, stage.require.bandwidth_hz
    return None


def thermal_density(resistance_ohm: float, temperature_k: float) -> float:
    """Thermal noise voltage density sqrt(4kTR) in V/sqrt(Hz) (Johnson-Nyquist)."""
    return math.sqrt(4 * BOLTZMANN * temperature_k * resistance_ohm)


@record(frozen=True)
class NoiseDensity:
    """Output noise density over a frequency grid, in total and per noise source."""

    frequencies_hz: np.ndarray  # (F,)
    names: tuple[tuple[str, str], ...]  # per source: (name, element), as in NoiseContribution
    power: np.ndarray  # (F, m) V^2/Hz at the net from each source
    missing: tuple[str, ...]  # op-amps whose part gives no en or in

    @property
    def total_v_per_rthz(self) -> np.ndarray:
        """The output's total density sqrt(sum of powers) in V/sqrt(Hz), (F,): the
        sources are uncorrelated, so their powers add."""
        return np.sqrt(np.sum(self.power, axis=1)) if self.names else \
            np.zeros(self.frequencies_hz.shape)

    def density_of(self, k: int) -> np.ndarray:
        """Source k's density at the net in V/sqrt(Hz), (F,)."""
        return np.sqrt(self.power[:, k])


def noise_density(figures, frequencies_hz: np.ndarray, temperature_k: float = 300.0,
                  net: str | None = None) -> NoiseDensity:
    """Noise density at ``net`` (default the stage output) at ``frequencies_hz`` (F,,
    all above 0 Hz): every source's transfer to the net from one solve of the
    transposed system (Solution.node_transfers), times its density (module docstring).
    The voltage noise's column is a unit at the gain block's row, times A(s)."""
    circuit = figures.circuit
    stage = figures.stage
    node = circuit.node(net or stage.output_net)
    frequencies = np.asarray(frequencies_hz, dtype=float)
    n = circuit.size
    names: list[tuple[str, str]] = []
    densities: list[float] = []
    columns: list[np.ndarray] = []
    scales: list[np.ndarray | float] = []  # each column's factor over the frequencies

    def add(name: str, element: str, density_sq: float, column: np.ndarray,
            scale: np.ndarray | float = 1.0) -> None:
        names.append((name, element))
        densities.append(density_sq)
        columns.append(column)
        scales.append(scale)

    for item in circuit.conductances:
        if item.element.endswith(INTERNAL):
            continue
        column = np.zeros(n)
        if item.a:
            column[item.a - 1] += 1.0
        if item.b:
            column[item.b - 1] -= 1.0
        add(f"{item.element} thermal", item.element,
            4 * BOLTZMANN * temperature_k * item.siemens, column)
    missing = []
    gains = figures.open_loop_gains(frequencies)
    for k, block in enumerate(circuit.gain_blocks):
        part = stage.element(block.ref).part
        if part.voltage_noise_v_per_rthz is None or part.current_noise_a_per_rthz is None:
            missing.append(block.ref)
        if part.voltage_noise_v_per_rthz:
            column = np.zeros(n)
            column[circuit.row_of_branch(circuit.gain_branch[block.ref])] = 1.0
            add(f"{block.ref} voltage noise", block.ref, part.voltage_noise_v_per_rthz ** 2,
                column, gains[:, k])
        if part.current_noise_a_per_rthz:
            for pin, pin_node in (("in+", block.in_pos), ("in-", block.in_neg)):
                if not pin_node:
                    continue
                column = np.zeros(n)
                column[pin_node - 1] = -1.0
                add(f"{block.ref} current noise ({pin})", block.ref,
                    part.current_noise_a_per_rthz ** 2, column)
    if not columns or node == 0:
        return NoiseDensity(frequencies, (), np.zeros((frequencies.size, 0)), tuple(missing))
    B = np.stack(columns, axis=1)  # (n, m)
    transfer = figures.node_transfers(frequencies, node, B)  # (F, m), one adjoint solve
    transfer_sq = np.abs(transfer * np.stack(
        [np.broadcast_to(scale, frequencies.shape) for scale in scales], axis=1)) ** 2
    power = transfer_sq * np.asarray(densities)[None, :]  # V^2/Hz per source
    return NoiseDensity(frequencies, tuple(names), power, tuple(missing))


def output_noise(figures, band_low_hz: float, band_high_hz: float,
                 temperature_k: float = 300.0, net: str | None = None,
                 points: int = 200) -> NoiseResult:
    """Integrated noise at ``net`` (default the stage output) over the band."""
    return noise_in_and_above_band(figures, band_low_hz, band_high_hz, temperature_k, net,
                                   points, above=False)[0]


# Above the band the output noise is integrated at this many points per decade (the
# trapezoid on a log grid, with a sharp resonance's own points: with_resonances).
# Against 2,000 per decade, on the 288 noise requirements of bench/generate_stages.py's
# requirement set (seed 4) and the samples whose loops are stable: within 0.12 % above
# the band and 0.04 % in it, loops of 1-2 degrees of phase margin included (their
# resonances, Q 30-50, read 7-18 % low on the log grid alone).
ABOVE_BAND_POINTS_PER_DECADE = 40


def noise_above_band(figures, band_high_hz: float, temperature_k: float = 300.0,
                     net: str | None = None) -> tuple[float, float] | None:
    """(rms V, top Hz): the output noise from the band's top up to the top of the
    analysis grid, where an output that no filter limits keeps carrying it (what the
    noise bandwidth of the stage's own roll-off adds; for a single pole it is about
    1.57 times the -3 dB frequency: T. Sobering, "Equivalent Noise Bandwidth",
    Technote 1). None when the band reaches the grid's top."""
    frequencies = _above_band_grid(figures, band_high_hz)
    if frequencies is None:
        return None
    density = noise_density(figures, frequencies, temperature_k, net)
    return _above_band_figure(density.names, density.power, frequencies)


def noise_in_and_above_band(figures, band_low_hz: float, band_high_hz: float,
                            temperature_k: float = 300.0, net: str | None = None,
                            points: int = 200, above: bool = True
                            ) -> tuple[NoiseResult, tuple[float, float] | None]:
    """output_noise over the band and (when ``above``) noise_above_band, from one
    noise_density call over both grids: one system stack, one adjoint solve. The
    figures are those of the two functions alone: each frequency's solve is its own."""
    start = max(band_low_hz, band_high_hz * 1e-4)
    frequencies = with_resonances(figures, np.geomspace(start, band_high_hz, points))
    beyond = _above_band_grid(figures, band_high_hz) if above else None
    density = noise_density(figures, frequencies if beyond is None
                            else np.concatenate([frequencies, beyond]), temperature_k, net)
    if not density.names:
        return NoiseResult(band_low_hz, band_high_hz, 0.0, (), density.missing), None
    points = frequencies.size
    power = density.power[:points]
    integrated = _trapezoid(power, frequencies, axis=0) + power[0] * (start - band_low_hz)
    contributions = sorted(
        (NoiseContribution(name, element, float(math.sqrt(max(value, 0.0))))
         for (name, element), value in zip(density.names, integrated)),
        key=lambda c: -c.vrms)
    total = float(math.sqrt(max(float(np.sum(integrated)), 0.0)))
    result = NoiseResult(band_low_hz, band_high_hz, total, tuple(contributions),
                         density.missing)
    if beyond is None:
        return result, None
    return result, _above_band_figure(density.names, density.power[points:], beyond)


def _above_band_grid(figures, band_high_hz: float) -> np.ndarray | None:
    """The log grid from the band's top to the analysis grid's top (None: no such span)."""
    top = float(figures.frequencies_hz[-1])
    if not band_high_hz or band_high_hz >= top:
        return None
    decades = math.log10(top / band_high_hz)
    points = max(2, int(math.ceil(decades * ABOVE_BAND_POINTS_PER_DECADE)) + 1)
    return with_resonances(figures, np.geomspace(band_high_hz, top, points))


# A pole pair sharper than this gets points of its own in a noise integral. Measured on
# the band-pass |H|^2 = 1/(1 + Q^2 (f/f0 - f0/f)^2) against 3 million points, on the
# log grids used here (200 points over 2 or 4 decades, 40 per decade): without them
# the trapezoid is within 0.25 % up to Q 8, but 2 % off at Q 20 (12 % on 40 per
# decade), and at Q 158 it reads 57-67 % low (or 120 % high); with them it is within
# 0.1 % at Q 8-20, 0.3-0.9 % at Q 158-500 and 2-10 % at Q 5000, always high (a noise
# figure on the safe side). Those are shares of the noise power; the rms is off by half.
RESONANCE_Q = 8.0
RESONANCE_POINTS = 129
RESONANCE_SPAN = 0.5  # the points reach this share of the natural frequency either side


def with_resonances(figures, frequencies: np.ndarray) -> np.ndarray:
    """``frequencies`` (sorted) with points merged in around every pole pair of the stage
    of Q above RESONANCE_Q inside their span: f0 (1 + tan(theta) / (2Q)) for theta
    uniform, so the points fall evenly through a resonance's |H|^2 ~ 1/(1 + (2Q d)^2)
    (d the relative detuning, the standard second-order resonance) from its top into
    its skirts. The stage's natural frequencies are the poles of every noise transfer
    (poles.py), so no resonance of the noise is missed however narrow. Unchanged where
    the stage has none."""
    low, high = float(frequencies[0]), float(frequencies[-1])
    extra = []
    for pole in stage_poles(figures).poles:
        if pole.imag <= 0 or pole.real >= 0:
            continue  # one of each pair; a growing pair has no noise figure to give
        wn = abs(pole)
        q = wn / (-2 * pole.real)
        if q <= RESONANCE_Q:
            continue
        reach = math.atan(2 * q * RESONANCE_SPAN)
        points = wn / (2 * math.pi) * (1 + np.tan(np.linspace(-reach, reach,
                                                              RESONANCE_POINTS)) / (2 * q))
        extra.append(points[(points > low) & (points < high)])
    if not extra or not sum(part.size for part in extra):
        return frequencies
    return np.union1d(frequencies, np.concatenate(extra))


def _above_band_figure(names, power: np.ndarray, frequencies: np.ndarray
                       ) -> tuple[float, float] | None:
    """(rms V, top Hz) of the power (F, m) over the above-band grid."""
    if not names:
        return None
    total = float(_trapezoid(np.sum(power, axis=1), frequencies))
    return math.sqrt(max(total, 0.0)), float(frequencies[-1])
