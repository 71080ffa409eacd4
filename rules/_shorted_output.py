"""An op-amp whose loop fails only because a load all but shorts its output.

A load far below the part's output resistance divides the loop gain by about
R_out / R_load (the open-loop output resistance in series with the load: voltage
divider), so a follower into micro-ohms has a loop gain below 1 and reads as having no
negative feedback. Its fault is the load, not the use as a comparator: the open-loop rule
leaves such an op-amp to the output-current rule, which reports the short.
"""

from __future__ import annotations

from dataclasses import replace


def shorted_by_load(view, opamp):
    """(loads on the output, the stage's figures without any load) when ``opamp``'s loop
    has no negative feedback with the stage's loads and has it without them; else None.
    Solves a copy only where the loop gain at DC is below 1 and does not close above."""
    loop = view.figures.loops[opamp.ref]
    if loop.negative_somewhere or loop.feedback == "positive":
        return None
    loads = [load for load in view.stage.loads if load.net == opamp.out]
    if not loads:
        return None
    # the copy is the same for every op-amp and both rules that ask: solved once
    unloaded = view.figures.cached("without-loads",
                                   lambda: view.reanalyse(replace(view.stage, loads=())))
    if not unloaded.solvable or unloaded.loops[opamp.ref].feedback != "negative":
        return None
    return loads, unloaded
