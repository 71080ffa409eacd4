"""Integrated output noise over the source's band against the stage's noise requirement."""

from __future__ import annotations

import math
from dataclasses import replace

from checker.analysis.noise import noise_band, output_noise
from checker.changes import SetValue, UsePart
from checker.engine import rule
from checker.findings import Suggestion
from checker.limits import within
from checker.parts.library import builtin_parts
from checker.requirements import stage_noise
from checker.rules._resistor_networks import gain_change, network_of, rounded
from checker.units import format_si

MAX_TRIES = 30  # solved candidates per suggestion


@rule("noise", "error",
      "The integrated output noise over the source's band exceeds the stage's noise"
      " requirement.",
      temperature_k=300.0, gain_tolerance=0.01, lowest_factor=0.01)
def noise(view):
    """
    What it checks:
        For a stage with a `noise` requirement, the rms noise at the output integrated
        over the sources' band (lowest to highest band edge; the `bandwidth`
        requirement when no source gives a band): the thermal noise sqrt(4kTR) of every
        resistor, the source's impedance and the load at `temperature_k`, and each
        op-amp's input voltage and current noise, each carried to the output by its own
        transfer from the solver (integrated with points of its own around every
        natural frequency of the stage sharper than Q 8, so a narrow resonance's
        noise is not lost between grid points). Above the requirement is an error,
        reported at the largest contributor. An op-amp whose part gives no noise
        density cannot be counted: the rule says so, and still reports a total that
        already fails.

    Why it matters:
        Noise sets the smallest signal the stage can resolve. Resistors chosen for
        convenience (tens of kilohms where a few would do), a wide band with nothing to
        limit it, or a micropower part with a high noise density can each swamp a small
        sensor signal, and nothing in a DC or gain check shows it.

    How the fix is computed:
        The largest contributor must fall to sqrt(limit^2 - the others^2). A resistor's
        thermal noise at the output goes as the square root of its value, so its value
        (with the rest of its op-amp's resistor network, by one factor, to keep the
        gain) falls by the square of that ratio; the rule rounds to E96 or E24 and
        steps down until the solved noise meets the limit with every gain within
        `gain_tolerance`, down to `lowest_factor` (a noise set by a capacitor, kT/C,
        does not fall with R, and the rule then says so; where a smaller network
        meets the noise only by moving a gain, as a source impedance in series with
        the input resistor makes it, the rule says by how much). An op-amp's noise needs a
        density lowered by that ratio: the rule names the built-in part classes that
        have it and run from the stage's supplies, and solves the stage with each,
        least change first. The source's own impedance noise can only be cut by a
        narrower band, by the square of the ratio.

    Sources:
        Johnson-Nyquist thermal noise 4kTR (k exact in the SI since 2019, CODATA);
        noise sources uncorrelated, powers added; op-amp noise model with en and in at
        the input: R. Mancini (ed.), Op Amps for Everyone, chapter on op-amp noise
        theory. Equivalent noise bandwidth of a single pole, 1.57 f(-3 dB):
        T. Sobering, "Equivalent Noise Bandwidth", Technote 1. 300 K: common practice.

    Passes:
        (stage level-amp (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 (part gp-bipolar) (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
          (source in (range -1V 1V) (band 0Hz 10kHz) (impedance 1k))
          (load out (resistance 100k))
          (require (noise 5uV)))

    Fails:
        (stage level-amp (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 (part gp-bipolar) (in+ in) (in- out) (out out) (v+ vcc) (v- vee))
          (source in (range -1V 1V) (band 0Hz 10kHz) (impedance 1k))
          (load out (resistance 100k))
          (require (noise 1uV)))
    """
    stage, figures, settings = view.stage, view.figures, view.settings
    limit = stage.require.noise_v
    if limit is None:
        return
    band = noise_band(stage)
    where = stage.require.origin or stage.origin
    if band is None:
        yield view.cannot_check("the output noise", "no source gives a band and the stage"
                                " requires no bandwidth", where)
        return
    low, high = band
    result = stage_noise(figures, settings["temperature_k"])  # the verdict's own figure
    for ref in result.missing:
        opamp = stage.element(ref)
        yield view.cannot_check(f"the noise of {ref}", f"part {opamp.part.name} gives no"
                                " voltage-noise or current-noise density, so its noise is"
                                " left out of the total", opamp.origin, (ref,))
    total = result.total_vrms
    if within(total, limit):
        return
    largest = result.largest
    origin, element = _place(stage, largest.element)
    share = (largest.vrms / total) ** 2
    message = (f"output noise over {format_si(low, 'Hz')} to {format_si(high, 'Hz')} is"
               f" {format_si(total, 'V')} rms, above the required {format_si(limit, 'V')};"
               f" the largest contributor is {largest.name}: {format_si(largest.vrms, 'V')}"
               f" rms, {share * 100:.0f} % of the noise power")
    if result.missing:
        message += f" (at least: {', '.join(result.missing)} not counted)"
    contributions = {c.name: c.vrms for c in result.contributions[:6]}
    yield view.finding(message, origin or where, elements=(element,), measured=total,
                       limit=limit, unit="V",
                       suggestion=lambda: _suggest(view, result, limit, band),
                       largest=largest.name, contributions=contributions,
                       band_low_hz=low, band_high_hz=high, **view.answers("noise"))


