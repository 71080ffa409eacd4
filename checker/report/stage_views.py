"""What the HTML review draws of a solved stage, as plain data: no drawing here.

Each view gathers, from a stage's Figures and its checked findings, the arrays and
marks one plot shows (checker/report/plots.py draws them), so the numbers a reviewer
sees are the ones the verdicts and rules read: the loop gains and margins of
``figures.loops``, the signal's gain from ``stage_signals``, ``node_range`` for each
op-amp output, the noise of ``stage_noise`` with its density from
``noise.noise_density``, the spreads of ``gain_spread`` / ``rejection_spread``, and
``stage_poles``. A fix whose changes touch a loop is applied to a copy
(``apply_changes``), the copy analysed, and its loop gain kept for the overlay.
"""

from __future__ import annotations

import math
from checker.record import record

import numpy as np

from checker.analysis import analyse
from checker.analysis.loop import Margins
from checker.analysis.noise import noise_band, noise_density
from checker.analysis.poles import stage_poles
from checker.analysis.signal import stage_signals
from checker.analysis.spread import ENUMERATION, SENSITIVITY, SpreadOptions, rejection
from checker.changes import apply_changes
from checker.findings import Finding
from checker.model import Stage
from checker.records import ElementRow
from checker.requirements import (DEFAULT_GAIN_TOLERANCE, differential_pair, gain_spread,
                                  rejection_spread, stage_noise)
from checker.units import format_si

# The rules whose findings are about a loop's stability: their fixes are overlaid on the
# loop they name (a finding's ``loop`` detail, else the op-amps among its elements).
STABILITY_RULES = frozenset({"feedback-pole", "load-isolation", "loop-margin", "stable-gain",
                             "unstable-stage", "swapped-inputs"})
FIXES_PER_LOOP = 2  # overlays beyond two fixes make a plot hard to read
NOISE_POINTS = 60  # points of the noise-density plot (the verdict integrates on its own grid)
NOISE_CONTRIBUTORS = 3  # the largest contributors drawn beside the total


@record(frozen=True)
class LoopCurve:
    label: str
    frequencies_hz: np.ndarray  # (F,)
    loop_gain: np.ndarray  # T, complex (F,)
    margins: Margins
    withheld: bool = False  # a fix the re-check withheld (it brings in an error)


@record(frozen=True)
class LoopView:
    ref: str
    curve: LoopCurve
    fixes: tuple[LoopCurve, ...]


@record(frozen=True)
class ResponseView:
    label: str  # the signal: "conductivity cell", "bridge-a − bridge-b"
    frequencies_hz: np.ndarray
    response: np.ndarray  # the signal's gain from the source(s), complex (F,)
    unit: str  # "V/V" or "Ω"
    band: tuple[float | None, float | None] | None  # the sources' band (low, high)
    reference_hz: float
    gain_window: tuple[float, float] | None  # |gain| limits the requirement allows
    required_bandwidth_hz: float | None
    edges: tuple[float | None, float | None]  # -3 dB edges (low, high)


@record(frozen=True)
class RangeRow:
    label: str  # "U1 out"
    rail_low: float
    rail_high: float
    clip_low: float | None
    clip_high: float | None
    nominal_low: float
    nominal_high: float
    low: float  # with offset and bias errors
    high: float


@record(frozen=True)
class RangeView:
    rows: tuple[RangeRow, ...]
    required_headroom_v: float | None


@record(frozen=True)
class NoiseView:
    frequencies_hz: np.ndarray
    total: np.ndarray  # V/sqrt(Hz), (F,)
    contributors: tuple[tuple[str, float, np.ndarray], ...]  # (name, its rms, density)
    band: tuple[float, float]
    total_vrms: float
    required_vrms: float | None
    missing: tuple[str, ...]


@record(frozen=True)
class SpreadView:
    quantity: str  # "gain" or "cmrr"
    label: str
    samples: np.ndarray  # the Monte Carlo boards' values (gain V/V, or CMRR dB)
    nominal: float
    worst: float
    worst_how: str  # "worst corner" | "first-order worst corner" | "Monte Carlo extreme"
    limits: tuple[float | None, float | None]  # the allowed window (None: open side)
    unit: str  # "V/V" or "dB"


@record(frozen=True)
class PoleView:
    poles: np.ndarray  # rad/s, complex
    stable: bool
    dominant: tuple[float, float] | None  # (natural frequency Hz, damping)


