"""The heaviest load an op-amp's output drives, for the part's stated headroom.

A part states its output headroom into a load (`headroom-load`); a heavier load (a
smaller resistance) makes it swing less. The output drives its declared loads and the
feedback network together: an inverting stage's feedback resistor ends at a virtual
ground and loads the output as a resistor to ground would (Ohm's law on the solved
incremental currents, figures.output_loads), which a glance at the load alone misses.
Only in-phase current counts: a capacitive load's current is zero at the voltage's peak,
where the headroom is decided.
"""

from __future__ import annotations

from checker.units import format_si

# A load up to this much heavier than the part's headroom-load is taken as that load:
# the output stage's drop moves with its current by less than the spread between parts
# of a class (the project's choice). A load of exactly headroom-load with a feedback
# network across it is always a little heavier, and that is what the figure is for.
LOAD_ALLOWANCE = 0.10


def heaviest_load(figures, opamp) -> tuple[float, str] | None:
    """(ohms, what it is, as text) of the heaviest resistive load on ``opamp``'s output:
    a declared load on its net, or the load and feedback network together as the signal
    moves the output, whichever is lower; None if there is neither."""
    # (ohms, 0 for a declared load, 1 for the solved one, text): a tie keeps the load's
    # plainer text
    found = [(load.resistance_ohm, 0,
              f"{opamp.out} carries {format_si(load.resistance_ohm, 'Ω')}")
             for load in figures.stage.loads if load.net == opamp.out and load.resistance_ohm]
    driven = figures.output_loads.get(opamp.ref) if figures.solvable else None
    if driven is not None:
        found.append((driven, 1, f"{opamp.out} drives {format_si(driven, 'Ω')} as the signal"
                      " moves it (its load and feedback network together)"))
    if not found:
        return None
    ohms, _kind, text = min(found)
    return ohms, text


def heavier_than_rated(figures, opamp) -> str | None:
    """The heaviest load's text where it is heavier than the load ``opamp``'s part states
    its headroom into, by more than LOAD_ALLOWANCE; None where it is not, or the part
    states none."""
    rated = opamp.part.headroom_load_ohm
    heaviest = heaviest_load(figures, opamp)
    if not rated or heaviest is None or heaviest[0] >= rated * (1 - LOAD_ALLOWANCE):
        return None
    return heaviest[1]
