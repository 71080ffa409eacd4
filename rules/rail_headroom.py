"""Output swing against the rails (the inputs' common-mode range is rules/common_mode_range.py)."""

from __future__ import annotations

from checker.engine import rule
from checker.findings import Severity, Suggestion
from checker.limits import above
from checker.output_load import heavier_than_rated
from checker.units import format_si


@rule("rail-headroom", "error",
      "Over the source's range an op-amp output clips at a rail or comes close to it.",
      margin_v=0.1)
def rail_headroom(view):
    """
    What it checks:
        For every op-amp with negative feedback, the extremes of its output over the
        sources' declared ranges (a source with a band swings at its peak gain over
        the band, its midpoint at the DC gain, so a coupling capacitor's gain counts),
        widened by the worst case of input offset voltage and bias currents; a
        source that moves the output but gives no range leaves its extremes unknown,
        and the rule says it could not check.
        The output may swing to each rail less the part's output headroom (which a
        part states into its `headroom-load`; a load more than 10 % heavier is noted
        as not checked, since the swing is then smaller, counting what the output
        drives as the signal moves it: its load and feedback network together): beyond
        that
        it clips (error); within `margin_v` (or the stage's `headroom` requirement) of
        it, it is warned. Headroom that takes more than the supply between the rails
        leaves no swing at all (error). The inputs' common-mode range is the `common-mode-range`
        rule's concern, and an op-amp with an input on a net with no DC path (no
        operating point to check) the `floating-input` rule's.

    Why it matters:
        A clipped output is a wrong reading with no sign that it is wrong, and an op-amp
        driven into its rail recovers slowly. A swing that only just fits leaves no
        room for part-to-part spread, temperature or a supply at its low limit.

    How the fix is computed:
        A sensor's range is what it delivers, so the fix is in the stage: where the
        swing is wider than the room between the clip limits (less the margin each
        side), the factor by which to lower the gain; where it would fit but sits off
        centre, the shift of the output's level that centres it (a reference or offset
        at the input); the supply voltages that would hold the output as it is; or a
        part whose output swings closer to its rails. Both sides are named when the
        output comes too close to both. For reference it also gives, by the solved DC
        transfer, the input range that fits as built.

    Sources:
        Superposition of the DC solution over the sources' ranges with offset and bias
        currents as sources (linear circuit theory); DC error terms as in Eggleston,
        Basic Electronics for Scientists and Engineers, section 6.4. Margin: common
        practice.

    Passes:
        (stage level-amp (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 (part gp-bipolar) (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb 10k) (resistor R2 fb out 100k)
          (source in (range -1V 1V) (band 0Hz 10Hz))
          (load out (resistance 100k)))

    Fails:
        (stage level-amp (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 (part gp-bipolar) (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb 10k) (resistor R2 fb out 100k)
          (source in (range -1.4V 1.4V) (band 0Hz 10Hz))
          (load out (resistance 100k)))
    """
    stage, figures, settings = view.stage, view.figures, view.settings
    margin = stage.require.headroom_v if stage.require.headroom_v is not None \
        else settings["margin_v"]
    floating = figures.floating_nets
    for opamp in stage.opamps:
        part = opamp.part
        if {opamp.in_pos, opamp.in_neg} & floating:
            continue  # no DC operating point: the floating-input rule reports it
        if figures.loops[opamp.ref].feedback == "negative":
            if part.output_headroom_high_v is None or part.output_headroom_low_v is None:
                yield view.cannot_check(f"the output headroom of {opamp.ref}",
                                        f"part {part.name} gives no output headroom; the"
                                        " rails were used as the limits",
                                        opamp.origin, (opamp.ref,))
            yield from _heavier_load(view, opamp)
            yield from _output(view, opamp, margin)


def _heavier_load(view, opamp):
    """A part's headroom holds into its `headroom-load` or more; a heavier load on the
    output (a smaller resistance, the feedback network counted) makes it swing less
    than the figures assume."""
    heavier = heavier_than_rated(view.figures, opamp)
    if heavier:
        yield view.cannot_check(f"the full output swing of {opamp.ref}",
                                f"part {opamp.part.name} states its output headroom into"
                                f" {format_si(opamp.part.headroom_load_ohm, 'Ω')} or more,"
                                f" and {heavier}: it swings less than the headroom used"
                                " here", opamp.origin, (opamp.ref,))


