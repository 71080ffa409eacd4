"""The span across an op-amp's supply pins against the part's supply limits."""

from __future__ import annotations

from checker.engine import rule
from checker.findings import Severity, Suggestion
from checker.limits import above, below
from checker.units import format_si


@rule("supply-range", "warning",
      "The supply span across an op-amp is outside the part's operating range, or beyond"
      " its absolute maximum.")
def supply_range(view):
    """
    What it checks:
        For every op-amp, the span between the rails on its v+ and v- pins. Beyond the
        part's `supply-abs-max` it is an error; outside `supply-min` to `supply-max`
        (the operating range) it is a warning. A part that gives neither a minimum nor
        a maximum cannot be checked on that side, and the rule says so.

    Why it matters:
        The absolute maximum is the span at which the part may be damaged; nothing is
        promised there, and on a live rail it can fail at once or years later. Between
        the operating maximum and the absolute maximum the part survives but its data
        (offset, bandwidth, output swing) no longer hold. Below the operating minimum
        the internal bias does not start properly: the output may stick at a rail or
        oscillate.

    How the fix is computed:
        The nearest span the part allows (its operating minimum or maximum) is given,
        with the alternative: a part rated for the span drawn.

    Sources:
        Operating range against absolute maximum ratings, as data sheets separate
        them: common practice.

    Passes:
        (stage gauge-buffer (ground gnd) (supply vcc 5V)
          (opamp U1 (part cmos-rrio) (in+ in) (in- out) (out out) (v+ vcc) (v- gnd))
          (source in (range 0.5V 3V) (band 0Hz 10Hz))
          (load out (resistance 10k)))

    Fails:
        (stage gauge-buffer (ground gnd) (supply vcc 12V)
          (opamp U1 (part cmos-rrio) (in+ in) (in- out) (out out) (v+ vcc) (v- gnd))
          (source in (range 0.5V 3V) (band 0Hz 10Hz))
          (load out (resistance 10k)))
    """
    rails = view.stage.rail_voltages
    for opamp in view.stage.opamps:
        part = opamp.part
        span = rails[opamp.v_pos] - rails[opamp.v_neg]
        where = f"{opamp.ref}'s supply pins ({opamp.v_pos} to {opamp.v_neg})"
        high_limit = part.supply_max_v if part.supply_max_v is not None \
            else part.supply_abs_max_v
        if part.supply_abs_max_v is not None and above(span, part.supply_abs_max_v):
            allowed = part.supply_max_v if part.supply_max_v is not None \
                else part.supply_abs_max_v
            yield view.finding(
                f"{where} span {format_si(span, 'V')}, beyond the absolute maximum of part"
                f" {part.name} ({format_si(part.supply_abs_max_v, 'V')}): the part may be"
                " damaged", opamp.origin, elements=(opamp.ref,), severity=Severity.ERROR,
                measured=span, limit=part.supply_abs_max_v, unit="V",
                suggestion=_suggestion(opamp, span, allowed, "at most"))
        elif part.supply_max_v is not None and above(span, part.supply_max_v):
            yield view.finding(
                f"{where} span {format_si(span, 'V')}, above the operating maximum of part"
                f" {part.name} ({format_si(part.supply_max_v, 'V')}); its data no longer"
                " hold there", opamp.origin, elements=(opamp.ref,),
                severity=Severity.WARNING, measured=span, limit=part.supply_max_v, unit="V",
                suggestion=_suggestion(opamp, span, part.supply_max_v, "at most"))
        elif high_limit is None:
            yield view.cannot_check(f"the highest supply span of {opamp.ref}",
                                    f"part {part.name} gives no supply maximum",
                                    opamp.origin, (opamp.ref,))
        if part.supply_min_v is None:
            yield view.cannot_check(f"the lowest supply span of {opamp.ref}",
                                    f"part {part.name} gives no supply minimum",
                                    opamp.origin, (opamp.ref,))
        elif below(span, part.supply_min_v):
            yield view.finding(
                f"{where} span only {format_si(span, 'V')}, below the operating minimum of"
                f" part {part.name} ({format_si(part.supply_min_v, 'V')}): it may not start"
                " or bias properly", opamp.origin, elements=(opamp.ref,),
                severity=Severity.WARNING, measured=span, limit=part.supply_min_v, unit="V",
                suggestion=_suggestion(opamp, span, part.supply_min_v, "at least"))


def _suggestion(opamp, span: float, allowed: float, bound: str) -> Suggestion:
    return Suggestion(f"run {opamp.ref} from a span of {bound} {format_si(allowed, 'V')},"
                      f" or choose a part rated for {format_si(span, 'V')}",
                      value=allowed, unit="V", element=opamp.ref)
