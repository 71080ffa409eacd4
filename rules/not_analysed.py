"""What a netlist held that ampcheck did not analyse."""

from __future__ import annotations

from checker.engine import rule


@rule("not-analysed", "warning",
      "Part of a netlist was not analysed: the stage is checked without it.")
def not_analysed(view):
    """
    What it checks:
        Stages extracted from a netlist (docs/netlist.md) carry what the reader met and
        did not analyse: subcircuit instances the netlist map does not name, transistors,
        diodes, controlled and behavioural sources, digital parts, coupled inductors,
        element parameters that change a value, and dot-commands other than analysis and
        output commands (`.include`, `.param`, `.global`, ...). Each one is a finding at
        its netlist line, on the stage whose nets it touches (else on the file's first
        stage). Stages read from stage files never have any.

    Why it matters:
        ampcheck analyses linear op-amp stages. An element it cannot model is left out,
        so the figures describe the stage without it: a clamp diode, a transistor buffer
        or an unmapped op-amp can change them. Saying so is the honest alternative to
        guessing what the element does.

    How the fix is computed:
        Nothing to compute. Map an op-amp subcircuit with `(opamp-model NAME (part ...)
        (pins ...))` or a connector with `(connector NAME)` in the netlist map, write a
        parameter's value as a number, or accept the finding with a baseline or
        `--ignore not-analysed` when the element does not matter to the review.

    Sources:
        The netlist subset read is documented in docs/netlist.md (the element letters of
        the SPICE3 user's manual, University of California, Berkeley, chapter 2).

    Passes:
        * Heronpost level amplifier
        V1 vcc 0 DC 12
        V2 vee 0 DC -12
        R1 in fb 10k
        R2 fb out 100k
        XU1 0 fb vcc vee out OA
        ---
        (opamp-model OA (part gp-bipolar) (pins in+ in- v+ v- out))

    Fails:
        * Heronpost level amplifier with its status lamp driver
        V1 vcc 0 DC 12
        V2 vee 0 DC -12
        R1 in fb 10k
        R2 fb out 100k
        XU1 0 fb vcc vee out OA
        R10 out base 10k
        Q1 lamp base 0 NPN_SMALL
        .model NPN_SMALL NPN
        ---
        (opamp-model OA (part gp-bipolar) (pins in+ in- v+ v- out))
    """
    for note in view.stage.reader_notes:
        if note.kind == "not-analysed":
            yield view.finding(note.message, note.origin, elements=note.elements)
