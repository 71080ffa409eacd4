"""The input resistance each signal source sees."""

from __future__ import annotations

from checker.analysis.figures import signed_gain
from checker.analysis.topology import classify
from checker.changes import AddPassive, RemovePassive, SetValue, free_designator
from checker.engine import rule
from checker.limits import below, within
from checker.requirements import DEFAULT_GAIN_TOLERANCE
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
        over the source's band (at DC for a source with no band), solved at the
        source's net. It must reach the stated `input-resistance` requirement (error
        when it does not) and, whether or not one is stated, `ratio_to_source` times
        the source's own impedance (warning). Where the stage's gain requirement is
        not met from the source's side but would be from its net, this loading is
        named as its cause.

    Why it matters:
        The source impedance and the stage's input resistance form a voltage divider:
        the stage sees Zin/(Zs + Zin) of the source's voltage, a gain error that drifts
        with the sensor's impedance. Ten times the source impedance keeps the loss
        under 0.83 dB (9 %).

    How the fix is computed:
        For an inverting or summing input the input resistor is raised to the value
        that reaches the limit (next E96 or E24 value up, by its tolerance) and the
        feedback resistor is scaled by the same factor to keep the gain, while that
        feedback resistor stays within `max_feedback_ohm`. A T-network keeps the
        resistors moderate: R2 = R3 = the old feedback resistor and R4 from
        |G| = (R2 + R3 + R2*R3/R4)/R1. A non-inverting input or a follower buffers the
        source. Each is re-checked with every rule, and the first that clears the
        finding and brings in nothing is offered (a T-network raises the noise gain,
        which can cost bandwidth the band needs).

    Sources:
        Voltage divider loss 20 log10(Zin/(Zs + Zin)) and the ten-times rule: common
        practice. T-network gain: A. S. Sedra and K. C. Smith, Microelectronic Circuits,
        7th ed. (Oxford University Press, 2015), chapter 2 on the inverting
        configuration (the T-network feedback), checked against Lcapy in the tests.

    Passes:
        (stage conductivity-gain (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 (part gp-bipolar) (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb 100k) (resistor R2 fb out 1M)
          (source in (range -0.1V 0.1V) (band 0Hz 100Hz) (impedance 10k))
          (load out (resistance 10k)))

    Fails:
        (stage conductivity-gain (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 (part gp-bipolar) (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb 1k) (resistor R2 fb out 10k)
          (source in (range -0.1V 0.1V) (band 0Hz 100Hz) (impedance 10k))
          (load out (resistance 10k)))
    """
    stage, figures, settings = view.stage, view.figures, view.settings
    required = stage.require.input_resistance_ohm
    for sf in figures.sources:
        source = sf.source
        if source.kind != "voltage":
            continue
        zin = sf.input_resistance_min
        checks = []  # (limit, severity, reason, answers)
        if required is not None:
            checks.append((required, Severity.ERROR, "the required minimum",
                           view.answers("input-resistance")))
        if source.impedance_ohm:
            # loading is the cause of a gain that falls short from the source's side
            loading = view.answers("gain") if _loading_costs_the_gain(view, sf) else {}
            checks.append((settings["ratio_to_source"] * source.impedance_ohm,
                           Severity.WARNING,
                           f"{settings['ratio_to_source']:g}× the source's"
                           f" {format_si(source.impedance_ohm, 'Ω')}", loading))
        failing = [check for check in checks if below(zin, check[0])]
        if not failing:
            continue
        severity = failing[0][1]
        claims = tuple(k for item in failing for k in item[3].get("requirement", ()))
        answers = {"requirement": claims} if claims else {}
        loss_db = sf.loss_db
        loss_percent = (1 - 10 ** (-loss_db / 20)) * 100
        limits = " and ".join(f"{reason} ({format_si(limit, 'Ω')})"
                              for limit, _severity, reason, _answers in failing)
        message = f"{source.name} sees {format_si(zin, 'Ω')} of input resistance, below {limits}"
        if source.impedance_ohm:
            message += f"; loading loses {loss_percent:.1f} % ({loss_db:.2f} dB) of its signal"
        yield view.finding(message, source.origin, elements=(source.name,), severity=severity,
                           measured=zin, limit=max(item[0] for item in failing), unit="Ω",
                           suggestion=lambda: _suggest(view, source, zin,
                                                       max(item[0] for item in failing),
                                                       settings),
                           loss_db=loss_db, loss_percent=loss_percent, **answers)


def _loading_costs_the_gain(view, sf) -> bool:
    """True when the stage's gain requirement is not met from the source's side but would
    be from its net: the divider of the source's impedance and the input resistance is
    then what costs the gain."""
    stage = view.stage
    if not view.unmet("gain") or not stage.require.gain:
        return False
    band = stage.require.gain_tolerance or DEFAULT_GAIN_TOLERANCE
    from_net = signed_gain(sf.gain_mid)
    return within(abs(from_net / stage.require.gain - 1), band)


def _suggest(view, source, zin, limit, settings) -> list[Suggestion]:
    """Alternatives, most direct first (the engine offers the first whose re-check with
    every rule is clean): the input and feedback resistors raised together, a
    T-network where the feedback resistor would grow too large, a buffer."""
    stage = view.stage
    buffer = Suggestion(f"buffer {source.name} with a follower, or take it into a"
                        " non-inverting input, whose input resistance is the op-amp's own")
    for opamp in stage.opamps:
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
        # The gain to keep, from the source's side: the stated one, else the drawn ratio
        # Rf/R1. With the source's impedance Rs in series with R1, an inverting input
        # gives |G| = Rf/(R1 + Rs) (ideal op-amp; the re-check solves it exactly).
        wanted = abs(stage.require.gain) if stage.require.gain else rf.value / r1.value
        rs = source.impedance_ohm or 0.0
        gain = wanted * (new_r1 + rs) / new_r1
        new_rf = nearest(wanted * (new_r1 + rs), series_for_tolerance(rf.tolerance))
        found = []
        if new_rf <= settings["max_feedback_ohm"]:
            found.append(Suggestion(
                f"raise {r1.ref} to {format_si(new_r1, 'Ω')} and {rf.ref} to"
                f" {format_si(new_rf, 'Ω')} ({series}); the gain from the source is then"
                f" about {-new_rf / (new_r1 + rs):.3g}",
                value=new_r1, unit="Ω", element=r1.ref,
                changes=(SetValue(r1.ref, new_r1), SetValue(rf.ref, new_rf))))
        r = rf.value
        denominator = gain * new_r1 - 2 * r
        if denominator > 0 and not topology.tee_elements:
            r4 = nearest(r * r / denominator, "E96")
            tee = f"{opamp.in_neg}.tee"
            refs: list[str] = []
            for _ in range(3):
                refs.append(free_designator(stage, "R", set(refs) - {rf.ref}))
            refs = [rf.ref] + refs[:2]  # the feedback resistor becomes the tee's first arm
            found.append(Suggestion(
                f"raise {r1.ref} to {format_si(new_r1, 'Ω')} and replace {rf.ref} by a"
                f" T-network: {rf.ref} {format_si(r, 'Ω')} from {opamp.in_neg} to a tee,"
                f" {refs[1]} {format_si(r, 'Ω')} from the tee to {opamp.out}, {refs[2]}"
                f" {format_si(r4, 'Ω')} from the tee to {stage.ground} (gain from the"
                f" source about {-(2 * r + r * r / r4) / (new_r1 + rs):.3g})",
                value=new_r1, unit="Ω", element=r1.ref,
                changes=(SetValue(r1.ref, new_r1), RemovePassive(rf.ref),
                         AddPassive(rf.ref, "resistor", opamp.in_neg, tee, r, rf.tolerance),
                         AddPassive(refs[1], "resistor", tee, opamp.out, r, rf.tolerance),
                         AddPassive(refs[2], "resistor", tee, stage.ground, r4,
                                    rf.tolerance))))
        return found + [buffer]
    return [buffer]
