"""Each resistor's dissipation at the extremes of its voltage against its power rating."""

from __future__ import annotations

from checker.changes import SetPowerRating
from checker.engine import rule
from checker.findings import Severity, Suggestion
from checker.limits import within
from checker.units import format_si

# Common chip and leaded resistor power ratings, in watts (common practice).
RATINGS_W = (0.063, 0.1, 0.125, 0.25, 0.5, 1.0, 2.0)


@rule("resistor-power", "warning",
      "A resistor dissipates more than its derated power rating at the extremes of the"
      " signal.",
      default_rating_w=0.1, derating=0.5)
def resistor_power(view):
    """
    What it checks:
        For every resistor, the largest voltage across it over the sources' declared
        ranges (an AC amplitude counts at its peak over the band), with the worst case
        of offset voltage and bias currents, taken from the solved DC transfer of the
        voltage difference between its two nets. Its dissipation P = V^2/R is compared
        with its `power-rating` times `derating`; a resistor with no rating is taken
        at `default_rating_w` and the message says so. Above the derated rating the
        finding is a warning; above the rating itself, an error. A stage with an op-amp
        that has no negative feedback at DC has no linear operating point, and the rule
        says it could not check.

    Why it matters:
        A resistor run near its rating runs hot: its value drifts with temperature
        (and permanently, with time at temperature), it heats its neighbours on the
        board, including the op-amp and any precision resistor beside it, and beyond
        the rating it fails. Designing to half the rating keeps the part cool in a warm
        enclosure, where ratings fall off with ambient temperature anyway.

    How the fix is computed:
        The rating needed is P / `derating`, rounded up to the next of the common
        ratings 0.063, 0.1, 0.125, 0.25, 0.5, 1 and 2 W. Past 2 W the rule suggests
        raising the resistance or sharing the dissipation among several resistors.

    Sources:
        Joule heating P = V^2/R (C. K. Alexander and M. N. O. Sadiku, Fundamentals of
        Electric Circuits, chapter on basic laws: power; from memory). Derating to about half the
        rated power, and 0.1 W as the rating of a small chip resistor: common practice.
        Rating ladder: common practice for chip and leaded resistors.

    Passes:
        (stage sampler-valve-drive (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 (part gp-bipolar) (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb 200 (power-rating 0.1W))
          (resistor R2 fb out 2k (power-rating 0.25W))
          (source in (range 0V 1.2V) (band 0Hz 10Hz))
          (load out (resistance 100k)))

    Fails:
        (stage sampler-valve-drive (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 (part gp-bipolar) (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb 200 (power-rating 0.1W))
          (resistor R2 fb out 2k (power-rating 0.1W))
          (source in (range 0V 1.2V) (band 0Hz 10Hz))
          (load out (resistance 100k)))
    """
    stage, figures, settings = view.stage, view.figures, view.settings
    derating = settings["derating"]
    unlinear = [o.ref for o in stage.opamps if figures.loops[o.ref].feedback != "negative"]
    if unlinear and stage.resistors():
        yield view.cannot_check("the resistors' dissipation",
                                f"{', '.join(unlinear)} {'has' if len(unlinear) == 1 else 'have'}"
                                " no negative feedback at DC, so the stage has no linear"
                                " operating point to read the voltages from")
        return
    for resistor in stage.resistors():
        across = figures.difference_range(resistor.net_a, resistor.net_b)
        volts = max(abs(across.low), abs(across.high))
        power = volts * volts / resistor.value
        rated = resistor.power_rating_w is not None
        rating = resistor.power_rating_w if rated else settings["default_rating_w"]
        allowed = rating * derating
        if within(power, allowed):
            continue
        severity = Severity.ERROR if power > rating else Severity.WARNING
        written = (f"its {format_si(rating, 'W')} rating" if rated else
                   f"the {format_si(rating, 'W')} assumed for a resistor with no"
                   " power-rating")
        message = (f"{resistor.ref} ({format_si(resistor.value, 'Ω')}) has up to"
                   f" {format_si(volts, 'V')} across it and dissipates"
                   f" {format_si(power, 'W')}, over {derating * 100:.0f} % of {written}"
                   f" ({format_si(allowed, 'W')})")
        if power > rating:
            message += ": beyond the rating itself"
        yield view.finding(message, resistor.origin, elements=(resistor.ref,),
                           severity=severity, measured=power, limit=allowed, unit="W",
                           suggestion=_suggest(resistor, power, derating),
                           volts=volts, rating_w=rating, rated=rated)


def _suggest(resistor, power: float, derating: float) -> Suggestion:
    needed = power / derating
    for rating in RATINGS_W:
        if rating >= needed * (1 - 1e-9):
            return Suggestion(
                f"use a {format_si(rating, 'W')} resistor for {resistor.ref}: it must be"
                f" rated for at least {format_si(needed, 'W')}"
                f" ({format_si(power, 'W')} / {derating:g})",
                value=rating, unit="W", element=resistor.ref,
                changes=(SetPowerRating(resistor.ref, rating),))
    return Suggestion(
        f"{resistor.ref} needs a {format_si(needed, 'W')} rating, beyond"
        f" {format_si(RATINGS_W[-1], 'W')}: raise its resistance, or share the dissipation"
        " among several resistors in series or parallel", element=resistor.ref)
