"""Assumptions made where a netlist's board ends."""

from __future__ import annotations

from checker.engine import rule


@rule("boundary-assumed", "info",
      "A net leaves the board: its source or load is an assumption, not a declaration.")
def boundary_assumed(view):
    """
    What it checks:
        Stages extracted from a netlist (docs/netlist.md) meet the board's edge where a
        net leaves it: a net with one connection in the whole netlist, or a pin of a
        `(connector NAME)` instance. Unless the netlist map declares what is there with
        `(at-net NET (source ...))` or `(at-net NET (load ...))`, the extraction assumes
        an ideal voltage source of unknown range for a net that leads into a stage, and
        no load for a net that hangs off an output. Each assumption is a finding at the
        net's first netlist line. The assumed source's label says so too, so every rule
        that reports on that source names the assumption.

    Why it matters:
        The source's impedance and range and the load's resistance and capacitance
        decide loading, clipping, output current and stability with a capacitive load.
        A rule that uses an assumed ideal source or a missing load can pass a stage that
        the real sensor or cable would fail, and rules that need a range cannot check.

    How the fix is computed:
        Nothing to compute: declare the source or load in the netlist map, for example
        `(at-net sensor (source (range 0V 1V) (impedance 1k)))` or `(at-net logger
        (load (resistance 100k) (capacitance 1n)))`.

    Sources:
        The default assumptions are documented in docs/netlist.md (common practice:
        an ideal source and an unloaded output are the optimistic ends of each).

    Passes:
        * Heronpost level amplifier
        V1 vcc 0 DC 12
        V2 vee 0 DC -12
        R1 in fb 10k
        R2 fb out 100k
        XU1 0 fb vcc vee out OA
        ---
        (opamp-model OA (part gp-bipolar) (pins in+ in- v+ v- out))
        (at-net in (source (range -0.5V 0.5V) (impedance 100)))

    Fails:
        * Heronpost level amplifier
        V1 vcc 0 DC 12
        V2 vee 0 DC -12
        R1 in fb 10k
        R2 fb out 100k
        XU1 0 fb vcc vee out OA
        ---
        (opamp-model OA (part gp-bipolar) (pins in+ in- v+ v- out))
    """
    for note in view.stage.reader_notes:
        if note.kind == "assumed":
            yield view.finding(note.message, note.origin, elements=note.elements)
