"""The output's DC error from the op-amps' input offset voltage and bias currents."""

from __future__ import annotations


from checker.analysis.dc_error import DcErrorTerms, dc_error_terms
from checker.changes import SeriesAtInput, apply_changes
from checker.engine import rule
from checker.findings import Severity, Suggestion
from checker.limits import within
from checker.preferred import nearest, series_for_tolerance
from checker.units import format_si


@rule("dc-error", "error",
      "The worst-case DC error at the output, from offset voltage and bias currents, is"
      " larger than the stage allows.",
      swing_fraction=0.01, balance_max_offset_ratio=0.5, balance_min_share=0.2)
def dc_error(view):
    """
    What it checks:
        The worst-case DC error at the stage output: for every op-amp, its input offset
        voltage times the solved DC transfer from an offset source in series with its
        input (the noise gain), plus its bias currents times the solved transfers from
        a current drawn out of each input (the resistance each input sees, carried to
        the output). Each input's current is taken as Ib +/- Ios/2 and every term adds
        with the sign that hurts. The sum must stay within the stage's `dc-error`
        requirement (error). Without a requirement an info note appears only when the
        error exceeds `swing_fraction` of the output's usable swing. Stages with an
        op-amp that has no negative feedback at DC, or an op-amp input with no DC path
        to any potential, are left to other rules.

    Why it matters:
        A DC error is a reading that is wrong before any signal arrives: it shifts the
        whole transfer, eats headroom and, after an ADC, counts as signal. In a stage
        with large resistors the bias currents of a bipolar input, flowing through
        unequal resistances at the two inputs, can outweigh the offset voltage by far.

    How the fix is computed:
        When the bias-current terms are at least `balance_min_share` of the op-amp's
        error and its offset current is at most `balance_max_offset_ratio` times its
        bias current (a bipolar input without bias cancellation), a resistor in series
        with the non-inverting input makes both inputs see the same resistance, so the
        bias currents cancel and only the offset current remains. Its value is the
        resistance the inverting input sees (Rf||Rg in an inverting or non-inverting
        stage, read from the solved transfers as T(ib-)/T(vos)) less what the
        non-inverting input already sees, snapped to the series the feedback
        resistors' tolerance implies (E96 or E24). Where the part's input resistance
        couples the two inputs, a few secant steps on copies of the stage find the
        value at which the solved bias-current transfers cancel exactly. The rule adds
        the snapped value to a copy of the stage, solves again and reports the error
        that remains. For a FET or CMOS
        input (tiny bias current, the offset voltage dominates) or a bias-cancelled
        part (offset current close to bias current) it says the resistor would not
        help and gives the offset voltage a part would need instead.

    Sources:
        Output error Vo = NG*Vos + Rf*Ib, and NG*Vos + Rf*Ios with the bias-balancing
        resistor Rf||Rg on the non-inverting input: Eggleston, Basic Electronics for
        Scientists and Engineers (Cambridge University Press, 2011), section 6.4.
        Worst-case addition of the terms and the 1 % of swing threshold: common
        practice.

    Passes:
        (stage level-amp (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 (part gp-bipolar) (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb 10k) (resistor R2 fb out 100k)
          (source in (range -0.1V 0.1V) (band 0Hz 10Hz))
          (load out (resistance 10k))
          (require (dc-error 50mV)))

    Fails:
        (stage level-amp (ground gnd) (supply vcc 15V) (supply vee -15V)
          (opamp U1 (part gp-bipolar) (in+ gnd) (in- fb) (out out) (v+ vcc) (v- vee))
          (resistor R1 in fb 10k) (resistor R2 fb out 100k)
          (source in (range -0.1V 0.1V) (band 0Hz 10Hz))
          (load out (resistance 10k))
          (require (dc-error 5mV)))
    """
    stage, figures, settings = view.stage, view.figures, view.settings
    if any(figures.loops[o.ref].feedback != "negative" for o in stage.opamps):
        return
    floating = figures.floating_nets
    if any({o.in_pos, o.in_neg} & floating for o in stage.opamps):
        return  # an input with no DC path: its error is unbounded (other rules say so)
    net = stage.output_net
    terms = dc_error_terms(figures, net)
    for item in terms:
        if item.missing:
            part = item.opamp.part
            yield view.cannot_check(f"the DC error from {item.opamp.ref}",
                                    f"part {part.name} gives no {', '.join(item.missing)};"
                                    " the error counts the other terms only",
                                    item.opamp.origin, (item.opamp.ref,))
    total = sum(t.total for t in terms)
    required = stage.require.dc_error_v
    if required is not None:
        limit, severity, against = required, None, "the required"  # the rule's own
    else:
        low, high = _usable_swing(stage, figures)
        if high - low <= 0:  # headroom beyond the supply: the rail-headroom rule says so
            yield view.cannot_check("the DC error against the output's swing",
                                    "the output has no usable swing (its part's headroom"
                                    " takes the whole supply)", stage.origin, ())
            return
        limit = settings["swing_fraction"] * (high - low)
        severity = Severity.INFO
        against = (f"{settings['swing_fraction'] * 100:g} % of the"
                   f" {format_si(high - low, 'V')} usable swing,")
    if within(total, limit):
        return
    worst = max(terms, key=lambda t: t.total)
    parts = "; ".join(_describe(t) for t in terms if t.total > 0)
    message = (f"the output's worst-case DC error is ±{format_si(total, 'V')}, beyond"
               f" {against} {format_si(limit, 'V')} ({parts})")
    yield view.finding(message, worst.opamp.origin,
                       elements=tuple(t.opamp.ref for t in terms if t.total > 0),
                       severity=severity, measured=total, limit=limit, unit="V",
                       suggestion=lambda: _suggest(view, worst, total, limit),
                       **{f"{t.opamp.ref}_{k}": v for t in terms for k, v in _details(t).items()},
                       **view.answers("dc-error"))


