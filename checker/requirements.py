"""Requirements first: every stated requirement of a stage answered from its solved
figures, whatever rule would explain a failure.

Each keyword of `require` gets one :class:`~checker.records.Verdict`: met, not met, or
could not check (with the reason). The figures are read from the signal's side
(checker/analysis/signal.py): the gain from the source itself, the input resistance
the source sees, the bandwidth of the signal's gain. The cause rules explain and fix a
verdict that is not met; they never decide alone whether a requirement holds.
Documented in docs/format.md ("require" and "How requirements are judged").
"""

from __future__ import annotations

import math
from collections.abc import Callable

from checker.analysis.dc_error import dc_error_terms
from checker.analysis.figures import signed_gain
from checker.analysis.mna import SingularCircuit
from checker.analysis.noise import noise_band, noise_in_and_above_band
from checker.analysis.poles import stage_poles
from checker.analysis.signal import SignalFigures, stage_signals
from checker.output_load import heavier_than_rated
from checker.analysis.spread import (GainSpread, SpreadOptions, method_note, method_text,
                                     resistor_tolerances)
from checker.limits import reaches, within
from checker.model import Stage
from checker.records import MET, NOT_MET, UNCHECKED, Verdict
from checker.units import format_si

# With `gain` and no `gain-tolerance`, the nominal gain must be within this of it: a gain
# set by 1 % resistors is good to about 1 % nominal (common practice).
DEFAULT_GAIN_TOLERANCE = 0.01
# Above this ratio of the noise up to the top of the analysis to the noise in the band,
# the noise verdict says what an unfiltered output carries (6 dB: common practice).
WIDEBAND_NOTE_RATIO = 2.0
# Settings read from the rules that explain these requirements, so both read alike.
SPREAD_RULES = {"gain-tolerance": "gain-tolerance", "cmrr": "difference-balance"}


class _Context:
    """One stage's figures as the judges read them, each computed once."""

    def __init__(self, stage: Stage, figures, settings_of: Callable[[str], dict]):
        self.stage, self.figures, self.settings_of = stage, figures, settings_of
        self._signals: list[SignalFigures] | None = None

    @property
    def signals(self) -> list[SignalFigures]:
        if self._signals is None:
            self._signals = stage_signals(self.figures)
        return self._signals

    def open_loops(self) -> list[str]:
        """Why closed-loop figures mean nothing here: one text per op-amp whose loop has
        no negative feedback at any frequency (empty when every loop closes)."""
        found = []
        for opamp in self.stage.opamps:
            loop = self.figures.loops[opamp.ref]
            if loop.negative_somewhere:
                continue
            kind = ("positive feedback" if loop.feedback == "positive"
                    else "no negative feedback")
            found.append(f"{opamp.ref} has {kind} (loop gain at DC {loop.loop_gain_dc:.3g}),"
                         " so the stage has no closed-loop figure")
        if not found:
            found.extend(self.unstable())
        return found

    def unstable(self) -> list[str]:
        """Why no closed-loop figure holds on a stage whose natural frequencies grow."""
        poles = stage_poles(self.figures)
        if poles.stable:
            return []
        frequency = poles.oscillation_hz()
        return [f"the stage oscillates near {format_si(frequency, 'Hz')}" if frequency
                else "the stage runs away (a growing real natural frequency)"]

    def spread_options(self, keyword: str) -> SpreadOptions:
        settings = self.settings_of(SPREAD_RULES[keyword])
        defaults = SpreadOptions()
        return SpreadOptions(
            default_tolerance=settings.get("default_tolerance", defaults.default_tolerance),
            max_corner_resistors=int(settings.get("max_corner_resistors",
                                                  defaults.max_corner_resistors)),
            samples=int(settings.get("samples", defaults.samples)),
            seed=int(settings.get("seed", defaults.seed)))

    def verdict(self, keyword: str, status: str, required: str, statement: str, *,
                measured=None, limit=None, unit=None, reason=None) -> Verdict:
        origin = self.stage.require.origin_of(keyword) or self.stage.origin
        return Verdict(requirement=keyword, status=status, required=required,
                       statement=statement, path=origin.path, line=origin.line,
                       column=origin.column, measured=_finite(measured),
                       limit=_finite(limit), unit=unit, reason=reason)