def _place(stage, element: str):
    """(origin, name) of a contributor: a part, or a source's impedance, or a load."""
    try:
        return stage.element(element).origin, element
    except KeyError:
        pass
    for source in stage.sources:
        if element == f"{source.name} impedance":
            return source.origin, source.name
    for load in stage.loads:
        if element == f"load {load.net}":
            return load.origin, element
    return None, element


def _target(result, limit: float) -> float:
    """What the largest contributor must fall to for the total to meet ``limit``."""
    largest = result.largest.vrms
    rest = max(result.total_vrms ** 2 - largest ** 2, 0.0)
    return math.sqrt(max(limit ** 2 - rest, 0.0))


def _suggest(view, result, limit: float, band) -> Suggestion:
    stage = view.stage
    largest = result.largest
    target = _target(result, limit)
    if target <= 0:
        rest = math.sqrt(max(result.total_vrms ** 2 - largest.vrms ** 2, 0.0))
        return Suggestion(f"even without {largest.name} the other sources give"
                          f" {format_si(rest, 'V')} rms: narrow the band or lower several"
                          " contributors")
    ratio = target / largest.vrms
    try:
        item = stage.element(largest.element)
    except KeyError:
        item = None
    if item is not None and getattr(item, "kind", None) == "resistor":
        return _smaller_network(view, item, ratio ** 2, limit, band)
    if item is not None and largest.name.endswith("voltage noise"):
        return _quieter_part(view, item, "voltage_noise_v_per_rthz", ratio, limit, band)
    if item is not None and "current noise" in largest.name:
        return _quieter_part(view, item, "current_noise_a_per_rthz", ratio, limit, band)
    low, high = band
    narrower = low + (high - low) * ratio ** 2
    return Suggestion(f"{largest.name} is noise the stage cannot lower: narrow the band"
                      f" to about {format_si(narrower, 'Hz')} (noise power goes with the"
                      " bandwidth) with a filter pole", value=narrower, unit="Hz")


def _noise_of(view, variant, band) -> tuple[float, object]:
    solved = view.reanalyse(variant)
    return output_noise(solved, band[0], band[1], view.settings["temperature_k"]).total_vrms, \
        solved