def _describe(terms: DcErrorTerms) -> str:
    return (f"{terms.opamp.ref}: offset voltage {format_si(terms.offset_voltage, 'V')} ×"
            f" noise gain {terms.noise_gain:.3g} = {format_si(terms.vos_term, 'V')},"
            f" bias and offset currents {format_si(terms.current_terms, 'V')}")


def _details(terms: DcErrorTerms) -> dict:
    return {"noise_gain": terms.noise_gain, "offset_voltage_term_v": terms.vos_term,
            "bias_current_term_v": terms.bias_term,
            "offset_current_term_v": terms.offset_current_term}


def _total(figures, stage) -> float:
    return sum(t.total for t in dc_error_terms(figures, stage.output_net))


def _usable_swing(stage, figures) -> tuple[float, float]:
    """The clip limits of the op-amp that drives the output (its rails less headroom)."""
    driver = next((o for o in stage.opamps if o.out == stage.output_net), stage.opamps[-1])
    node = figures.node_range(driver.out)
    return node.clip_low, node.clip_high


def _suggest(view, worst: DcErrorTerms, total: float, limit: float) -> Suggestion:
    settings = view.settings
    opamp, part = worst.opamp, worst.opamp.part
    others = total - worst.total
    if worst.total == 0 or worst.current_terms < settings["balance_min_share"] * worst.total:
        return _better_offset(view, worst, others, limit,
                              f"the offset voltage dominates ({format_si(worst.vos_term, 'V')}"
                              f" of {format_si(worst.total, 'V')}) and the bias currents of"
                              f" {part.name} are small: a balancing resistor would not help")
    if part.offset_current_a is None or part.bias_current_a is None:
        missing = "offset" if part.offset_current_a is None else "bias"
        return Suggestion(f"the part gives no {missing} current, so the effect of a"
                          " bias-balancing resistor cannot be worked out; lower the"
                          f" resistances around {opamp.ref}")
    if part.offset_current_a > settings["balance_max_offset_ratio"] * part.bias_current_a:
        return Suggestion(
            f"{part.name}'s offset current ({format_si(part.offset_current_a, 'A')}) is close to"
            f" its bias current ({format_si(part.bias_current_a, 'A')}), as in a bias-cancelled"
            " input: a balancing resistor on in+ would not help. Lower the resistances at"
            f" {opamp.ref}'s inputs or choose a part with a smaller bias current")
    return _balance(view, worst, total, limit)


def _better_offset(view, worst: DcErrorTerms, others: float, limit: float, why: str) -> Suggestion:
    room = limit - others - worst.current_terms
    if room <= 0 or worst.noise_gain == 0:
        return Suggestion(f"{why}; lower the noise gain or the resistances, or choose a part"
                          " with less offset voltage")
    needed = room / worst.noise_gain
    return Suggestion(f"{why}; a part with at most {format_si(needed, 'V')} of offset voltage"
                      f" (the limit less the current terms, over the noise gain"
                      f" {worst.noise_gain:.3g}) would meet it, or trim the offset",
                      value=needed, unit="V", element=worst.opamp.ref)