def _finite(value):
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def judge_requirements(stage: Stage, figures, settings_of: Callable[[str], dict]
                       ) -> list[Verdict]:
    """One verdict per stated requirement, in the format's order."""
    context = _Context(stage, figures, settings_of)
    verdicts = []
    for keyword in stage.require.stated():
        try:
            verdicts.append(JUDGES[keyword](context))
        except SingularCircuit as error:
            verdicts.append(context.verdict(keyword, UNCHECKED, _required(stage, keyword),
                                            "the stage cannot be solved",
                                            reason=f"the stage cannot be solved: {error}"))
    return verdicts


def _required(stage: Stage, keyword: str) -> str:
    """The requirement as a reader writes it."""
    r = stage.require
    if keyword == "gain":
        return f"{r.gain:.4g} ±{format_si(r.gain_tolerance or DEFAULT_GAIN_TOLERANCE, '%')}"
    if keyword == "gain-tolerance":
        return f"±{format_si(r.gain_tolerance, '%')}"
    if keyword == "input-resistance":
        return f"≥ {format_si(r.input_resistance_ohm, 'Ω')}"
    if keyword == "bandwidth":
        return f"≥ {format_si(r.bandwidth_hz, 'Hz')}"
    if keyword == "phase-margin":
        return f"≥ {r.phase_margin_deg:.3g}°"
    if keyword == "headroom":
        return f"≥ {format_si(r.headroom_v, 'V')}"
    if keyword == "dc-error":
        return f"≤ {format_si(r.dc_error_v, 'V')}"
    if keyword == "noise":
        return f"≤ {format_si(r.noise_v, 'V')} rms"
    assert r.cmrr is not None  # the one keyword left, asked for only when stated
    return f"≥ {_db(r.cmrr):.1f} dB"


def _db(ratio: float) -> float:
    return math.inf if math.isinf(ratio) else 20 * math.log10(ratio)


def _where(signal: SignalFigures) -> str:
    return "at DC" if signal.reference_hz <= 0 else f"at {format_si(signal.reference_hz, 'Hz')}"


def _gain_text(value: float, unit: str) -> str:
    return f"{value:.4g}" if unit == "V/V" else format_si(value, unit)


# -- the judges ----------------------------------------------------------------------------
def _gain(c: _Context) -> Verdict:
    r = c.stage.require
    required, band = r.gain, r.gain_tolerance or DEFAULT_GAIN_TOLERANCE
    assert required is not None  # a judge runs only for a stated requirement
    text = _required(c.stage, "gain")
    if not c.signals:
        return c.verdict("gain", UNCHECKED, text, "no source", reason="the stage has no source"
                         " to take the gain from")
    if required == 0:
        return c.verdict("gain", UNCHECKED, text, "a gain of 0", reason="a required gain of 0"
                         " cannot be held to a relative tolerance")
    current = _current_signal(c)
    if current:
        return c.verdict("gain", UNCHECKED, text, "a transimpedance", reason=current)
    blocked = c.open_loops()
    if blocked:
        return c.verdict("gain", NOT_MET, text, "no closed-loop gain", reason="; ".join(blocked))
    worst: tuple[float, float, SignalFigures] | None = None
    for signal in c.signals:
        gain = signed_gain(signal.gain)
        error = abs(gain / required - 1)
        if worst is None or error > worst[0]:
            worst = (error, gain, signal)
    assert worst is not None  # c.signals is not empty (checked above)
    error, gain, signal = worst
    statement = f"gain from {signal.label} {_gain_text(gain, signal.unit)} {_where(signal)}"
    reason = None
    if signal.gain_from_net is not None:
        from_net = signed_gain(signal.gain_from_net)
        if abs(from_net - gain) > 1e-3 * abs(gain):
            statement += f" (from its net {_gain_text(from_net, signal.unit)})"
    met = within(error, band)
    if not met:
        reason = (f"{format_si(error, '%', 4)} from the required {required:.4g}, beyond"
                  f" ±{format_si(band, '%')}")
        if signal.gain_from_net is not None and within(
                abs(signed_gain(signal.gain_from_net) / required - 1), band):
            source = c.stage.sources[signal.sources[0]]
            sf = c.figures.sources[signal.sources[0]]
            reason += (f": the stage's {format_si(abs(sf.input_impedance_mid), 'Ω')} input"
                       f" against {source.name}'s {format_si(source.impedance_ohm, 'Ω')}"
                       " impedance loses the rest")
    return c.verdict("gain", MET if met else NOT_MET, text, statement, measured=gain,
                     limit=required, unit=signal.unit, reason=reason)