# -- loops -------------------------------------------------------------------------------
def loop_views(stage: Stage, figures, findings: list[Finding]) -> tuple[list[LoopView],
                                                                        list[str]]:
    """One view per op-amp with a loop (with the stability fixes proposed for it), and
    a note for each op-amp without one."""
    views, notes = [], []
    loops = figures.loops
    fixes = _stability_fixes(findings, [o.ref for o in stage.opamps])
    for opamp in stage.opamps:
        loop = loops[opamp.ref]
        if not np.any(np.abs(loop.loop_gain) > 1e-6):
            notes.append(f"{opamp.ref} has no feedback loop to draw")
            continue
        curve = LoopCurve(f"{opamp.ref} loop gain", figures.frequencies_hz, loop.loop_gain,
                          loop.margins)
        overlays = []
        for finding in fixes.get(opamp.ref, [])[:FIXES_PER_LOOP]:
            fixed = _fixed_loop(stage, figures, finding, opamp.ref)
            if fixed is not None:
                overlays.append(fixed)
        views.append(LoopView(opamp.ref, curve, tuple(overlays)))
    return views, notes


def _stability_fixes(findings: list[Finding], refs: list[str]) -> dict[str, list[Finding]]:
    """Per op-amp, the findings about its loop whose fix proposes changes, in report
    order, one per distinct set of changes."""
    found: dict[str, list[Finding]] = {}
    seen: dict[str, set] = {}
    for finding in sorted(findings, key=Finding.sort_key):
        suggestion = finding.suggestion
        if suggestion is None or not suggestion.changes:
            continue
        loop = finding.details.get("loop")
        if loop is None and finding.rule not in STABILITY_RULES:
            continue
        for ref in ([loop] if loop else [e for e in finding.elements if e in refs]):
            if suggestion.changes in seen.setdefault(ref, set()):
                continue
            seen[ref].add(suggestion.changes)
            found.setdefault(ref, []).append(finding)
    return found


def _fixed_loop(stage: Stage, figures, finding: Finding, ref: str) -> LoopCurve | None:
    suggestion = finding.suggestion
    assert suggestion is not None  # _stability_fixes keeps only findings with changes
    try:
        copy = apply_changes(stage, suggestion.changes)
        solved = analyse(copy, figures.options)
        loop = solved.loops[ref]
    except Exception:  # a copy that cannot be solved draws nothing (the report says why)
        return None
    label = f"with the {finding.rule} fix" + (" (withheld)" if suggestion.withheld else "")
    return LoopCurve(label, solved.frequencies_hz, loop.loop_gain, loop.margins,
                     suggestion.withheld)


# -- closed-loop response ----------------------------------------------------------------
def closed_loop_notes(stage: Stage, figures) -> list[str]:
    """Why the stage has no closed-loop response to draw (empty when it has one)."""
    notes = []
    for opamp in stage.opamps:
        loop = figures.loops[opamp.ref]
        if not loop.negative_somewhere:
            notes.append(f"{opamp.ref} has no negative feedback, so the stage has no"
                         " closed-loop response")
    if not notes and not stage_poles(figures).stable:
        notes.append("the stage is unstable, so its small-signal response is not what it"
                     " does")
    return notes


def response_views(stage: Stage, figures) -> tuple[list[ResponseView], list[str]]:
    """One view per signal (from the source itself to the output)."""
    if not stage.sources:
        return [], ["the stage has no source, so no closed-loop response"]
    notes = closed_loop_notes(stage, figures)
    if notes:
        return [], notes
    require = stage.require
    views = []
    for signal in stage_signals(figures):
        sources = [stage.sources[i] for i in signal.sources]
        highs = [s.band_high_hz for s in sources if s.band_high_hz]
        band = None
        if highs:
            lows = [s.band_low_hz for s in sources if s.band_low_hz]
            band = (min(lows) if lows else None, max(highs))
        window = None
        if require.gain is not None and signal.unit == "V/V":
            tolerance = require.gain_tolerance or DEFAULT_GAIN_TOLERANCE
            window = (abs(require.gain) * (1 - tolerance), abs(require.gain) * (1 + tolerance))
        views.append(ResponseView(
            label=signal.label, frequencies_hz=figures.frequencies_hz,
            response=signal.response, unit=signal.unit, band=band,
            reference_hz=signal.reference_hz, gain_window=window,
            required_bandwidth_hz=require.bandwidth_hz,
            edges=(signal.bandwidth_low_hz, signal.bandwidth_high_hz)))
    return views, []