def _balance(view, worst: DcErrorTerms, total: float, limit: float) -> Suggestion:
    stage = view.stage
    opamp = worst.opamp
    # With a resistance R+ at in+, T(ib+) = -R+ * NG; T(ib-) = R- * NG (Rf in a plain
    # stage). Equal resistances cancel the bias terms: R+ = T(ib-)/NG.
    wanted = abs(worst.minus) / worst.noise_gain
    present = abs(worst.plus) / worst.noise_gain
    needed = wanted - present
    if needed <= 0.01 * wanted or wanted == 0:
        if wanted < 1e-3 * present:
            remedy = (f"put {format_si(present, 'Ω')} in {opamp.ref}'s feedback path, in"
                      " series with its inverting input")
        else:
            remedy = (f"scale the feedback network up by {present / wanted:.3g} (the gain"
                      " stays) so the inverting input sees as much")
        return Suggestion(
            f"{opamp.ref}'s non-inverting input already sees {format_si(present, 'Ω')}, at"
            f" least the {format_si(wanted, 'Ω')} its inverting input sees, so a resistor"
            f" there would not help: {remedy}, or choose a part with a smaller bias current")
    feedback = [p for p in stage.resistors() if opamp.in_neg in p.nets]
    tolerance = min((p.tolerance for p in feedback if p.tolerance), default=None)
    series = series_for_tolerance(tolerance)
    ref = _free_designator(stage)
    exact = _cancelling(view, opamp, ref, needed, abs(worst.minus))
    value = nearest(exact, series)
    balanced = view.reanalyse(with_series_resistor(stage, opamp.ref, ref, value))
    after = _total(balanced, stage)
    where = (f"from {opamp.ref}'s in+ to {opamp.in_pos}" if opamp.in_pos in stage.rail_voltages
             else f"in series with {opamp.ref}'s in+ (between it and net {opamp.in_pos})")
    text = (f"put {format_si(value, 'Ω')} ({ref}, {series}) {where}: at"
            f" {format_si(exact, 'Ω')} the two bias currents' solved effects at the output"
            f" cancel, and with {format_si(value, 'Ω')} the worst-case error falls from"
            f" {format_si(total, 'V')} to {format_si(after, 'V')}")
    if not within(after, limit):
        if after > 0.95 * total:
            return _better_offset(view, worst, total - worst.total, limit,
                                  f"a balancing resistor ({format_si(value, 'Ω')}) would"
                                  f" only take the error to {format_si(after, 'V')}")
        text += (f", still above {format_si(limit, 'V')}: also lower the resistances or"
                 " choose a part with less offset")
    return Suggestion(text, value=value, unit="Ω", element=ref,
                      changes=(SeriesAtInput(opamp.ref, ref, value),))


def _cancelling(view, opamp, ref: str, start: float, scale: float) -> float:
    """The resistance in series with in+ at which the solved transfers from the two bias
    currents to the output cancel, T(ib+) + T(ib-) = 0: secant steps from ``start`` (the
    estimate that ignores the part's input resistance between the inputs)."""
    stage, out = view.stage, view.stage.output_net

    def residual(ohms: float) -> float:
        figures = view.reanalyse(with_series_resistor(stage, opamp.ref, ref, ohms))
        return (figures.dc_transfer(out, ("ib+", opamp.ref))
                + figures.dc_transfer(out, ("ib-", opamp.ref)))

    x0, x1 = start, start * 1.1
    f0, f1 = residual(x0), residual(x1)
    for _ in range(8):
        if abs(f1) <= 1e-9 * scale or f1 == f0:
            break
        x2 = x1 - f1 * (x1 - x0) / (f1 - f0)
        x0, f0 = x1, f1
        x1 = x2 if x2 > 0 else x1 / 2
        f1 = residual(x1)
    return x1


def with_series_resistor(stage, opamp_ref: str, ref: str, ohms: float):
    """The stage with op-amp ``opamp_ref``'s non-inverting input moved to a new net that
    reaches its old net through a resistor of ``ohms``."""
    return apply_changes(stage, (SeriesAtInput(opamp_ref, ref, ohms),))


def _free_designator(stage) -> str:
    used = {p.ref for p in stage.passives}
    n = 1
    while f"R{n}" in used:
        n += 1
    return f"R{n}"