def _current_signal(c: _Context) -> str | None:
    """Why a voltage gain cannot be read: a signal from a current source."""
    names = [s.label for s in c.signals if s.unit != "V/V"]
    if not names:
        return None
    return (f"{names[0]} is a current source: its gain is a transimpedance (V/A), and"
            " `gain` states a voltage gain")


def _gain_tolerance(c: _Context) -> Verdict:
    r = c.stage.require
    text = _required(c.stage, "gain-tolerance")
    if r.gain is None:
        return c.verdict("gain-tolerance", UNCHECKED, text, "no gain stated",
                         reason="the stage states no gain for the tolerance to hold around")
    if not c.signals:
        return c.verdict("gain-tolerance", UNCHECKED, text, "no source",
                         reason="the stage has no source to take the gain from")
    if r.gain == 0:
        return c.verdict("gain-tolerance", UNCHECKED, text, "a gain of 0",
                         reason="a required gain of 0 cannot be held to a relative tolerance")
    current = _current_signal(c)
    if current:
        return c.verdict("gain-tolerance", UNCHECKED, text, "a transimpedance", reason=current)
    blocked = c.open_loops()
    if blocked:
        return c.verdict("gain-tolerance", NOT_MET, text, "no closed-loop gain",
                         reason="; ".join(blocked))
    assert r.gain_tolerance is not None  # a judge runs only for a stated requirement
    worst: SignalSpread | None = None
    for signal in c.signals:
        spread = gain_spread(c.figures, signal, c.spread_options("gain-tolerance"), r.gain)
        if worst is None or spread.worst.error > worst.worst.error:
            worst = spread
    assert worst is not None  # c.signals is not empty (checked above)
    how = method_text(worst.worst, worst.options.samples)
    statement = (f"gain from {worst.signal.label} {worst.worst.gain:.4g} {how} of the"
                 f" resistors' tolerances (nominal {worst.nominal:.4g})"
                 + method_note(worst.worst))
    met = within(worst.worst.error, r.gain_tolerance)
    reason = None if met else (f"{format_si(worst.worst.error, '%', 4)} from the required"
                               f" {r.gain:.4g}")
    return c.verdict("gain-tolerance", MET if met else NOT_MET, text, statement,
                     measured=worst.worst.error, limit=r.gain_tolerance, unit="%",
                     reason=reason)


class SignalSpread:
    """A signal's gain spread over the resistors' tolerances: worst case and the
    resistors that matter (shared by the verdict and the gain-tolerance rule)."""

    def __init__(self, figures, signal: SignalFigures, options: SpreadOptions,
                 required: float):
        self.signal, self.options, self.required = signal, options, required
        self.solver = GainSpread(figures, signal.weights, signal.reference_hz)
        self.tolerances, assumed = resistor_tolerances(figures.stage, options.default_tolerance)
        self.refs = self.solver.sensitive([p.ref for p in figures.stage.resistors()],
                                          self.tolerances)
        self.assumed = [ref for ref in assumed if ref in self.refs]
        self.nominal = self.solver.nominal
        self.worst = self.solver.worst_gain(self.refs, self.tolerances, required, options)


def gain_spread(figures, signal: SignalFigures, options: SpreadOptions, required: float
                ) -> SignalSpread:
    """The spread of ``signal``'s gain, computed once per stage and settings."""
    return figures.cached(("gain-spread", signal.weights, options, required),
                          lambda: SignalSpread(figures, signal, options, required))


def _input_resistance(c: _Context) -> Verdict:
    required = c.stage.require.input_resistance_ohm
    assert required is not None  # a judge runs only for a stated requirement
    text = _required(c.stage, "input-resistance")
    voltage = [sf for sf in c.figures.sources if sf.source.kind == "voltage"]
    if not voltage:
        return c.verdict("input-resistance", UNCHECKED, text, "no voltage source",
                         reason="input resistance is what a voltage source sees, and the"
                         " stage has none")
    worst = min(voltage, key=lambda sf: sf.input_resistance_min)
    where = "at DC" if worst.reference_hz <= 0 and not worst.source.band_high_hz \
        else "over its band"
    statement = (f"{worst.source.name} sees {format_si(worst.input_resistance_min, 'Ω')}"
                 f" {where}")
    met = reaches(worst.input_resistance_min, required)
    return c.verdict("input-resistance", MET if met else NOT_MET, text, statement,
                     measured=worst.input_resistance_min, limit=required, unit="Ω",
                     reason=None if met else f"below the required {format_si(required, 'Ω')}")


