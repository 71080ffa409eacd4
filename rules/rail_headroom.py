"""Output swing against the rails (the inputs' common-mode range is rules/common_mode_range.py)."""

from __future__ import annotations

from checker.engine import rule
from checker.findings import Severity, Suggestion
from checker.units import format_si


@rule("rail-headroom", "error",
      "Over the source's range an op-amp output clips at a rail or comes close to it.",
      margin_v=0.1)
def rail_headroom(view):
    """
    What it checks:
        For every op-amp with negative feedback, the DC extremes of its output over the
        sources' declared ranges (an AC amplitude counts at its peak gain over the
        band), widened by the worst case of input offset voltage and bias currents.
        The output may swing to each rail less the part's output headroom: beyond that
        it clips (error); within `margin_v` (or the stage's `headroom` requirement) of
        it, it is warned. The inputs' common-mode range is the `common-mode-range`
        rule's concern, and an op-amp with an input on a net with no DC path (no
        operating point to check) the `floating-input` rule's.

    Why it matters:
        A clipped output is a wrong reading with no sign that it is wrong, and an op-amp
        driven into its rail recovers slowly. A swing that only just fits leaves no
        room for part-to-part spread, temperature or a supply at its low limit.

    How the fix is computed:
        The rule reports the worst-case output, the usable swing between the clip
        limits, and, by the solved DC transfer from the source, the largest input range
        that fits; lower the gain, shift the reference, or widen the supplies to fit
        the rest.

    Sources:
        Superposition of the DC solution over the sources' ranges with offset and bias
        currents as sources (linear circuit theory); DC error terms as in Eggleston,
        Basic Electronics for Scientists and Engineers, section 6.4. Margin: common
        practice.
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
            yield from _output(view, opamp, margin)


def _output(view, opamp, margin):
    figures = view.figures
    node = figures.node_range(opamp.out)
    if node.clip_low is None:
        return
    over_high = node.high - node.clip_high
    over_low = node.clip_low - node.low
    worst_high = over_high >= over_low
    measured = node.high if worst_high else node.low
    limit = node.clip_high if worst_high else node.clip_low
    excess = max(over_high, over_low)
    if excess <= -margin:
        return
    severity = Severity.ERROR if excess > 0 else Severity.WARNING
    side = "upper" if worst_high else "lower"
    verb = (f"clips by {format_si(excess, 'V')} at the {side} limit" if excess > 0
            else f"comes within {format_si(-excess, 'V')} of the {side} limit")
    message = (f"{opamp.ref} output spans {format_si(node.low, 'V')} to"
               f" {format_si(node.high, 'V')} (offset and bias errors ±{format_si(node.error, 'V')})"
               f" against a usable swing of {format_si(node.clip_low, 'V')} to"
               f" {format_si(node.clip_high, 'V')}: it {verb}")
    window = _fitting_input(view, opamp.out)
    suggestion = Suggestion(f"inputs that fit: {window}" if window else
                            "lower the gain, shift the reference or widen the supplies")
    yield view.finding(message, opamp.origin, elements=(opamp.ref,), severity=severity,
                       measured=measured, limit=limit, unit="V", suggestion=suggestion,
                       usable_low=node.clip_low, usable_high=node.clip_high)


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
