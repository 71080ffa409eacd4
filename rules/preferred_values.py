"""Resistor and capacitor values that are not preferred numbers for their tolerance."""

from __future__ import annotations

import cmath
import math

from checker.analysis.figures import signed_gain
from checker.analysis.updates import source_gain_with_each
from checker.changes import Change, SetTolerance, SetValue
from checker.engine import rule
from checker.findings import Suggestion
from checker.limits import within
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
        an op-amp input or in its feedback network the rule puts that value into a
        copy of the stage, solves it again and states the gain the stage then has
        beside the present one. Where that value costs a stated requirement (a gain
        moved out of its tolerance), the nearest E96 value in a 1 % part is offered
        instead when the re-check with every rule finds it clean.

    Sources:
        IEC 60063, preferred number series for resistors and capacitors (E12, E24,
        E96). The tolerance-to-series pairing (E96 for 1 %, E24 for 5 %, E12 for
        10 %) and the stocking of E24 values in 1 %: common practice.

    Passes:
        (stage turbidity-amp (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 (part gp-bipolar) (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb 10k (tolerance 1%)) (resistor R2 fb out 47k (tolerance 1%))
          (source in (range -0.2V 0.2V) (band 0Hz 10Hz))
          (load out (resistance 100k)))

    Fails:
        (stage turbidity-amp (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 (part gp-bipolar) (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb 10k (tolerance 1%)) (resistor R2 fb out 46.3k (tolerance 1%))
          (source in (range -0.2V 0.2V) (band 0Hz 10Hz))
          (load out (resistance 100k)))
    """
    stage, settings = view.stage, view.settings
    inputs = ({o.in_neg for o in stage.opamps} | {o.in_pos for o in stage.opamps}) \
        - set(stage.rail_voltages)
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
        if within(abs(closest / passive.value - 1), settings["match_tolerance"]):
            continue
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
        yield view.finding(message, passive.origin, elements=(passive.ref,),
                           measured=passive.value, limit=closest, unit=unit,
                           suggestion=lambda passive=passive, closest=closest, unit=unit:
                           _alternatives(view, passive, closest, unit, inputs),
                           series=series)


def _alternatives(view, passive, closest: float, unit: str, inputs) -> list[Suggestion]:
    """The nearest value of its own series, then (for a 5 % resistor that sets a gain)
    the nearest E96 value in a 1 % part, which keeps the gain closer: the engine offers
    the first whose re-check is clean."""
    found = [_use(view, passive, closest, unit, inputs, None)]
    if passive.kind == "resistor" and set(passive.nets) & inputs and \
            (passive.tolerance is None or passive.tolerance > 0.01):
        precise = nearest(passive.value, "E96")
        if abs(precise / passive.value - 1) < abs(closest / passive.value - 1):
            found.append(_use(view, passive, precise, unit, inputs, 0.01))
    return found


def _use(view, passive, value: float, unit: str, inputs, tolerance) -> Suggestion:
    part = f"a 1 % part of {format_si(value, unit, 4)} (E96)" if tolerance else \
        format_si(value, unit, 4)
    text = f"use {part} for {passive.ref}"
    if passive.kind == "resistor" and set(passive.nets) & inputs:
        before, after = _gains(view, passive.ref, value)
        if before is not None and after is not None and \
                abs(after - before) > 1e-6 * abs(before):
            text += f": the solved gain is then {after:.4g} (now {before:.4g})"
    changes: tuple[Change, ...] = (SetValue(passive.ref, value),)
    if tolerance:
        changes += (SetTolerance((passive.ref,), tolerance),)
    return Suggestion(text, value=value, unit=unit, element=passive.ref, changes=changes)


def _gains(view, ref: str, ohms: float) -> tuple[float | None, float | None]:
    """The stage's signal gain (first source, at its reference) now and with ``ref`` at
    ``ohms``: a rank-one update of the present solve (checker/analysis/updates.py), no
    copy of the stage."""
    if not view.stage.sources or not view.figures.solvable:
        return None, None
    main = view.figures.sources[0]
    resistor = view.stage.element(ref)
    # both from the same solve (a DC reference is read a micro-hertz above it)
    before, after = (complex(g) for g in source_gain_with_each(
        view.figures, 0, [(resistor.net_a, resistor.net_b, 0.0),
                          (resistor.net_a, resistor.net_b, 1 / ohms - 1 / resistor.value)],
        max(main.reference_hz, 1e-6)))
    if not (cmath.isfinite(before) and cmath.isfinite(after)):
        return None, None
    return signed_gain(before), signed_gain(after)