def _bandwidth(c: _Context) -> Verdict:
    required = c.stage.require.bandwidth_hz
    assert required is not None  # a judge runs only for a stated requirement
    text = _required(c.stage, "bandwidth")
    if not c.signals:
        return c.verdict("bandwidth", UNCHECKED, text, "no source",
                         reason="the stage has no source to take the bandwidth from")
    blocked = c.open_loops()
    if blocked:
        return c.verdict("bandwidth", NOT_MET, text, "no closed-loop bandwidth",
                         reason="; ".join(blocked))
    top = float(c.figures.frequencies_hz[-1])
    edges = [(s.bandwidth_high_hz if s.bandwidth_high_hz is not None else math.inf, s)
             for s in c.signals]
    edge, signal = min(edges, key=lambda item: item[0])
    shown = format_si(edge, "Hz") if math.isfinite(edge) else \
        f"beyond {format_si(top, 'Hz')} (the analysis grid's top)"
    statement = f"-3 dB bandwidth of {signal.label} {shown}"
    met = reaches(edge, required)
    no_gbw = [f"part {o.part.name} of {o.ref} gives no GBW" for o in c.stage.opamps
              if o.part.gbw_hz is None]
    if met and no_gbw:  # the op-amp's own limit on the edge is unknown, so no pass
        return c.verdict("bandwidth", UNCHECKED, text, statement, measured=edge,
                         limit=required, unit="Hz",
                         reason="; ".join(no_gbw) + ", so the op-amp's limit on the"
                         " bandwidth is unknown")
    return c.verdict("bandwidth", MET if met else NOT_MET, text, statement,
                     measured=edge, limit=required, unit="Hz",
                     reason=None if met else f"short of the required {format_si(required, 'Hz')}")


def _phase_margin(c: _Context) -> Verdict:
    required = c.stage.require.phase_margin_deg
    assert required is not None  # a judge runs only for a stated requirement
    text = _required(c.stage, "phase-margin")
    failing, unchecked, margins = [], [], []
    for opamp in c.stage.opamps:
        loop = c.figures.loops[opamp.ref]
        if opamp.part.gbw_hz is None:
            unchecked.append(f"part {opamp.part.name} of {opamp.ref} gives no GBW")
            continue
        if not loop.negative_somewhere:
            kind = "positive feedback" if loop.feedback == "positive" else "no negative feedback"
            failing.append((-math.inf, f"{opamp.ref} has {kind}: no phase margin to speak of"))
            continue
        margin = loop.phase_margin_deg
        if margin is None:
            unchecked.append(f"{opamp.ref}'s loop gain does not fall through 1 from above on"
                             " the analysis grid")
            continue
        margins.append((margin, opamp.ref))
        if not reaches(margin, required):
            failing.append((margin, f"{opamp.ref} has {margin:.1f}°"))
    statement = ", ".join(f"{ref} {margin:.1f}°" for margin, ref in margins) or "no margin read"
    for reason in c.unstable():
        failing.append((-math.inf, reason))
    worst = min((m for m, _ref in margins), default=None)
    if failing:
        measured = min(m for m, _text in failing)
        return c.verdict("phase-margin", NOT_MET, text, "phase margin " + statement,
                         measured=measured if math.isfinite(measured) else None,
                         limit=required, unit="°",
                         reason="; ".join(t for _m, t in failing) + f", under {required:.3g}°")
    if unchecked:
        return c.verdict("phase-margin", UNCHECKED, text, "phase margin " + statement,
                         measured=worst, limit=required, unit="°", reason="; ".join(unchecked))
    return c.verdict("phase-margin", MET, text, "phase margin " + statement, measured=worst,
                     limit=required, unit="°")


