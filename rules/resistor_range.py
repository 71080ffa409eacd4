"""Feedback-network resistances too low (they load the output) or too high (bias current,
noise and leakage take over)."""

from __future__ import annotations

import math

from checker.analysis.noise import thermal_density
from checker.changes import SetValue
from checker.engine import rule
from checker.findings import Suggestion
from checker.limits import above, below
from checker.rules._resistor_networks import best_factor, gain_kept, network_of, scaled
from checker.units import format_gain, format_si


@rule("resistor-range", "warning",
      "A feedback-network resistor is so low it loads the output, or so high that bias"
      " current, noise and leakage dominate.",
      min_ohm=1e3, output_current_fraction=0.1, max_bipolar_ohm=1e6, max_fet_ohm=10e6,
      fet_bias_below_a=1e-9, temperature_k=300.0, gain_tolerance=0.01)
def resistor_range(view):
    """
    What it checks:
        Each op-amp's resistor network: the resistors touching its inverting input
        (and a T-network's tee), between its output and its non-inverting input, and
        from its output to a rail (the feedback network), and the other resistors at
        its non-inverting input (its bias). Too low: a feedback-network resistor under
        `min_ohm`, or one on the output whose current at the output extremes (the
        solved DC voltage across it over the sources' ranges, errors included, over R)
        exceeds `output_current_fraction` of the part's output current. Too high: any
        of them above `max_bipolar_ohm`, or `max_fet_ohm` for a part whose bias current
        is under `fet_bias_below_a` (a FET or CMOS input).

    Why it matters:
        A low network draws current the output must supply on top of the load: the
        output sags toward its current limit, swings less, heats the part and adds
        error through the output resistance. A high network turns the bias current
        into an offset (Ib times R), its thermal noise sqrt(4kTR) grows with R, board
        leakage and humidity (megohms across a dirty board) start to set the gain, and
        the input capacitance makes a feedback pole at a low frequency.

    How the fix is computed:
        The whole network is scaled by one factor, which keeps every ratio and so the
        gain: the factor nearest 1 that brings every resistor of the network inside its
        limits, each new value rounded to E96 (1 % parts or better) or E24. The rule
        solves the scaled stage and checks that every source's gain stays within
        `gain_tolerance` (or the stage's `gain-tolerance`) and every resistor within
        its limits; where no single factor fits (the ratio is too wide), it says so and
        suggests a T-network or a second stage. A pull from the output to a rail is
        raised on its own.

    Sources:
        About 1 kOhm to 1 MOhm for bipolar inputs and up to about 10 MOhm for FET and
        CMOS inputs of bias current under about 1 nA; a feedback network drawing a
        small fraction of the output current: common practice. Bias-current error
        Ib*R and thermal noise sqrt(4kTR) (Johnson-Nyquist): e.g. R. Mancini (ed.), Op
        Amps for Everyone, chapters on op-amp parameters and noise.

    Passes:
        (stage turbidity-amp (ground gnd) (supply vcc 5V)
          (opamp U1 (part cmos-rrio) (in+ in) (in- fb) (out out) (v+ vcc) (v- gnd))
          (resistor R1 fb gnd 10k) (resistor R2 fb out 47k)
          (source in (range 0.1V 0.4V) (band 0Hz 10Hz))
          (load out (resistance 100k)))

    Fails:
        (stage turbidity-amp (ground gnd) (supply vcc 5V)
          (opamp U1 (part cmos-rrio) (in+ in) (in- fb) (out out) (v+ vcc) (v- gnd))
          (resistor R1 fb gnd 10) (resistor R2 fb out 47)
          (source in (range 0.1V 0.4V) (band 0Hz 10Hz))
          (load out (resistance 100k)))
    """
    for opamp in view.stage.opamps:
        yield from _check(view, opamp)