def _output(view, opamp, margin):
    figures = view.figures
    node = figures.node_range(opamp.out)
    if node.clip_low is None:
        return
    unknown = figures.unranged_sources(opamp.out)
    if unknown:
        yield view.cannot_check(f"the output swing of {opamp.ref}",
                                f"{', '.join(unknown)} {'gives' if len(unknown) == 1 else 'give'}"
                                " no range or amplitude, so the output's extremes are"
                                " unknown", opamp.origin, (opamp.ref,))
        return
    if node.clip_high is not None and node.clip_low >= node.clip_high:
        rails = view.stage.rail_voltages
        span = rails[opamp.v_pos] - rails[opamp.v_neg]
        part = opamp.part
        yield view.finding(
            f"{opamp.ref}'s output headroom ({format_si(part.output_headroom_high_v or 0.0, 'V')}"
            f" below v+, {format_si(part.output_headroom_low_v or 0.0, 'V')} above v-) takes"
            f" more than the {format_si(span, 'V')} between its rails: the output has no"
            " usable swing at all", opamp.origin, elements=(opamp.ref,),
            severity=Severity.ERROR, measured=span, limit=(part.output_headroom_high_v or 0.0)
            + (part.output_headroom_low_v or 0.0), unit="V",
            suggestion=Suggestion(f"raise {opamp.ref}'s supply above the part's"
                                  " headroom, or choose a part whose output swings closer"
                                  " to its rails"),
            usable_low=node.clip_low, usable_high=node.clip_high, sides=["upper", "lower"],
            **view.answers("headroom"))
        return
    over_high = node.high - node.clip_high
    over_low = node.clip_low - node.low
    sides = [(side, excess) for side, excess in (("upper", over_high), ("lower", over_low))
             if above(excess, -margin)]
    if not sides:
        return
    excess = max(over_high, over_low)
    worst_high = over_high >= over_low
    measured = node.high if worst_high else node.low
    limit = node.clip_high if worst_high else node.clip_low
    severity = Severity.ERROR if excess > 0 else Severity.WARNING

    def verb(side: str, amount: float) -> str:
        return (f"clips by {format_si(amount, 'V')} at the {side} limit" if amount > 0
                else f"comes within {format_si(-amount, 'V')} of the {side} limit")

    verbs = " and ".join(verb(side, amount) for side, amount in sides)
    message = (f"{opamp.ref} output spans {format_si(node.low, 'V')} to"
               f" {format_si(node.high, 'V')} (offset and bias errors ±{format_si(node.error, 'V')})"
               f" against a usable swing of {format_si(node.clip_low, 'V')} to"
               f" {format_si(node.clip_high, 'V')}: it {verbs}")
    yield view.finding(message, opamp.origin, elements=(opamp.ref,), severity=severity,
                       measured=measured, limit=limit, unit="V",
                       suggestion=_remedy(view, opamp, node, margin),
                       usable_low=node.clip_low, usable_high=node.clip_high,
                       sides=[side for side, _excess in sides], **view.answers("headroom"))


def _remedy(view, opamp, node, margin) -> Suggestion:
    """What a designer can change in this circuit: the gain, the level the output sits
    at, the rails, or an output that reaches closer to them; the source's own range is
    what the sensor gives and is not among them."""
    usable = node.clip_high - node.clip_low - 2 * margin
    span = node.high - node.low
    rails = view.stage.rail_voltages
    options = []
    if span > usable > 0 and span > 2 * node.error:
        signal = span - 2 * node.error
        room = usable - 2 * node.error
        if room > 0:
            options.append(f"lower the gain by a factor {signal / room:.3g} (the signal's"
                           f" {format_si(signal, 'V')} of swing into the"
                           f" {format_si(room, 'V')} left inside the limits, less"
                           f" {format_si(margin, 'V')} each side)")
    else:
        centre = (node.clip_high + node.clip_low) / 2
        shift = centre - (node.high + node.low) / 2
        options.append(f"shift the output's level by {format_si(shift, 'V')} (a reference"
                       f" or offset at the input that moves the output's centre to"
                       f" {format_si(centre, 'V')})")
    headroom_high = rails[opamp.v_pos] - node.clip_high
    headroom_low = node.clip_low - rails[opamp.v_neg]
    needed_high = node.high + margin + headroom_high
    needed_low = node.low - margin - headroom_low
    rail_text = []
    if needed_high > rails[opamp.v_pos]:
        rail_text.append(f"{opamp.v_pos} to at least {format_si(needed_high, 'V')}")
    if needed_low < rails[opamp.v_neg]:
        name = opamp.v_neg if opamp.v_neg != view.stage.ground else "a negative rail"
        rail_text.append(f"{name} to at most {format_si(needed_low, 'V')}")
    if rail_text:
        options.append("widen the supplies (" + ", ".join(rail_text) + ")")
    options.append(f"or choose a part for {opamp.ref} whose output swings closer to its"
                   " rails")
    window = _fitting_input(view, opamp.out)
    if window:
        options.append(f"(for reference, the input range that fits as built: {window})")
    return Suggestion("; ".join(options), element=opamp.ref)


def _fitting_input(view, net) -> str | None:
    figures = view.figures
    parts = []
    for i, source in enumerate(view.stage.sources):
        window = figures.input_window(net, i)
        if window is None:
            continue
        unit = "V" if source.kind == "voltage" else "A"
        parts.append(f"{source.name} from {format_si(window[0], unit)} to"
                     f" {format_si(window[1], unit)} (declared {format_si(source.low, unit)}"
                     f" to {format_si(source.high, unit)})")
    return "; ".join(parts) or None
