"""Closed-loop bandwidth against the band, and the gain lost at the band's top."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from checker.analysis.figures import Figures, grid_upper_edges
from checker.analysis.grid import band_points
from checker.analysis.updates import source_gain_candidates
from checker.changes import SetPartParameter, SetValue
from checker.engine import rule
from checker.findings import Severity, Suggestion
from checker.limits import above, below, reaches, within
from checker.preferred import at_least, ladder, smallest_passing
from checker.units import format_si

# An op-amp with this much flat open-loop gain stands in for an ideal one: the error it
# leaves in a closed-loop gain is about 1e-9 of it, far below any tolerance.
IDEAL_GAIN = 1e9


@rule("bandwidth", "warning",
      "The closed-loop bandwidth falls short of the band, or finite loop gain costs gain"
      " at the top of the band.",
      max_gain_error=0.01)
def bandwidth(view):
    """
    What it checks:
        For every signal source, the solved -3 dB upper edge of its closed-loop gain to
        the stage output, 3 dB below the largest gain in the source's band (the
        passband; at DC for a source without a band), each peak pinned down between
        grid points. It must reach the stage's `bandwidth` requirement (error when
        it does not) or, without one, the top of the source's band (warning). Where the
        bandwidth passes and the source gives a band, the gain at the band's top is
        compared with the gain of the same stage built with ideal op-amps (flat
        open-loop gain of 1e9, no poles; the network, its capacitors and the op-amps'
        input capacitances kept): the difference is the error that finite loop gain
        adds there. It must stay within the stage's `gain-tolerance` or, without one,
        `max_gain_error` (warning). On a stage that states a `gain` or a `bandwidth`,
        a solved lower -3 dB edge above the bottom of a source's band (a coupling
        capacitor too small for the band; any lower edge for a band from 0 Hz, whose DC
        a series capacitor blocks) is warned too; without one, a high-pass shapes the
        band on purpose. A stage with an op-amp that has no negative
        feedback is left to the `open-loop` rule.

    Why it matters:
        A single-pole op-amp trades gain for bandwidth: the loop gain falls with
        frequency, and the closed-loop gain falls with it once the loop gain nears the
        noise gain. A stage whose -3 dB edge sits inside the band reads the top of the
        band low by 30 % or more; well before that edge, the gain at the top of the
        band is already short of the mid-band gain the design was computed for.

    How the fix is computed:
        Where the ideal-op-amp stage would reach the bandwidth, the op-amp limits it.
        For a single-pole op-amp the closed-loop bandwidth is about GBW / noise gain,
        so the GBW needed is about the required bandwidth times the noise gain (read
        from the solved loop at mid-band). The rule then scales the limiting op-amp's
        GBW (its open-loop gain and second pole kept) over the E12 values from half
        that estimate to 1000 times it and reports the smallest from which the solved
        bandwidth reaches the limit: every value is first predicted from the current
        solve (a new A(s) is a rank-one change of the nodal matrix: Sherman-Morrison
        identity), and the search starts where the prediction passes for good and
        solves that value and its neighbour in full to confirm; the alternative is a noise gain no higher than GBW / the
        required bandwidth. Where even ideal op-amps fall short, the network itself
        (a feedback capacitor, a source's RC) sets the bandwidth: against a stated
        `bandwidth` requirement the rule says so; against the band's top alone it
        stays quiet, since a filter or an integrator shapes the band on purpose.
        For a cut bottom of the band, the first capacitor (series ones first, then
        those to a fixed net, such as a gain leg's) whose smallest E12 value up to 1000
        times the drawn one, solved, brings the lower edge to the band's bottom. For
        the gain error it reports the loop gain at the band's top and the GBW that
        brings the error within the limit, found the same way over the E12 values
        around the GBW a single pole needs for that error (an edge of
        f / sqrt(1/(1 - e)^2 - 1) times the noise gain); "from which" matters here,
        since a response that peaks can cross the ideal gain at one low GBW only; a bandwidth
        finding on a source with a band names that GBW too, since a -3 dB edge at the
        band's top still leaves the top 30 % low.

    Sources:
        Closed-loop bandwidth about GBW / noise gain for a single-pole op-amp, and the
        closed-loop gain G_ideal * T/(1 + T) with T the loop gain: common practice
        (e.g. Sedra and Smith, Microelectronic Circuits, op-amp chapter).

    Passes:
        (stage level-amp (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 (part gp-bipolar) (in+ in) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 fb gnd 1k) (resistor R2 fb out 10k)
          (source in (amplitude 10mV) (band 0Hz 100Hz))
          (load out (resistance 10k)))

    Fails:
        (stage level-amp (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 (part gp-bipolar) (in+ in) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 fb gnd 1k) (resistor R2 fb out 10k)
          (source in (amplitude 10mV) (band 0Hz 200kHz))
          (load out (resistance 10k)))
    """
    stage, figures = view.stage, view.figures
    if not figures.sources:
        return
    wanted = [sf for sf in figures.sources
              if stage.require.bandwidth_hz or sf.source.band_high_hz]
    if not wanted:
        return
    if any(not _closes(figures.loops[o.ref]) for o in stage.opamps):
        return  # an op-amp without negative feedback: the open-loop rule reports it
    without_gbw = [o for o in stage.opamps if o.part.gbw_hz is None]
    for opamp in without_gbw:
        yield view.cannot_check(f"the bandwidth of {opamp.ref}",
                                f"part {opamp.part.name} gives no GBW", opamp.origin,
                                (opamp.ref,))
    if without_gbw:
        return
    ideal = _Ideal(view)
    for sf in wanted:
        yield from _check_source(view, sf, ideal)


def _closes(loop) -> bool:
    return loop.feedback == "negative" or (loop.feedback == "none" and loop.closes_anywhere)


class _Ideal:
    """The stage with ideal op-amps, solved only as far as a check needs. A gain at one
    frequency of a one-op-amp stage comes from the stage's own solve (an ideal A(s) is a
    rank-one change: updates.source_gain_candidates); anything else from a solved
    copy."""

    def __init__(self, view):
        self.view = view
        self._copy = None
        self._gains: dict[tuple[int, float], complex] = {}

    def _solved_copy(self):
        if self._copy is None:
            self._copy = self.view.reanalyse(_ideal_opamps(self.view.stage))
        return self._copy

    @property
    def sources(self):
        return self._solved_copy().sources

    def gain_at(self, index: int, frequency_hz: float) -> complex:
        key = (index, float(frequency_hz))
        if key not in self._gains:
            opamps = self.view.stage.opamps
            if len(opamps) == 1:
                self._gains[key] = complex(source_gain_candidates(
                    self.view.figures, index, opamps[0].ref,
                    np.full((1, 1), IDEAL_GAIN, dtype=complex), np.array([key[1]]))[0, 0])
            else:
                self._gains[key] = self._solved_copy().gain_at(index, key[1])
        return self._gains[key]


def _ideal_opamps(stage):
    """The stage with every op-amp's gain flat and (nearly) infinite."""
    opamps = tuple(replace(o, part=replace(o.part, open_loop_gain=IDEAL_GAIN, gbw_hz=None,
                                           second_pole_hz=None))
                   for o in stage.opamps)
    return replace(stage, opamps=opamps)


def _limiting_opamp(view):
    """The op-amp whose loop crosses over lowest (the one that runs out of loop gain
    first), among those with negative feedback somewhere."""
    figures = view.figures
    closed = [(figures.loops[o.ref].crossover_hz, i, o) for i, o in enumerate(view.stage.opamps)
              if figures.loops[o.ref].closes_anywhere
              and figures.loops[o.ref].crossover_hz is not None]
    if closed:
        return min(closed)[2]
    return view.stage.opamps[-1]


def _at(frequencies, values, frequency: float):
    """values at the grid point nearest to ``frequency`` on a log scale (band edges are on
    the grid); the lowest point for 0 Hz, a DC reading."""
    if frequency <= 0:
        return values[0]
    return values[int(np.argmin(np.abs(np.log(frequencies / frequency))))]


def _noise_gain(view, opamp, frequency: float) -> float:
    loop = view.figures.loops[opamp.ref]
    return float(abs(_at(view.figures.frequencies_hz, loop.noise_gain, frequency)))


def _with_gbw(stage, ref: str, gbw: float):
    opamps = tuple(replace(o, part=replace(o.part, gbw_hz=gbw)) if o.ref == ref else o
                   for o in stage.opamps)
    return replace(stage, opamps=opamps)


def _smallest_gbw(view, opamp, estimate: float, passes, predict
                  ) -> tuple[float, Figures] | None:
    """The smallest E12 GBW from estimate/2 up to 1000 x the estimate whose solved
    figures pass; (gbw, figures) or None. ``predict(values)`` gives the index to start
    from (see _predictor); the solved figures decide."""
    solved = {}

    def figures_with(gbw):
        if gbw not in solved:
            solved[gbw] = view.reanalyse(_with_gbw(view.stage, opamp.ref, gbw))
        return solved[gbw]

    values = ladder(at_least(estimate / 2, "E12"), estimate * 1000, "E12")
    start = predict(values) if values else None
    best = smallest_passing(values, lambda gbw: passes(figures_with(gbw)), start=start)
    return None if best is None else (best, figures_with(best))


def _predictor(view, opamp, sf, frequencies, judge):
    """predict(values): the index from which every GBW in ``values`` has a gain of
    source ``sf`` at ``frequencies`` that ``judge`` (gains (V, F) -> passing (V,))
    accepts, every candidate's gain from the current solve by rank-one updates
    (updates.source_gain_candidates); the last index when the last fails. From
    that index up, not merely at it: a peaking response can cross the ideal gain at one
    low GBW and leave it again above, and a part's GBW spreads."""
    figures = view.figures
    block = next(b for b in figures.circuit.gain_blocks if b.ref == opamp.ref)
    s = 2j * np.pi * np.asarray(frequencies)

    def predict(values):
        gains = np.stack([block.with_gbw(gbw).gain(s) for gbw in values])
        failing = np.nonzero(~judge(source_gain_candidates(
            figures, sf.index, opamp.ref, gains, np.asarray(frequencies))))[0]
        return min(int(failing[-1]) + 1, len(values) - 1) if failing.size else 0

    return predict


def _check_source(view, sf, ideal):
    stage = view.stage
    source = sf.source
    required = stage.require.bandwidth_hz
    if required:
        severity, reason = Severity.ERROR, "the required bandwidth"
    else:
        required = source.band_high_hz
        severity, reason = Severity.WARNING, f"the top of {source.name}'s band"
    measured = sf.bandwidth_high_hz if sf.bandwidth_high_hz is not None else math.inf
    opamp = _limiting_opamp(view)
    yield from _cut_bottom(view, sf)
    if below(measured, required):
        finding = _short_bandwidth(view, sf, ideal, opamp, measured, required, severity,
                                   reason)
        if finding is not None:
            yield finding
        return
    if source.band_high_hz and not _surely_flat(view, source.band_high_hz):
        yield from _gain_error(view, sf, ideal, opamp)


def _cut_bottom(view, sf):
    """The bottom of a band cut by the stage: the solved lower -3 dB edge (from the
    band's largest gain) above the band's lower edge (any edge, for a band from 0 Hz:
    a series capacitor blocks the DC the band holds), on a stage that states a gain or
    a bandwidth for the signal (without one, a high-pass shapes the band on purpose)."""
    stage, source = view.stage, sf.source
    low, edge = source.band_low_hz or 0.0, sf.bandwidth_low_hz
    stated = stage.require.gain is not None or stage.require.bandwidth_hz is not None
    if not (stated and source.band_high_hz and edge is not None and above(edge, low)):
        return
    figures = view.figures
    band = band_points(figures.frequencies_hz, source)
    if band is None:
        return
    peak = abs(figures.band_peak(stage.output_net, ("source", sf.index), band)[1])
    bottom = abs(figures.dc_transfer(stage.output_net, ("source", sf.index))) if low == 0 \
        else float(abs(_at(figures.frequencies_hz, sf.gain_from_source, low)))
    loss = (f"{20 * math.log10(peak / bottom):.1f} dB below its largest in the band"
            if bottom > 0 else "nothing (the DC is blocked)")
    yield view.finding(
        f"{source.name} reaches the output with its lower -3 dB edge at"
        f" {format_si(edge, 'Hz')}, inside its band from {format_si(low, 'Hz')}: at the"
        f" band's bottom the gain is {loss}", sf.source.origin, elements=(source.name,),
        measured=edge, limit=low, unit="Hz",
        suggestion=lambda: _larger_coupling(view, sf, low),
        loss_db=20 * math.log10(peak / bottom) if bottom > 0 else None,
        **view.answers("gain", "bandwidth"))


def _larger_coupling(view, sf, low: float) -> Suggestion:
    """The first capacitor of the stage (series ones first, then those to a fixed net,
    such as a gain leg's) whose smallest E12 value, up to 1000 times the drawn one,
    brings the solved lower edge to ``low`` or below; each value solved in full. A band
    from 0 Hz has no such value: a series capacitor passes no DC at any size."""
    stage = view.stage
    if low <= 0:
        return Suggestion("the band starts at DC, which a series capacitor blocks at any"
                          " size: couple the signal directly, or state the band from the"
                          " lowest frequency the stage is meant to pass")
    rails = set(stage.rail_voltages)
    for capacitor in sorted(stage.capacitors(), key=lambda c: bool(set(c.nets) & rails)):

        def passes(farads, capacitor=capacitor):
            changed = tuple(replace(p, value=farads) if p.ref == capacitor.ref else p
                            for p in stage.passives)
            edge = view.reanalyse(replace(stage, passives=changed)).sources[sf.index] \
                .bandwidth_low_hz
            return edge is None or not above(edge, low)

        best = smallest_passing(ladder(capacitor.value * 1.0001, capacitor.value * 1000,
                                       "E12"), passes)
        if best is not None:
            return Suggestion(
                f"raise {capacitor.ref} to {format_si(best, 'F')} (E12): the smallest value"
                f" whose solved lower edge reaches {format_si(low, 'Hz')}", value=best,
                unit="F", element=capacitor.ref, changes=(SetValue(capacitor.ref, best),))
    return Suggestion(f"an RC in the signal path sets the edge: move it below"
                      f" {format_si(low, 'Hz')}, or state the band the stage is meant to"
                      " pass")


def _surely_flat(view, top: float) -> bool:
    """True when a one-op-amp stage's loop gain at ``top`` puts the gain error well inside
    the limit, so the ideal-op-amp comparison can be skipped. With one loop the closed-loop
    gain is G_ideal * T/(1 + T) plus a feedthrough term that the network makes tiny
    (asymptotic-gain model; R. D. Middlebrook), so the error is about ||T/(1+T)| - 1|."""
    if len(view.stage.opamps) != 1:
        return False
    limit = _gain_error_limit(view)[0]
    (loop,) = view.figures.loops.values()
    T = complex(_at(view.figures.frequencies_hz, loop.loop_gain, top))
    return abs(T) > 1 and abs(abs(T / (1 + T)) - 1) < limit / 4


def _short_bandwidth(view, sf, ideal, opamp, measured, required, severity, reason):
    source = sf.source
    ideal_sf = ideal.sources[sf.index]
    ideal_bw = ideal_sf.bandwidth_high_hz if ideal_sf.bandwidth_high_hz is not None \
        else math.inf
    message = (f"{source.name} reaches the output with a -3 dB bandwidth of"
               f" {format_si(measured, 'Hz')}, below {reason} ({format_si(required, 'Hz')})")
    if below(ideal_bw, required) and not view.stage.require.bandwidth_hz:
        return None  # the network shapes the band on purpose (a filter, an integrator)
    if below(ideal_bw, required):
        message += (f"; with ideal op-amps it would still be {format_si(ideal_bw, 'Hz')},"
                    " so the network sets it")
        suggestion = Suggestion("the feedback network or the source's RC limits the band:"
                                " lower the feedback capacitance or the resistance it"
                                f" works against until the edge passes {format_si(required, 'Hz')}")
        return view.finding(message, opamp.origin, elements=(opamp.ref, source.name),
                            severity=severity, measured=measured, limit=required, unit="Hz",
                            suggestion=suggestion, ideal_bandwidth_hz=ideal_bw,
                            **view.answers("bandwidth"))
    gbw = opamp.part.gbw_hz
    noise_gain = _noise_gain(view, opamp, sf.reference_hz)
    estimate = required * noise_gain  # closed-loop bandwidth ~ GBW / noise gain
    message += (f"; {opamp.ref}'s {format_si(gbw, 'Hz')} GBW over a noise gain of"
                f" {noise_gain:.3g} leaves about {format_si(gbw / noise_gain, 'Hz')}")

    def passes(result):
        edge = result.sources[sf.index].bandwidth_high_hz
        return edge is None or reaches(edge, required)

    frequencies = view.figures.frequencies_hz
    at = int(np.argmin(np.abs(frequencies - sf.reference_hz)))

    def judge(gains):
        edges = grid_upper_edges(frequencies, gains, at)
        return np.isnan(edges) | (edges >= required)

    found = _smallest_gbw(view, opamp, estimate, passes,
                          _predictor(view, opamp, sf, frequencies, judge))
    most_noise_gain = gbw / required
    if most_noise_gain < noise_gain:
        lower = f"lower the noise gain to about {most_noise_gain:.3g} or less"
    else:  # GBW / NG already reaches the band: the part's other poles limit it, not NG
        lower = (f"the noise gain {noise_gain:.3g} is already within the {most_noise_gain:.3g}"
                 f" a single pole would allow, so {opamp.ref}'s second pole or the"
                 " capacitance at its inputs sets the edge")
    details = {"noise_gain": noise_gain, "ideal_bandwidth_hz": ideal_bw,
               "gbw_estimate_hz": estimate}
    if found is None:
        suggestion = Suggestion(
            f"no GBW up to {format_si(estimate * 1000, 'Hz')} reaches"
            f" {format_si(required, 'Hz')} with {opamp.ref}'s other poles: {lower}")
    else:
        chosen, result = found
        edge = result.sources[sf.index].bandwidth_high_hz
        text = (f"choose a part for {opamp.ref} with a GBW of at least"
                f" {format_si(chosen, 'Hz')} (required bandwidth x noise gain ~"
                f" {format_si(estimate, 'Hz')}; solved -3 dB edge with it"
                f" {format_si(edge, 'Hz') if edge else 'beyond the grid'});"
                f" {'or ' if most_noise_gain < noise_gain else ''}{lower}")
        if source.band_high_hz:
            flat = _gbw_for_gain_error(view, sf, ideal, opamp, noise_gain)
            if flat is not None:
                details["gbw_for_gain_error_hz"] = flat
                text += (f"; for the gain at {format_si(source.band_high_hz, 'Hz')} within"
                         f" {format_si(_gain_error_limit(view)[0], '%')} of the ideal, at"
                         f" least {format_si(flat, 'Hz')}")
        suggestion = Suggestion(text, value=chosen, unit="Hz", element=opamp.ref,
                                changes=(SetPartParameter(opamp.ref, "gbw_hz", chosen),))
    return view.finding(message, opamp.origin, elements=(opamp.ref, source.name),
                        severity=severity, measured=measured, limit=required, unit="Hz",
                        suggestion=suggestion, **details, **view.answers("bandwidth"))


def _gain_error_limit(view) -> tuple[float, str]:
    if view.stage.require.gain_tolerance is not None:
        return view.stage.require.gain_tolerance, "the stage's gain tolerance"
    return view.settings["max_gain_error"], "the default limit"


def _error_at_top(result, ideal, index: int, top: float) -> float:
    """| |G(top)| / |G_ideal(top)| - 1 |, both solved at ``top``."""
    real = abs(result.gain_at(index, top))
    perfect = abs(ideal.gain_at(index, top))
    if perfect == 0 or not math.isfinite(perfect):
        return 0.0
    return float(abs(real / perfect - 1))


def _gbw_for_gain_error(view, sf, ideal, opamp, noise_gain: float) -> float | None:
    """The smallest E12 GBW whose solved gain error at the band's top is within the
    limit. Start: for a single pole, |T/(1+T)| = 1 - e at f needs a closed-loop edge
    near f / sqrt(1/(1-e)^2 - 1), and GBW ~ that edge times the noise gain (common
    practice)."""
    limit = _gain_error_limit(view)[0]
    if limit <= 0:
        return None  # no finite GBW makes the error exactly zero
    top = sf.source.band_high_hz
    edge_needed = top / math.sqrt(1 / (1 - min(limit, 0.5)) ** 2 - 1)
    perfect = abs(ideal.gain_at(sf.index, top))

    def judge(gains):
        if perfect == 0 or not math.isfinite(perfect):
            return np.ones(gains.shape[0], dtype=bool)
        return np.abs(np.abs(gains[:, 0]) / perfect - 1) <= limit

    found = _smallest_gbw(view, opamp, edge_needed * noise_gain,
                          lambda result: _error_at_top(result, ideal, sf.index, top) <= limit,
                          _predictor(view, opamp, sf, [top], judge))
    return None if found is None else found[0]


def _gain_error(view, sf, ideal, opamp):
    figures = view.figures
    source = sf.source
    top = source.band_high_hz
    error = _error_at_top(figures, ideal, sf.index, top)
    limit, reason = _gain_error_limit(view)
    if within(error, limit):
        return
    loop = figures.loops[opamp.ref]
    loop_gain = float(abs(_at(figures.frequencies_hz, loop.loop_gain, top)))
    noise_gain = _noise_gain(view, opamp, top)
    message = (f"at the top of {source.name}'s band ({format_si(top, 'Hz')}) the gain is"
               f" {format_si(error, '%')} off the ideal-op-amp gain, beyond {reason}"
               f" ({format_si(limit, '%')}): {opamp.ref}'s loop gain there is only"
               f" {loop_gain:.3g} against a noise gain of {noise_gain:.3g}")
    chosen = _gbw_for_gain_error(view, sf, ideal, opamp, noise_gain)
    if chosen is None:
        suggestion = Suggestion("lower the noise gain or split the gain over two stages")
    else:
        suggestion = Suggestion(
            f"choose a part for {opamp.ref} with a GBW of at least {format_si(chosen, 'Hz')}"
            f" (solved error with it within {format_si(limit, '%')}), or lower the noise"
            " gain", value=chosen, unit="Hz", element=opamp.ref,
            changes=(SetPartParameter(opamp.ref, "gbw_hz", chosen),))
    yield view.finding(message, opamp.origin, elements=(opamp.ref, source.name),
                       measured=error, limit=limit, unit="%", suggestion=suggestion,
                       loop_gain_at_top=loop_gain, frequency_hz=top)