def _limits(view, network, resistor, figures=None) -> tuple[float, float, str, str]:
    """(lowest, highest) allowed ohms for ``resistor``, what sets the lowest, and the
    input class; the voltages from ``figures`` (the stage's own by default)."""
    settings, part = view.settings, network.opamp.part
    figures = figures or view.figures
    low, low_reason = 0.0, ""
    if resistor in network.feedback:
        low, low_reason = settings["min_ohm"], "minimum"
    if network.touches_output(resistor) and part.output_current_a:
        volts = _volts_across(figures, network, resistor)
        by_current = volts / (settings["output_current_fraction"] * part.output_current_a)
        if by_current > low:
            low, low_reason = by_current, "current"
    fet = part.bias_current_a is not None and part.bias_current_a < settings["fet_bias_below_a"]
    high = settings["max_fet_ohm"] if fet else settings["max_bipolar_ohm"]
    return low, high, low_reason, "FET/CMOS" if fet else "bipolar"


def _volts_across(figures, network, resistor) -> float:
    """The largest solved DC voltage across ``resistor``, at most the op-amp's supply
    span (an output cannot drive a resistor beyond its rails)."""
    across = figures.difference_range(resistor.net_a, resistor.net_b)
    rails = figures.stage.rail_voltages
    span = rails[network.opamp.v_pos] - rails[network.opamp.v_neg]
    return min(max(abs(across.low), abs(across.high)), span)


def _check(view, opamp):
    stage, settings = view.stage, view.settings
    network = network_of(stage, opamp)
    part = opamp.part
    members = network.feedback + network.bias
    if not members:
        return
    if part.output_current_a is None and any(network.touches_output(r) for r in members):
        yield view.cannot_check(f"the current {opamp.ref}'s output drives into its network",
                                f"part {part.name} gives no output current", opamp.origin,
                                (opamp.ref,))
    limits = {r.ref: _limits(view, network, r) for r in members}
    flagged = []
    for resistor in members:
        low, high, low_reason, kind = limits[resistor.ref]
        if below(resistor.value, low):
            flagged.append((resistor, "low"))
        elif above(resistor.value, high):
            if part.bias_current_a is None and resistor.value <= settings["max_fet_ohm"]:
                yield view.cannot_check(
                    f"whether {resistor.ref} ({format_si(resistor.value, 'Ω')}) is too high"
                    f" for {opamp.ref}", f"part {part.name} gives no bias current, so its"
                    " input class is unknown", resistor.origin, (resistor.ref, opamp.ref))
                continue
            flagged.append((resistor, "high"))
    if not flagged:
        return
    fix = _scale(view, network, limits, flagged)
    for resistor, side in flagged:
        yield _finding(view, network, resistor, side, limits[resistor.ref], fix)


def _finding(view, network, resistor, side, limit, fix):
    figures, settings = view.figures, view.settings
    opamp, part = network.opamp, network.opamp.part
    low, high, low_reason, kind = limit
    value = format_si(resistor.value, "Ω")
    details = {}
    if side == "low" and low_reason == "current":
        volts = _volts_across(figures, network, resistor)
        current = volts / resistor.value
        message = (f"{resistor.ref} ({value}) on {opamp.ref}'s output carries up to"
                   f" {format_si(current, 'A')} ({format_si(volts, 'V')} across it), over"
                   f" {settings['output_current_fraction'] * 100:.0f} % of the part's"
                   f" {format_si(part.output_current_a, 'A')} output current: it loads the"
                   " output")
        details["current_a"] = current
        bound = low
    elif side == "low":
        message = (f"{resistor.ref} ({value}) in {opamp.ref}'s feedback network is below"
                   f" the {format_si(low, 'Ω')} minimum: the output must drive it on top of"
                   " the load")
        bound = low
    else:
        pin = "ib+" if resistor in network.bias else "ib-"
        density = thermal_density(resistor.value, settings["temperature_k"])
        if part.bias_current_a is None:
            error = None
            bias = "the part gives no bias current, so its error there is unknown"
        else:
            error = abs(part.bias_current_a * figures.dc_transfer(opamp.out, (pin, opamp.ref)))
            bias = (f"bias current {format_si(part.bias_current_a, 'A')} makes"
                    f" {format_si(error, 'V')} at the output")
        message = (f"{resistor.ref} ({value}) at {opamp.ref} is above the"
                   f" {format_si(high, 'Ω')} limit for a {kind} input: the {bias}, its"
                   f" thermal noise is {format_si(density, 'V/√Hz')}, and board leakage"
                   " competes with it")
        details.update(bias_error_v=error, thermal_noise_v_per_rthz=density)
        bound = high
    suggestion, values = fix
    if values and resistor.ref in values:
        suggestion = Suggestion(suggestion.text, value=values[resistor.ref], unit="Ω",
                                element=resistor.ref,
                                changes=tuple(SetValue(ref, ohms) for ref, ohms in values.items()))
    return view.finding(message, resistor.origin, elements=(resistor.ref, opamp.ref),
                        measured=resistor.value, limit=bound, unit="Ω",
                        suggestion=suggestion, side=side, kind=kind,
                        scaled=values or {}, **details)