# -- output range ------------------------------------------------------------------------
def range_view(stage: Stage, figures) -> tuple[RangeView | None, list[str]]:
    """Each op-amp output's DC range against its usable swing and its rails."""
    loops = figures.loops
    latched = [o.ref for o in stage.opamps if loops[o.ref].regenerative_at_dc]
    if latched:
        return None, [f"{', '.join(latched)} latches at a rail (regenerative loop), so the"
                      " output has no linear range"]
    rails = stage.rail_voltages
    rows = []
    for opamp in stage.opamps:
        node = figures.node_range(opamp.out)
        rows.append(RangeRow(
            label=f"{opamp.ref} {opamp.out}", rail_low=rails[opamp.v_neg],
            rail_high=rails[opamp.v_pos], clip_low=node.clip_low, clip_high=node.clip_high,
            nominal_low=node.nominal_low, nominal_high=node.nominal_high, low=node.low,
            high=node.high))
    return RangeView(tuple(rows), stage.require.headroom_v), []


# -- noise -------------------------------------------------------------------------------
def noise_view(stage: Stage, figures, temperature_k: float) -> tuple[NoiseView | None,
                                                                     list[str]]:
    """The output noise density over a grid a decade either side of the noise band,
    the band's integrated value (the verdict's) and the largest contributors."""
    band = noise_band(stage)
    if band is None:
        return None, ["no source gives a band and the stage requires no bandwidth, so no"
                      " noise band"]
    result = stage_noise(figures, temperature_k)
    low = band[0] if band[0] > 0 else band[1] * 1e-4
    frequencies = np.geomspace(low / 10, band[1] * 10, NOISE_POINTS)
    density = noise_density(figures, frequencies, temperature_k)
    if not density.names:
        return None, ["the stage output has no noise source to draw"]
    index = {name: k for k, (name, _element) in enumerate(density.names)}
    contributors = tuple((c.name, c.vrms, density.density_of(index[c.name]))
                         for c in result.contributions[:NOISE_CONTRIBUTORS] if c.vrms > 0)
    return NoiseView(frequencies, density.total_v_per_rthz, contributors, band,
                     result.total_vrms, stage.require.noise_v, result.missing), []


# -- spreads -----------------------------------------------------------------------------
def spread_options(settings: dict) -> SpreadOptions:
    """The spread options of a rule's settings (as the verdicts read them)."""
    defaults = SpreadOptions()
    return SpreadOptions(
        default_tolerance=settings.get("default_tolerance", defaults.default_tolerance),
        max_corner_resistors=int(settings.get("max_corner_resistors",
                                              defaults.max_corner_resistors)),
        samples=int(settings.get("samples", defaults.samples)),
        seed=int(settings.get("seed", defaults.seed)))


def spread_views(stage: Stage, figures, findings: list[Finding], settings_of
                 ) -> list[SpreadView]:
    """The gain's spread over the resistors' tolerances where the stage requires a gain
    tolerance, and a differential pair's CMRR spread where it requires a rejection or
    the difference-balance rule reports one: the Monte Carlo boards of the same
    sampler (seed and count from the rule's settings), the worst case marked."""
    views: list[SpreadView] = []
    require = stage.require
    closed = all(figures.loops[o.ref].negative_somewhere for o in stage.opamps)
    if not closed:
        return views
    if require.gain is not None and require.gain_tolerance is not None and require.gain:
        options = spread_options(settings_of("gain-tolerance"))
        for signal in stage_signals(figures):
            if signal.unit != "V/V":
                continue
            spread = gain_spread(figures, signal, options, require.gain)
            refs = spread.refs
            if refs:
                values = spread.solver.samples(refs, spread.tolerances, options, False)
                samples = spread.solver.gains(values)
            else:
                samples = np.array([spread.nominal])
            band = require.gain * require.gain_tolerance
            low, high = sorted((require.gain - band, require.gain + band))
            views.append(SpreadView(
                "gain", signal.label, samples, spread.nominal, spread.worst.gain,
                worst_how(spread.worst),
                (low, high), "V/V"))
    balance = any(f.rule == "difference-balance" and not f.details.get("unchecked")
                  for f in findings)
    if require.cmrr is not None or balance:
        pair = differential_pair(stage_signals(figures))
        if pair is not None:
            options = spread_options(settings_of("difference-balance"))
            solver, refs, tolerances, _assumed, worst = rejection_spread(figures, pair,
                                                                         options)
            if refs:
                h = solver.transfers(solver.samples(refs, tolerances, options, False))
                samples = _db(rejection(h))
            else:
                samples = np.array([_db(solver.nominal_cmrr)])
            limit = require.cmrr if require.cmrr is not None else \
                10 ** (settings_of("difference-balance").get("min_cmrr_db", 40.0) / 20)
            views.append(SpreadView(
                "cmrr", pair.label, samples, float(_db(solver.nominal_cmrr)),
                float(_db(worst.cmrr)),
                worst_how(worst),
                (float(_db(limit)), None), "dB"))
    return views


