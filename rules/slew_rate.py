"""The output's fastest swing against the op-amp's slew rate."""

from __future__ import annotations

import math

import numpy as np

from checker.analysis.grid import band_points
from checker.changes import SetPartParameter
from checker.engine import rule
from checker.findings import Suggestion
from checker.limits import within
from checker.preferred import at_least
from checker.units import format_si


@rule("slew-rate", "error",
      "The fastest output swing the band asks for needs a faster slew rate than the"
      " op-amp has.",
      min_ratio=1.0)
def slew_rate(view):
    """
    What it checks:
        For every op-amp with negative feedback, the steepest output the sources ask
        for: each source that gives a band and a swing (an amplitude, or a range whose
        half-span is taken as the amplitude) drives the op-amp's output with
        Vpeak = half-span x |transfer| read from the solved AC response, and a sine of
        that peak at frequency f needs a slew rate of 2 pi f Vpeak. The rule takes the
        largest 2 pi f Vpeak over each source's band (the top of the band unless the
        response peaks inside it) and adds the sources up (their steepest moments may
        meet). It flags a part whose slew rate is below that times `min_ratio`.

    Why it matters:
        Past its slew rate an op-amp cannot follow the signal: a sine turns into a
        triangle, the amplitude and phase at the output are wrong, and the distortion
        does not show as clipping at a rail, so it is easy to miss. The full-power
        bandwidth SR / (2 pi Vpeak) is the highest frequency at which the part delivers
        that swing undistorted.

    How the fix is computed:
        The rule reports the slew rate needed (rounded up to an E12 figure, as a
        target for choosing a part), the largest undistorted output peak at the
        frequency that asks most, SR / (2 pi f), and the full-power bandwidth at the
        swing asked for, SR / (2 pi Vpeak): choose a faster part, or keep the swing or
        the band within those.

    Sources:
        Slew-rate limit 2 pi f Vpeak and full-power bandwidth SR / (2 pi Vpeak): any
        op-amp text (e.g. Sedra and Smith, Microelectronic Circuits, op-amp chapter);
        adding the sources' slopes as a worst case: common practice.

    Passes:
        (stage hydrophone-line-driver (ground gnd) (supply vcc 12V) (supply vee -12V)
          (opamp U1 (part jfet-input) (in+ in) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 fb gnd 10k) (resistor R2 fb out 100k)
          (source in (amplitude 500mV) (band 100Hz 20kHz) (impedance 1k))
          (load out (resistance 10k)))

    Fails:
        (stage hydrophone-line-driver (ground gnd) (supply vcc 12V) (supply vee -12V)
          (opamp U1 (part gp-bipolar) (in+ in) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 fb gnd 10k) (resistor R2 fb out 100k)
          (source in (amplitude 500mV) (band 100Hz 20kHz) (impedance 1k))
          (load out (resistance 10k)))
    """
    stage, figures, settings = view.stage, view.figures, view.settings
    for opamp in stage.opamps:
        loop = figures.loops[opamp.ref]
        if not (loop.feedback == "negative" or (loop.feedback == "none"
                                                and loop.closes_anywhere)):
            continue  # an op-amp without negative feedback: the open-loop rule
        demands = _demands(figures, opamp.out)
        if not demands:
            continue
        part = opamp.part
        if part.slew_rate_v_per_s is None:
            yield view.cannot_check(f"the slew rate of {opamp.ref}",
                                    f"part {part.name} gives no slew rate", opamp.origin,
                                    (opamp.ref,))
            continue
        needed = sum(rate for rate, _f, _v, _source in demands)
        limit = part.slew_rate_v_per_s
        if within(needed * settings["min_ratio"], limit):
            continue
        rate, frequency, peak, source = max(demands, key=lambda d: d[0])
        largest_peak = limit / (2 * math.pi * frequency)
        full_power = limit / (2 * math.pi * peak)
        message = (f"{opamp.ref} must slew {_per_us(needed)} but its part gives"
                   f" {_per_us(limit)}: {source.name} swings its output"
                   f" {format_si(peak, 'V')} peak at {format_si(frequency, 'Hz')}; at that"
                   f" frequency the output stays undistorted only up to"
                   f" {format_si(largest_peak, 'V')} peak, and a {format_si(peak, 'V')} swing"
                   f" only up to {format_si(full_power, 'Hz')} (full-power bandwidth)")
        target = at_least(needed * settings["min_ratio"], "E12")
        suggestion = Suggestion(
            f"choose a part for {opamp.ref} with a slew rate of at least"
            f" {_per_us(target)}, or keep the output under"
            f" {format_si(largest_peak, 'V')} peak at {format_si(frequency, 'Hz')}",
            value=target, unit="V/s", element=opamp.ref,
            changes=(SetPartParameter(opamp.ref, "slew_rate_v_per_s", target),))
        yield view.finding(message, opamp.origin, elements=(opamp.ref, source.name),
                           measured=needed, limit=limit, unit="V/s", suggestion=suggestion,
                           output_peak_v=peak, frequency_hz=frequency,
                           largest_peak_v=largest_peak, full_power_bandwidth_hz=full_power)


def _per_us(volts_per_second: float) -> str:
    """A slew rate as data sheets print it: '0.889 V/µs'."""
    return f"{volts_per_second / 1e6:.3g} V/µs"


def _demands(figures, net: str) -> list[tuple]:
    """(2 pi f Vpeak, f, Vpeak, source) per source with a band and a swing: the largest
    rate of change the source asks of ``net`` over its band, Vpeak from the solved AC
    transfer times the source's half-span, a peak between grid points pinned down."""
    frequencies = figures.frequencies_hz
    found = []
    for index, source in enumerate(figures.stage.sources):
        if not source.band_high_hz or source.low is None:
            continue
        half = (source.high - source.low) / 2
        if half <= 0:
            continue
        band = band_points(frequencies, source)
        if band is None:
            continue
        at, value = figures.band_peak(net, ("source", index), band,
                                      weight=lambda f: 2 * np.pi * f)
        peak = half * abs(value)
        found.append((2 * np.pi * at * peak, at, peak, source))
    return found
