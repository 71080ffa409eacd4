"""Resistor and capacitor values that are not preferred numbers for their tolerance."""

from __future__ import annotations

import cmath
import math

from checker.analysis.figures import signed_gain
from checker.analysis.updates import source_gain_with_each
from checker.engine import rule
from checker.findings import Suggestion
from checker.preferred import nearest, series_for_tolerance
from checker.units import format_si

# A part of a given tolerance is stocked in its own series and in the coarser ones: a
# 1 % resistor comes in E96 values and also in the E24 values (common practice).
ACCEPTED = {"E96": ("E96", "E24", "E12"), "E24": ("E24", "E12"), "E12": ("E12",)}
UNITS = {"resistor": "Ω", "capacitor": "F"}


@rule("preferred-values", "info",
      "A resistor or capacitor value is not in the preferred-number series its tolerance"
      " implies.",
      match_tolerance=1e-4)
def preferred_values(view):
    """
    What it checks:
        Every resistor and capacitor value against the IEC 60063 series its tolerance
        implies: E96 for 1 % or better, E24 up to 5 %, E12 above. A resistor without a
        tolerance is taken as E24 (a 5 % part); a capacitor without one as E12. A
        part of a tight tolerance may also take a value from a coarser series (a 1 %
        resistor in an E24 value is a stock part). A value within `match_tolerance`
        (relative) of a member counts as that member.

    Why it matters:
        A value outside the series is not stocked: the board is either built with a
        different value than the review saw, or needs a series or parallel pair, or a
        tighter and dearer part. Better to choose the value, and see what it does to
        the gain, while the design is still on paper.

    How the fix is computed:
        The nearest member (on a log scale) of the accepted series. For a resistor at
        an op-amp input or in its feedback network the rule solves the stage with that
        value (a rank-one update of the present solve, one per resistor, exact to
        rounding) and states the gain the stage then has beside the present one.

    Sources:
        IEC 60063, preferred number series for resistors and capacitors (E12, E24,
        E96). The tolerance-to-series pairing (E96 for 1 %, E24 for 5 %, E12 for
        10 %) and the stocking of E24 values in 1 %: common practice.
    """
    stage, settings = view.stage, view.settings
    inputs = ({o.in_neg for o in stage.opamps} | {o.in_pos for o in stage.opamps}) \
        - set(stage.rail_voltages)
    found = []
    for passive in stage.passives:
        if passive.kind not in UNITS:
            continue
        if passive.kind == "capacitor" and passive.tolerance is None:
            series = "E12"
        else:
            series = series_for_tolerance(passive.tolerance)
        accepted = ACCEPTED[series]
        closest = min((nearest(passive.value, s) for s in accepted),
                      key=lambda v: abs(math.log(v / passive.value)))
        if abs(closest / passive.value - 1) > settings["match_tolerance"]:
            found.append((passive, series, accepted, closest))
    gains = _gains(view, [(p, closest) for p, _s, _a, closest in found
                          if p.kind == "resistor" and set(p.nets) & inputs])
    for passive, series, accepted, closest in found:
        unit = UNITS[passive.kind]
        names = " or ".join(accepted[:2]) if series == "E96" else series
        if passive.tolerance is not None:
            tolerance = format_si(passive.tolerance, "%")
            why = f"({tolerance}), not a value of {names}, the series a {tolerance} {passive.kind}"
            why += " comes in"
        else:
            why = (f"(no tolerance stated), not a value of {names}, the series taken for a"
                   f" {passive.kind} without one")
        message = (f"{passive.ref} is {format_si(passive.value, unit, 4)} {why}; the nearest"
                   f" is {format_si(closest, unit, 4)}")
        text = f"use {format_si(closest, unit, 4)} for {passive.ref}"
        if passive.ref in gains:
            before, after = gains[passive.ref]
            if abs(after - before) > 1e-6 * abs(before):
                text += f": the solved gain is then {after:.4g} (now {before:.4g})"
        yield view.finding(message, passive.origin, elements=(passive.ref,),
                           measured=passive.value, limit=closest, unit=unit,
                           suggestion=Suggestion(text, value=closest, unit=unit,
                                                 element=passive.ref),
                           series=series)


def _gains(view, changes) -> dict[str, tuple[float, float]]:
    """The stage's mid-band gain (first source) now and with each resistor of
    ``changes`` [(resistor, ohms), ...] alone at its new value, by designator: one solve
    for them all (a rank-one update per resistor, checker/analysis/updates.py)."""
    if not changes or not view.stage.sources or not view.figures.solvable:
        return {}
    main = view.figures.sources[0]
    after = source_gain_with_each(
        view.figures, 0, [(p.net_a, p.net_b, 1 / ohms - 1 / p.value) for p, ohms in changes],
        main.reference_hz)
    before = signed_gain(main.gain_mid)
    return {p.ref: (before, signed_gain(complex(gain)))
            for (p, _ohms), gain in zip(changes, after) if cmath.isfinite(gain)}
