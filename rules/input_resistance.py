"""The input resistance each signal source sees."""

from __future__ import annotations

from checker.analysis.topology import classify
from checker.engine import rule
from checker.findings import Severity, Suggestion
from checker.preferred import at_least, nearest, series_for_tolerance
from checker.units import format_si


@rule("input-resistance", "warning",
      "A source sees an input resistance below the requirement or below ten times its own"
      " impedance.",
      ratio_to_source=10.0, max_feedback_ohm=1e6)
def input_resistance(view):
    """
    What it checks:
        For every voltage source, the smallest magnitude of the stage's input impedance
        over the source's band, solved at the source's net. It must reach the stated
        `input-resistance` requirement (error when it does not) or, without one,
        `ratio_to_source` times the source's own impedance (warning).

    Why it matters:
        The source impedance and the stage's input resistance form a voltage divider:
        the stage sees Zin/(Zs + Zin) of the source's voltage, a gain error that drifts
        with the sensor's impedance. Ten times the source impedance keeps the loss
        under 0.83 dB (9 %).

    How the fix is computed:
        For an inverting or summing input the input resistor is raised to the value
        that reaches the limit (next E96 or E24 value up, by its tolerance) and the
        feedback resistor is scaled by the same factor to keep the gain. When that
        feedback resistor would exceed `max_feedback_ohm`, a T-network keeps the
        resistors moderate: R2 = R3 = the old feedback resistor and R4 from
        |G| = (R2 + R3 + R2*R3/R4)/R1. Otherwise, or for other topologies, a
        non-inverting input or a follower buffers the source.

    Sources:
        Voltage divider loss 20 log10(Zin/(Zs + Zin)) and the ten-times rule: common
        practice. T-network gain: any analog electronics textbook (e.g. Sedra and
        Smith, Microelectronic Circuits, op-amp chapter).
    """
    stage, figures, settings = view.stage, view.figures, view.settings
    for sf in figures.sources:
        source = sf.source
        if source.kind != "voltage":
            continue
        zin = sf.input_resistance_min
        required = stage.require.input_resistance_ohm
        if required is not None:
            limit, severity, reason = required, Severity.ERROR, "the required minimum"
        elif source.impedance_ohm:
            limit = settings["ratio_to_source"] * source.impedance_ohm
            severity = Severity.WARNING
            reason = f"{settings['ratio_to_source']:g}× the source's {format_si(source.impedance_ohm, 'Ω')}"
        else:
            continue
        if zin >= limit:
            continue
        loss_db = sf.loss_db
        loss_percent = (1 - 10 ** (-loss_db / 20)) * 100
        message = (f"{source.name} sees {format_si(zin, 'Ω')} of input resistance, below"
                   f" {reason} ({format_si(limit, 'Ω')})")
        if source.impedance_ohm:
            message += f"; loading loses {loss_percent:.1f} % ({loss_db:.2f} dB) of its signal"
        yield view.finding(message, source.origin, elements=(source.name,), severity=severity,
                           measured=zin, limit=limit, unit="Ω",
                           suggestion=_suggest(view, source, zin, limit, settings),
                           loss_db=loss_db, loss_percent=loss_percent)


def _suggest(view, source, zin, limit, settings) -> Suggestion:
    stage = view.stage
    for opamp in stage.opamps if zin > 0 else ():  # zero: the net is held, no resistor helps
        topology = classify(stage, opamp)
        if topology.name not in ("inverting", "summing", "T-network inverting"):
            continue
        inputs = [p for p in stage.resistors() if source.net in p.nets
                  and opamp.in_neg in (p.other(source.net),)]
        feedback = [stage.element(r) for r in topology.feedback_elements
                    if stage.element(r).kind == "resistor"]
        if not inputs or not feedback:
            continue
        r1, rf = inputs[0], feedback[0]
        series = series_for_tolerance(r1.tolerance)
        new_r1 = at_least(r1.value * limit / zin * 1.0001, series)
        gain = rf.value / r1.value
        new_rf = nearest(rf.value * new_r1 / r1.value, series_for_tolerance(rf.tolerance))
        if new_rf <= settings["max_feedback_ohm"]:
            return Suggestion(f"raise {r1.ref} to {format_si(new_r1, 'Ω')} and {rf.ref} to"
                              f" {format_si(new_rf, 'Ω')} ({series}); gain stays"
                              f" {-new_rf / new_r1:.3g}", value=new_r1, unit="Ω",
                              element=r1.ref)
        r = rf.value
        denominator = gain * new_r1 - 2 * r
        if denominator > 0:
            r4 = nearest(r * r / denominator, "E96")
            return Suggestion(
                f"raise {r1.ref} to {format_si(new_r1, 'Ω')} and replace {rf.ref} by a"
                f" T-network: {format_si(r, 'Ω')} from {opamp.in_neg} to a tee,"
                f" {format_si(r, 'Ω')} from the tee to {opamp.out}, {format_si(r4, 'Ω')} from"
                f" the tee to ground (gain {-(2 * r + r * r / r4) / new_r1:.3g})",
                value=new_r1, unit="Ω", element=r1.ref)
    return Suggestion(f"buffer {source.name} with a follower, or take it into a"
                      " non-inverting input, whose input resistance is the op-amp's own")