def _scale(view, network, limits, flagged) -> tuple[Suggestion, dict[str, float] | None]:
    """One factor for the whole network, verified with the solver."""
    stage, settings = view.stage, view.settings
    pulls = [r for r, _side in flagged if network.is_output_pull(r)]
    if pulls and len(pulls) == len(flagged):
        resistor = pulls[0]
        low = limits[resistor.ref][0]
        return Suggestion(f"raise {resistor.ref} to at least {format_si(low, 'Ω')}",
                          value=low, unit="Ω", element=resistor.ref,
                          changes=(SetValue(resistor.ref, low),)), None
    members = network.scalable
    k_min = max(limits[r.ref][0] / r.value for r in members)
    k_max = min(limits[r.ref][1] / r.value for r in members)
    refs = ", ".join(r.ref for r in members)
    if k_min > k_max:
        return Suggestion(f"no single factor puts every one of {refs} within its limits"
                          f" (it would have to be at least {k_min:.3g} and at most"
                          f" {format_gain(k_max, 3)}): the ratio is too wide for one stage; use a"
                          " T-network or split the gain over two stages"), None
    tolerance = stage.require.gain_tolerance or settings["gain_tolerance"]
    # A current limit moves with the rounded gain: leave it the gain tolerance of room.
    slack = {r.ref: 1 + tolerance if limits[r.ref][2] == "current" else 1.0 for r in members}
    factor = best_factor(members, k_min, k_max, tolerance, lambda values: all(
        limits[r.ref][0] * slack[r.ref] * (1 - 1e-9) <= values[r.ref]
        <= limits[r.ref][1] * (1 + 1e-9) for r in members))
    if factor is None:
        factor = math.sqrt(k_min * k_max)
    variant, values = scaled(stage, members, factor)
    solved = view.reanalyse(variant)
    kept = gain_kept(view.figures, solved, tolerance)
    inside = all(_inside(view, solved, network, r, values[r.ref]) for r in members)
    listing = ", ".join(f"{ref} {format_si(v, 'Ω')}" for ref, v in values.items())
    if not (kept and inside):
        return Suggestion(f"scaling {refs} by {factor:.3g} ({listing}) does not hold: the"
                          " solved gain or a resistor leaves its limits; redesign the"
                          " network"), None
    return Suggestion(f"scale {refs} by {factor:.3g} to keep the gain: {listing} (E96/E24 by"
                      f" tolerance); solved, every gain stays within"
                      f" {tolerance * 100:g} %"), values


def _inside(view, solved, network, resistor, ohms: float) -> bool:
    """``resistor`` at ``ohms`` within its limits, with the voltages of the solved copy."""
    low, high, _reason, _kind = _limits(view, network, resistor, solved)
    return low * (1 - 1e-9) <= ohms <= high * (1 + 1e-9)
