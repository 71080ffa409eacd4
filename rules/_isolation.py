"""Shared by the load-isolation and loop-margin rules: the isolation resistor between an
op-amp's output and a capacitive load, found over every E24 value.

Not a rule module (the leading underscore keeps the loader away from it).
"""

from __future__ import annotations

from checker.analysis.search import conductance_change, element_search
from checker.changes import IsolateOutput, SetValue, free_designator
from checker.findings import Suggestion
from checker.preferred import ladder
from checker.units import format_si
from checker.variants import with_isolation_resistor, with_resistance

HIGHEST_OHM = 10e3


def isolation(view, opamp, load, series, target: float, limited_by: str | None = None
              ) -> Suggestion | None:
    """An isolation resistor (or the series resistor already there, raised) whose solved
    phase margin reaches ``target``: the smallest E24 value that does, or the best
    reachable one with its margin (the margin need not rise with the resistance:
    isolating a resistive load raises the crossover). ``limited_by`` names what else
    holds the margin down, for the best-reachable text. None: no value closes the loop."""
    stage = view.stage
    start = series.value * 1.0001 if series else 1.0
    values = ladder(start, HIGHEST_OHM, "E24")
    if not values:
        return None
    # One copy of the stage with the resistor at the first value; every other value is a
    # rank-one change of it, predicted on the grid and confirmed exactly.
    ref = series.ref if series else free_designator(stage, "R")
    base_stage = (with_resistance(stage, series.ref, values[0]) if series else
                  with_isolation_resistor(stage, opamp.out, values[0], ref))
    base = view.margins_of(base_stage)
    resistor = base_stage.element(ref)
    found = element_search(base, opamp.ref, resistor.net_a, resistor.net_b, values,
                           conductance_change(resistor.value), target)
    if found is None:
        return None
    best = found.value
    where = (f"raise {series.ref} to {format_si(best, 'Ω')} (E24)" if series else
             f"put {format_si(best, 'Ω')} ({ref}, E24) in series between {opamp.out} and the"
             " load")
    if found.reaches:
        text = f"{where}, feedback taken before it: solved phase margin {found.margin_deg:.0f}°"
    else:
        why = f" ({limited_by})" if limited_by else ""
        text = (f"no isolation resistor up to {format_si(HIGHEST_OHM, 'Ω')} reaches"
                f" {target:.0f}°{why}; the best is to {where}, feedback taken before it,"
                f" for a solved phase margin of {found.margin_deg:.0f}°")
    if load.resistance_ohm:
        error = best / (best + load.resistance_ohm)
        text += (f"; into the {format_si(load.resistance_ohm, 'Ω')} load it costs"
                 f" {error * 100:.2g} % of DC accuracy")
    changes = (SetValue(series.ref, best),) if series else \
        (IsolateOutput(opamp.out, ref, best),)
    return Suggestion(text, value=best, unit="Ω", element=ref, changes=changes)


def driven_loads(stage, opamp) -> list[tuple]:
    """(load, series resistor or None) for each capacitive load on this op-amp's output or
    behind one resistor from it."""
    found = []
    for load in stage.loads:
        if not load.capacitance_f:
            continue
        if load.net == opamp.out:
            found.append((load, None))
            continue
        series = [p for p in stage.resistors() if set(p.nets) == {opamp.out, load.net}]
        if series:
            found.append((load, series[0]))
    return found