def _headroom(c: _Context) -> Verdict:
    required = c.stage.require.headroom_v
    assert required is not None  # a judge runs only for a stated requirement
    text = _required(c.stage, "headroom")
    stage, figures = c.stage, c.figures
    if all(source.low is None for source in stage.sources):
        return c.verdict("headroom", UNCHECKED, text, "no source range",
                         reason="no source gives a range or an amplitude, so the output's"
                         " extremes are unknown")
    floating = figures.floating_nets
    worst, unknown, skipped = None, [], []
    for opamp in stage.opamps:
        if {opamp.in_pos, opamp.in_neg} & floating:
            skipped.append(f"{opamp.ref} has an input with no DC path")
            continue
        if figures.loops[opamp.ref].feedback != "negative":
            skipped.append(f"{opamp.ref} has no negative feedback at DC")
            continue
        node = figures.node_range(opamp.out)
        margin = min(node.clip_high - node.high, node.low - node.clip_low)
        if opamp.part.output_headroom_high_v is None or opamp.part.output_headroom_low_v is None:
            unknown.append(f"part {opamp.part.name} of {opamp.ref} gives no output headroom"
                           " (the rails were used)")
        heavier = heavier_than_rated(figures, opamp)  # as rail-headroom notes
        if heavier:
            unknown.append(f"{heavier}, a heavier load than the"
                           f" {format_si(opamp.part.headroom_load_ohm, 'Ω')} part"
                           f" {opamp.part.name} states its headroom into, so it swings less")
        if worst is None or margin < worst[0]:
            worst = (margin, opamp, node)
    if worst is None:
        return c.verdict("headroom", UNCHECKED, text, "no output to judge",
                         reason="; ".join(skipped))
    margin, opamp, node = worst
    statement = (f"{opamp.ref} output {format_si(node.low, 'V')} to {format_si(node.high, 'V')}"
                 f" against a usable {format_si(node.clip_low, 'V')} to"
                 f" {format_si(node.clip_high, 'V')}: margin {format_si(margin, 'V')}")
    if not reaches(margin, required):
        return c.verdict("headroom", NOT_MET, text, statement, measured=margin,
                         limit=required, unit="V",
                         reason=("it clips" if margin < 0 else "closer to a clip level than"
                                 f" {format_si(required, 'V')}"))
    if unknown or skipped:
        return c.verdict("headroom", UNCHECKED, text, statement, measured=margin,
                         limit=required, unit="V",
                         reason="; ".join(unknown + skipped))
    return c.verdict("headroom", MET, text, statement, measured=margin, limit=required,
                     unit="V")


def _dc_error(c: _Context) -> Verdict:
    required = c.stage.require.dc_error_v
    assert required is not None  # a judge runs only for a stated requirement
    text = _required(c.stage, "dc-error")
    stage, figures = c.stage, c.figures
    for opamp in stage.opamps:
        if figures.loops[opamp.ref].feedback != "negative":
            return c.verdict("dc-error", UNCHECKED, text, "no DC operating point",
                             reason=f"{opamp.ref} has no negative feedback at DC, so its"
                             " output has no defined DC level")
        if {opamp.in_pos, opamp.in_neg} & figures.floating_nets:
            return c.verdict("dc-error", UNCHECKED, text, "no DC operating point",
                             reason=f"{opamp.ref} has an input with no DC path")
    terms = dc_error_terms(figures, stage.output_net)
    total = sum(t.total for t in terms)
    statement = f"worst-case DC error at the output ±{format_si(total, 'V')}"
    missing = [f"part {t.opamp.part.name} of {t.opamp.ref} gives no {', '.join(t.missing)}"
               for t in terms if t.missing]
    if not within(total, required):
        return c.verdict("dc-error", NOT_MET, text, statement, measured=total, limit=required,
                         unit="V", reason=f"beyond the required ±{format_si(required, 'V')}"
                         + (" even without " + "; ".join(missing) if missing else ""))
    if missing:
        return c.verdict("dc-error", UNCHECKED, text, statement, measured=total,
                         limit=required, unit="V", reason="; ".join(missing))
    return c.verdict("dc-error", MET, text, statement, measured=total, limit=required,
                     unit="V")


def stage_noise(figures, temperature_k: float):
    """The stage output's noise over its noise band (None without a band), once."""
    both = _stage_noise_and_above(figures, temperature_k)
    return None if both is None else both[0]


def _stage_noise_and_above(figures, temperature_k: float):
    """(the band's NoiseResult, noise_above_band's figure or None), once per stage and
    temperature, from one solve (None without a band)."""
    band = noise_band(figures.stage)
    if band is None:
        return None
    return figures.cached(("noise", band, temperature_k), lambda: noise_in_and_above_band(
        figures, band[0], band[1], temperature_k))