def worst_how(worst) -> str:
    """A spread's worst case named by how it was found (spread.py's methods)."""
    return {ENUMERATION: "worst corner", SENSITIVITY: "first-order worst corner"}.get(
        worst.method, "Monte Carlo extreme")


def _db(ratio):
    with np.errstate(divide="ignore"):
        return 20 * np.log10(ratio)


# -- poles -------------------------------------------------------------------------------
def pole_view(figures) -> PoleView:
    poles = stage_poles(figures)
    pair = poles.dominant_pair
    return PoleView(poles.poles, poles.stable,
                    (pair.frequency_hz, pair.damping) if pair is not None else None)


# -- element list ------------------------------------------------------------------------
def element_rows(stage: Stage) -> tuple[ElementRow, ...]:
    """The stage's elements as the review lists them, in the order written."""
    rows = []
    for supply in stage.supplies:
        value = format_si(supply.voltage_v, "V")
        if supply.ranged:
            value += f" ({format_si(supply.low_v, 'V')} to {format_si(supply.high_v, 'V')})"
        rows.append(ElementRow(supply.net, "supply", supply.net, value, supply.origin.line))
    for opamp in stage.opamps:
        pins = (f"in+ {opamp.in_pos}, in- {opamp.in_neg}, out {opamp.out},"
                f" v+ {opamp.v_pos}, v- {opamp.v_neg}")
        part = opamp.part
        value = part.name + (f" (GBW {format_si(part.gbw_hz, 'Hz')})" if part.gbw_hz else "")
        rows.append(ElementRow(opamp.ref, "op-amp", pins, value, opamp.origin.line))
    units = {"resistor": "Ω", "capacitor": "F", "inductor": "H"}
    for passive in stage.passives:
        value = format_si(passive.value, units[passive.kind])
        if passive.tolerance:
            value += f" ±{format_si(passive.tolerance, '%')}"
        rows.append(ElementRow(passive.ref, passive.kind, f"{passive.net_a} – {passive.net_b}",
                               value, passive.origin.line))
    for source in stage.sources:
        unit = "V" if source.kind == "voltage" else "A"
        parts = []
        if source.amplitude is not None:
            parts.append(f"±{format_si(source.amplitude, unit)}")
        elif source.low is not None:
            parts.append(f"{format_si(source.low, unit)} to {format_si(source.high, unit)}")
        if source.band_high_hz:
            parts.append(f"band {format_si(source.band_low_hz or 0.0, 'Hz')} to"
                         f" {format_si(source.band_high_hz, 'Hz')}")
        if source.impedance_ohm:
            parts.append(f"impedance {format_si(source.impedance_ohm, 'Ω')}")
        if source.capacitance_f:
            parts.append(f"{format_si(source.capacitance_f, 'F')}")
        rows.append(ElementRow(source.name, f"{source.kind} source", source.net,
                               ", ".join(parts) or "—", source.origin.line))
    for load in stage.loads:
        parts = []
        if load.resistance_ohm:
            parts.append(format_si(load.resistance_ohm, "Ω"))
        if load.capacitance_f:
            parts.append(format_si(load.capacitance_f, "F"))
        if load.feeds_stage:
            parts.append(f"feeds {load.feeds_stage}")
        rows.append(ElementRow(f"load {load.net}", "load", load.net, " ∥ ".join(parts) or "—",
                               load.origin.line))
    return tuple(rows)


def finite(value) -> float | None:
    """A float, or None where it is not finite."""
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None
