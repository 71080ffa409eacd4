"""Each op-amp input's voltage against the part's input common-mode range."""

from __future__ import annotations

from checker.engine import rule
from checker.findings import Suggestion
from checker.limits import reaches, within
from checker.units import format_si


@rule("common-mode-range", "error",
      "Over the source's range an op-amp input leaves the part's common-mode range.")
def common_mode_range(view):
    """
    What it checks:
        For every op-amp (an input moved by a source that gives no range is reported as
        not checked), the extremes of each input net over the sources' declared
        ranges (a source with a band swings at its peak transfer over the band, its
        midpoint at DC), widened by the worst
        case of input offset voltage and bias currents, against the part's input
        common-mode range: from V- plus `input-range-low` to V+ plus
        `input-range-high` (a supply too narrow for those margins leaves no range at
        all: an error). An input outside it is an error; the inverting input is
        checked only when it is a different net from the non-inverting one, and, with
        negative feedback holding it at the non-inverting input's level, reported only
        when the non-inverting input is not already. An op-amp
        with an input on a net with no DC path has no DC level to check; the
        `floating-input` rule reports it.

    Why it matters:
        Outside its common-mode range an input stage saturates: the gain collapses,
        some parts flip the output phase and latch at a rail, and the reading is wrong
        with no sign that it is. Single-supply followers and non-inverting stages whose
        input runs near a rail meet this most often, and a bipolar or JFET input that
        does not reach its negative rail is the usual cause.

    How the fix is computed:
        The finding reports the input's extreme and the allowed window worked from the
        rails; the fix is to bias the input inside that window (shift the reference or
        the supplies) or to choose a part whose input range includes the rail.

    Sources:
        Superposition of the DC solution over the sources' ranges with offset and bias
        currents as sources (linear circuit theory). Common-mode input range as a
        limit on the inputs: R. Mancini (ed.), Op Amps for Everyone, 2nd ed. (Newnes,
        2003), chapter on op-amp parameters.

    Passes:
        (stage turbidity-buffer (ground gnd) (supply vcc 15V)
          (opamp U1 (part gp-bipolar) (in+ in) (in- out) (out out) (v+ vcc) (v- gnd))
          (source in (range 3V 10V) (band 0Hz 10Hz))
          (load out (resistance 10k)))

    Fails:
        (stage turbidity-buffer (ground gnd) (supply vcc 15V)
          (opamp U1 (part gp-bipolar) (in+ in) (in- out) (out out) (v+ vcc) (v- gnd))
          (source in (range 0.5V 10V) (band 0Hz 10Hz))
          (load out (resistance 10k)))
    """
    stage, figures = view.stage, view.figures
    rails = stage.rail_voltages
    floating = figures.floating_nets
    for opamp in stage.opamps:
        part = opamp.part
        if {opamp.in_pos, opamp.in_neg} & floating:
            continue  # no DC level to check: the floating-input rule reports it
        if part.input_range_low_v is None or part.input_range_high_v is None:
            yield view.cannot_check(f"the input common-mode range of {opamp.ref}",
                                    f"part {part.name} gives no input range", opamp.origin,
                                    (opamp.ref,))
            continue
        allowed_low = rails[opamp.v_neg] + part.input_range_low_v
        allowed_high = rails[opamp.v_pos] + part.input_range_high_v
        if allowed_low > allowed_high:  # the supply is narrower than the range's margins
            yield view.finding(
                f"{opamp.ref}'s input common-mode range needs more than the"
                f" {format_si(rails[opamp.v_pos] - rails[opamp.v_neg], 'V')} between its"
                f" rails: from {format_si(allowed_low, 'V')} up to"
                f" {format_si(allowed_high, 'V')} is no range, so no input voltage is inside"
                " it", opamp.origin, elements=(opamp.ref,), measured=allowed_high,
                limit=allowed_low, unit="V", allowed_low=allowed_low,
                allowed_high=allowed_high,
                suggestion=Suggestion(f"raise {opamp.ref}'s supply, or choose a part whose"
                                      " input range reaches its rails"))
            continue
        reported: list[str] = []
        pins = [("in+", opamp.in_pos)]
        if opamp.in_neg != opamp.in_pos:
            pins.append(("in-", opamp.in_neg))
        closed = figures.loops[opamp.ref].feedback == "negative"
        for pin, net in pins:
            unknown = figures.unranged_sources(net)
            if unknown:
                yield view.cannot_check(f"the common-mode range of {opamp.ref} {pin}",
                                        f"{', '.join(unknown)} gives no range or amplitude",
                                        opamp.origin, (opamp.ref,))
                continue
            node = figures.node_range(net)
            if within(node.high, allowed_high) and reaches(node.low, allowed_low):
                continue
            if pin == "in-" and closed and reported:
                continue  # feedback holds in- at in+: the same fault, reported once
            high_side = node.high - allowed_high >= allowed_low - node.low
            measured = node.high if high_side else node.low
            limit = allowed_high if high_side else allowed_low
            side = "above the top" if high_side else "below the bottom"
            reported.append(view.finding(
                f"{opamp.ref} {pin} (net {net}) reaches {format_si(measured, 'V')},"
                f" {format_si(abs(measured - limit), 'V')} {side} of the part's input"
                f" common-mode range {format_si(allowed_low, 'V')} to"
                f" {format_si(allowed_high, 'V')}",
                opamp.origin, elements=(opamp.ref,), measured=measured, limit=limit,
                unit="V", pin=pin, net=net, allowed_low=allowed_low,
                allowed_high=allowed_high,
                suggestion=Suggestion(
                    f"keep {net} between {format_si(allowed_low, 'V')} and"
                    f" {format_si(allowed_high, 'V')}: bias the input inside the range"
                    " (shift the reference or the supplies), or choose a part whose input"
                    " range includes the rail")))
        yield from reported