def _smaller_network(view, resistor, factor: float, limit: float, band) -> Suggestion:
    stage, settings = view.stage, view.settings
    group = [resistor]
    for opamp in stage.opamps:
        members = network_of(stage, opamp).scalable
        if resistor in members:
            group = list(members)
            break
    tolerance = stage.require.gain_tolerance or settings["gain_tolerance"]
    refs = ", ".join(r.ref for r in group)
    tried = 0
    previous = None
    gain_lost = None  # (values, noise, worst gain change) of a quiet enough candidate
    k = factor
    while k >= settings["lowest_factor"] * factor and tried < MAX_TRIES:
        values = rounded(group, k)
        k /= 1.1  # about one E24 step at a time
        if values == previous:
            continue
        previous = values
        tried += 1
        passives = tuple(replace(p, value=values[p.ref]) if p.ref in values else p
                         for p in stage.passives)
        total, solved = _noise_of(view, replace(stage, passives=passives), band)
        if not within(total, limit):
            continue
        change = gain_change(view.figures, solved)
        if change > tolerance:
            gain_lost = gain_lost or (values, total, change)
        else:
            listing = _listing(values)
            scale = values[resistor.ref] / resistor.value
            return Suggestion(f"lower {refs} by a factor {1 / scale:.3g} ({listing}, E96/E24"
                              f" by tolerance, every gain kept): solved noise then"
                              f" {format_si(total, 'V')} rms", value=values[resistor.ref],
                              unit="Ω", element=resistor.ref,
                              changes=tuple(SetValue(ref, v) for ref, v in values.items()))
    if gain_lost is not None:
        values, total, change = gain_lost
        listing = _listing(values)
        return Suggestion(f"lowering {refs} ({listing}) brings the solved noise to"
                          f" {format_si(total, 'V')} rms but moves a signal gain by"
                          f" {format_si(change, '%')}, beyond ±{format_si(tolerance, '%')}:"
                          " the resistances in series with the input resistor (a source's"
                          " impedance) do not scale with it; choose the smaller network"
                          " for the gain with them, or narrow the band", element=resistor.ref)
    return Suggestion(f"lowering {refs} does not bring the solved noise under"
                      f" {format_si(limit, 'V')}: the noise is set by a capacitor (kT/C) or"
                      " by the gain; narrow the band or move the filter pole",
                      element=resistor.ref)


def _listing(values: dict[str, float]) -> str:
    return ", ".join(f"{ref} {format_si(v, 'Ω')}" for ref, v in values.items())


def _quieter_part(view, opamp, attribute: str, ratio: float, limit: float,
                  band) -> Suggestion:
    stage = view.stage
    present = getattr(opamp.part, attribute)
    needed = present * ratio
    unit = "V/√Hz" if attribute.startswith("voltage") else "A/√Hz"
    what = "voltage" if attribute.startswith("voltage") else "current"
    rails = stage.rail_voltages
    span = rails[opamp.v_pos] - rails[opamp.v_neg]
    classes = [part for part in builtin_parts().values()
               if getattr(part, attribute) is not None and getattr(part, attribute) <= needed
               and (part.supply_min_v or 0.0) <= span <= (part.supply_max_v or math.inf)]
    classes.sort(key=lambda part: -getattr(part, attribute))  # least change first
    for part in classes[:MAX_TRIES]:
        opamps = tuple(replace(o, part=part) if o.ref == opamp.ref else o for o in stage.opamps)
        total, _solved = _noise_of(view, replace(stage, opamps=opamps), band)
        if within(total, limit):
            return Suggestion(f"{opamp.ref} needs a {what}-noise density of at most"
                              f" {format_si(needed, unit)} (now {format_si(present, unit)}):"
                              f" the built-in class {part.name} has"
                              f" {format_si(getattr(part, attribute), unit)} and runs from"
                              f" {format_si(span, 'V')}; solved noise with it"
                              f" {format_si(total, 'V')} rms", value=needed, unit=unit,
                              element=opamp.ref, changes=(UsePart(opamp.ref, part),))
    return Suggestion(f"{opamp.ref} needs a {what}-noise density of at most"
                      f" {format_si(needed, unit)} (now {format_si(present, unit)}); no"
                      " built-in class that runs from these supplies meets it: choose a"
                      " lower-noise part or narrow the band", value=needed, unit=unit,
                      element=opamp.ref)