def _noise(c: _Context) -> Verdict:
    required = c.stage.require.noise_v
    assert required is not None  # a judge runs only for a stated requirement
    text = _required(c.stage, "noise")
    temperature_k = c.settings_of("noise").get("temperature_k", 300.0)
    result = stage_noise(c.figures, temperature_k)
    if result is None:
        return c.verdict("noise", UNCHECKED, text, "no band",
                         reason="no source gives a band and the stage requires no bandwidth")
    statement = (f"output noise {format_si(result.total_vrms, 'V')} rms over"
                 f" {format_si(result.band_low_hz, 'Hz')} to {format_si(result.band_high_hz, 'Hz')}"
                 + _wideband_note(c.figures, result, temperature_k))
    missing = [f"{ref} gives no noise density" for ref in result.missing]
    if not within(result.total_vrms, required):
        return c.verdict("noise", NOT_MET, text, statement, measured=result.total_vrms,
                         limit=required, unit="V",
                         reason=f"above the required {format_si(required, 'V')} rms")
    if missing:
        return c.verdict("noise", UNCHECKED, text, statement, measured=result.total_vrms,
                         limit=required, unit="V", reason="; ".join(missing))
    return c.verdict("noise", MET, text, statement, measured=result.total_vrms,
                     limit=required, unit="V")


def _wideband_note(figures, result, temperature_k: float) -> str:
    """What the output carries up to the top of the analysis, when that is well beyond
    the band's figure: the requirement holds over the band, and whatever follows the
    stage sees the rest unless a filter limits it (not part of the verdict)."""
    above = _stage_noise_and_above(figures, temperature_k)[1]
    if above is None:
        return ""
    rms, top = above
    wide = math.sqrt(result.total_vrms ** 2 + rms ** 2)
    if not wide > WIDEBAND_NOTE_RATIO * result.total_vrms:
        return ""
    return (f"; up to {format_si(top, 'Hz')} the output carries"
            f" {format_si(wide, 'V')} rms, which what follows sees unless a filter"
            " limits it")


def differential_pair(signals: list[SignalFigures]) -> SignalFigures | None:
    return next((s for s in signals if s.pair), None)


def rejection_spread(figures, pair: SignalFigures, options: SpreadOptions):
    """(solver, varied resistors, tolerances, assumed, worst) of a pair's CMRR, once."""
    def compute():
        solver = GainSpread(figures, pair.weights, pair.reference_hz)
        tolerances, assumed = resistor_tolerances(figures.stage, options.default_tolerance)
        refs = solver.sensitive([p.ref for p in figures.stage.resistors()], tolerances)
        return solver, refs, tolerances, [r for r in assumed if r in refs], \
            solver.worst_rejection(refs, tolerances, options)

    return figures.cached(("rejection-spread", pair.weights, options), compute)


def _cmrr(c: _Context) -> Verdict:
    required = c.stage.require.cmrr
    assert required is not None  # a judge runs only for a stated requirement
    text = _required(c.stage, "cmrr")
    pair = differential_pair(c.signals)
    if pair is None:
        return c.verdict("cmrr", UNCHECKED, text, "no differential pair",
                         reason="the stage has no differential pair of sources (two voltage"
                         " sources whose transfers have opposite signs), so it has no"
                         " common mode to reject")
    blocked = c.open_loops()
    if blocked:
        return c.verdict("cmrr", NOT_MET, text, "no closed loop", reason="; ".join(blocked))
    _solver, _refs, _tolerances, _assumed, worst = rejection_spread(
        c.figures, pair, c.spread_options("cmrr"))
    how = method_text(worst, c.spread_options("cmrr").samples)
    shown = "infinite" if math.isinf(worst.cmrr) else f"{_db(worst.cmrr):.1f} dB"
    statement = (f"common-mode rejection of {pair.label} {shown} {how} of the resistors"
                 + method_note(worst))
    met = reaches(worst.cmrr, required)
    return c.verdict("cmrr", MET if met else NOT_MET, text, statement,
                     measured=_db(worst.cmrr), limit=_db(required), unit="dB",
                     reason=None if met else f"below the required {_db(required):.1f} dB")


JUDGES: dict[str, Callable[[_Context], Verdict]] = {
    "gain": _gain, "gain-tolerance": _gain_tolerance, "input-resistance": _input_resistance,
    "bandwidth": _bandwidth, "phase-margin": _phase_margin, "headroom": _headroom,
    "dc-error": _dc_error, "noise": _noise, "cmrr": _cmrr,
}
